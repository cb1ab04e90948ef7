"""Projects and memberships."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from porecast.db.models import ROLES, Grid, Membership, Project, User, Well

from . import activity, storage
from .auth import find_user
from .authz import require_project
from .errors import Conflict, InvalidInput, NotFound


def create_project(
    db: Session, user: User, name: str, description: str, *, now: datetime
) -> Project:
    """Any user may create a project and becomes its owner."""
    project = Project(name=name, description=description, created_by_id=user.id, created_at=now)
    db.add(project)
    db.flush()
    db.add(Membership(project_id=project.id, user_id=user.id, role="owner", created_at=now))
    activity.record(db, project.id, user, "project.created", "project", project.id,
                    f"{user.username} created the project", now=now)
    db.flush()
    return project


def list_projects(db: Session, user: User) -> list[tuple[Project, str]]:
    """Projects the caller belongs to, with the caller's role."""
    rows = db.execute(
        select(Project, Membership.role)
        .join(Membership, Membership.project_id == Project.id)
        .where(Membership.user_id == user.id)
        .order_by(Project.name, Project.id)
    )
    return [(p, r) for p, r in rows]


def get_project(db: Session, user: User, project_id: int) -> tuple[Project, str]:
    """A project the caller belongs to, with the caller's role."""
    member = require_project(db, user, project_id, "read_summary")
    project = db.get(Project, project_id)
    assert project is not None  # membership implies the row (foreign key)
    return project, member.role


def update_project(
    db: Session, user: User, project_id: int, *, name: str | None, description: str | None,
    now: datetime,
) -> Project:
    """Rename or re-describe a project (owners)."""
    require_project(db, user, project_id, "manage")
    project = db.get(Project, project_id)
    assert project is not None
    if name is not None:
        project.name = name
    if description is not None:
        project.description = description
    activity.record(db, project_id, user, "project.updated", "project", project_id,
                    f"{user.username} updated the project settings", now=now)
    return project


def delete_project(db: Session, user: User, project_id: int, files_dir) -> None:
    """Delete a project, its rows (cascade) and, after commit, its files (owners)."""
    require_project(db, user, project_id, "manage")
    for well in db.scalars(select(Well).where(Well.project_id == project_id)):
        storage.remove_after_commit(db, storage.stored_path(files_dir, "wells", well.file_name))
    for grid in db.scalars(select(Grid).where(Grid.project_id == project_id)):
        storage.remove_after_commit(db, storage.stored_path(files_dir, "grids", grid.file_name))
    project = db.get(Project, project_id)
    db.delete(project)


# --------------------------------------------------------------------------- members


def list_members(db: Session, user: User, project_id: int) -> list[Membership]:
    """Members of a project, by user name."""
    require_project(db, user, project_id, "read_summary")
    return list(
        db.scalars(
            select(Membership)
            .join(User, User.id == Membership.user_id)
            .where(Membership.project_id == project_id)
            .order_by(User.username)
        )
    )


def _check_role(role: str) -> None:
    if role not in ROLES:
        raise InvalidInput(f"unknown role {role!r}", [{"loc": "role", "msg": f"one of {ROLES}"}])


def _owner_count(db: Session, project_id: int) -> int:
    return db.scalar(
        select(func.count()).select_from(Membership).where(
            Membership.project_id == project_id, Membership.role == "owner"
        )
    ) or 0


def add_member(
    db: Session, user: User, project_id: int, username: str, role: str, *, now: datetime
) -> Membership:
    """Add a user to a project with a role (owners)."""
    require_project(db, user, project_id, "manage")
    _check_role(role)
    other = find_user(db, username)
    if other is None:
        raise InvalidInput(f"no user named {username!r}", [{"loc": "username", "msg": "unknown"}])
    exists = db.scalar(
        select(Membership).where(
            Membership.project_id == project_id, Membership.user_id == other.id
        )
    )
    if exists is not None:
        raise Conflict(f"{other.username} is already a member")
    member = Membership(project_id=project_id, user_id=other.id, role=role, created_at=now)
    db.add(member)
    activity.record(db, project_id, user, "member.added", "user", other.id,
                    f"{user.username} added {other.username} as {role}", now=now)
    db.flush()
    return member


def _member_of(db: Session, project_id: int, user_id: int) -> Membership:
    member = db.scalar(
        select(Membership).where(
            Membership.project_id == project_id, Membership.user_id == user_id
        )
    )
    if member is None:
        raise NotFound("member not found")
    return member


def change_role(
    db: Session, user: User, project_id: int, user_id: int, role: str, *, now: datetime
) -> Membership:
    """Change a member's role (owners); the last owner cannot step down."""
    require_project(db, user, project_id, "manage")
    _check_role(role)
    member = _member_of(db, project_id, user_id)
    if member.role == "owner" and role != "owner" and _owner_count(db, project_id) == 1:
        raise Conflict("a project needs at least one owner")
    member.role = role
    activity.record(db, project_id, user, "member.role_changed", "user", user_id,
                    f"{user.username} made {member.user.username} {role}", now=now)
    return member


def remove_member(db: Session, user: User, project_id: int, user_id: int, *, now: datetime) -> None:
    """Remove a member (owners); the last owner cannot be removed."""
    require_project(db, user, project_id, "manage")
    member = _member_of(db, project_id, user_id)
    if member.role == "owner" and _owner_count(db, project_id) == 1:
        raise Conflict("a project needs at least one owner")
    activity.record(db, project_id, user, "member.removed", "user", user_id,
                    f"{user.username} removed {member.user.username}", now=now)
    db.delete(member)
