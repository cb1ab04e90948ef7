"""Projects, members and the activity feed."""

from __future__ import annotations

from typing import cast

from fastapi import APIRouter, Query

from porecast.services import activity as activity_service
from porecast.services import projects as project_service

from .. import schemas as s
from ..deps import MAX_ID, CurrentUser, IdPath, NowDep, SessionDep, SettingsDep
from ..errors import AUTH, MEMBER, R401, R409

router = APIRouter(prefix="/projects", tags=["projects"])


def _out(project, role: str) -> s.ProjectOut:
    return s.ProjectOut(id=project.id, name=project.name, description=project.description,
                        created_at=project.created_at, role=cast(s.Role, role))


@router.get("", response_model=list[s.ProjectOut], responses=R401)
def list_projects(user: CurrentUser, db: SessionDep) -> list[s.ProjectOut]:
    """Projects you are a member of."""
    return [_out(p, r) for p, r in project_service.list_projects(db, user)]


@router.post("", response_model=s.ProjectOut, status_code=201, responses=AUTH)
def create_project(body: s.ProjectIn, user: CurrentUser, db: SessionDep, now: NowDep
                   ) -> s.ProjectOut:
    """Create a project; you become its owner."""
    project = project_service.create_project(db, user, body.name, body.description, now=now)
    return _out(project, "owner")


@router.get("/{project_id}", response_model=s.ProjectOut, responses=MEMBER)
def get_project(project_id: IdPath, user: CurrentUser, db: SessionDep) -> s.ProjectOut:
    """One project."""
    return _out(*project_service.get_project(db, user, project_id))


@router.patch("/{project_id}", response_model=s.ProjectOut, responses=MEMBER)
def update_project(project_id: IdPath, body: s.ProjectPatch, user: CurrentUser, db: SessionDep,
                   now: NowDep) -> s.ProjectOut:
    """Rename or re-describe a project (owners)."""
    project = project_service.update_project(db, user, project_id, name=body.name,
                                             description=body.description, now=now)
    return _out(project, "owner")


@router.delete("/{project_id}", status_code=204, responses=MEMBER)
def delete_project(project_id: IdPath, user: CurrentUser, db: SessionDep, settings: SettingsDep
                   ) -> None:
    """Delete a project with everything in it (owners)."""
    project_service.delete_project(db, user, project_id, settings.files_dir)


@router.get("/{project_id}/members", response_model=list[s.MemberOut], responses=MEMBER)
def list_members(project_id: IdPath, user: CurrentUser, db: SessionDep) -> list[s.MemberOut]:
    """Members of a project and their roles."""
    return [s.MemberOut.of(m) for m in project_service.list_members(db, user, project_id)]


@router.post("/{project_id}/members", response_model=s.MemberOut, status_code=201,
             responses=MEMBER | R409)
def add_member(project_id: IdPath, body: s.MemberIn, user: CurrentUser, db: SessionDep,
               now: NowDep) -> s.MemberOut:
    """Add a user to the project with a role (owners)."""
    return s.MemberOut.of(project_service.add_member(db, user, project_id, body.username,
                                                     body.role, now=now))


@router.patch("/{project_id}/members/{user_id}", response_model=s.MemberOut,
              responses=MEMBER | R409)
def change_role(project_id: IdPath, user_id: IdPath, body: s.MemberPatch, user: CurrentUser,
                db: SessionDep, now: NowDep) -> s.MemberOut:
    """Change a member's role (owners)."""
    return s.MemberOut.of(project_service.change_role(db, user, project_id, user_id, body.role,
                                                      now=now))


@router.delete("/{project_id}/members/{user_id}", status_code=204, responses=MEMBER | R409)
def remove_member(project_id: IdPath, user_id: IdPath, user: CurrentUser, db: SessionDep,
                  now: NowDep) -> None:
    """Remove a member (owners)."""
    project_service.remove_member(db, user, project_id, user_id, now=now)


@router.get("/{project_id}/activity", response_model=list[s.ActivityOut], responses=MEMBER)
def activity_feed(
    project_id: IdPath,
    user: CurrentUser,
    db: SessionDep,
    limit: int = Query(50, ge=1, le=500),
    before_id: int | None = Query(None, ge=1, le=MAX_ID),
) -> list[s.ActivityOut]:
    """Recent activity in the project, newest first."""
    entries = activity_service.feed(db, user, project_id, limit=limit, before_id=before_id)
    return [s.ActivityOut.of(a) for a in entries]
