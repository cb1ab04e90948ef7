"""Authorisation: deny by default, membership first, then role.

An object in a project the caller is not a member of is reported as missing
(:class:`NotFound`) so its existence does not leak; a member whose role lacks
the capability gets :class:`PermissionDenied`.
"""

from __future__ import annotations

from typing import Any, TypeVar

from sqlalchemy import select
from sqlalchemy.orm import Session

from porecast.db.models import ROLES, SECTION_ROLES, Membership, User

from .errors import NotFound, PermissionDenied

_DISCIPLINES = frozenset(SECTION_ROLES.values())
_READERS = frozenset({"owner", *_DISCIPLINES, "reviewer"})

#: Capability -> roles holding it. Anything not listed is denied.
CAPABILITIES: dict[str, frozenset[str]] = {
    # project page, scenario metadata and readiness, prospects, run summaries, activity
    "read_summary": frozenset(ROLES),
    # scenario sections, revisions, diffs, comments, wells, grids
    "read_detail": _READERS,
    "comment": _READERS,
    # upload data, create/fork scenarios, edit scenario metadata, prospects
    "contribute": frozenset({"owner", *_DISCIPLINES}),
    # members, project settings, deleting scenarios/projects, run overrides
    "manage": frozenset({"owner"}),
}

T = TypeVar("T")


def role_has(role: str, capability: str) -> bool:
    """Whether ``role`` holds ``capability``."""
    return role in CAPABILITIES.get(capability, frozenset())


def can_edit_section(role: str, section: str) -> bool:
    """Owners edit every section; a discipline edits its own section only."""
    return role == "owner" or SECTION_ROLES.get(section) == role


def membership(db: Session, user: User, project_id: int) -> Membership | None:
    """The caller's membership of a project, or None."""
    return db.scalar(
        select(Membership).where(
            Membership.project_id == project_id, Membership.user_id == user.id
        )
    )


def require_project(db: Session, user: User, project_id: int, capability: str) -> Membership:
    """The caller's membership, checked for ``capability``."""
    member = membership(db, user, project_id)
    if member is None:
        raise NotFound("project not found")
    if not role_has(member.role, capability):
        raise PermissionDenied(f"your role ({member.role}) does not allow this in the project")
    return member


def load_in_project(
    db: Session, model: type[T], object_id: Any, user: User, capability: str, what: str
) -> tuple[T, Membership]:
    """Load ``model`` by id and check the caller's role in its project."""
    obj = db.get(model, object_id)
    if obj is None:
        raise NotFound(f"{what} not found")
    member = membership(db, user, obj.project_id)  # type: ignore[attr-defined]
    if member is None:
        raise NotFound(f"{what} not found")
    if not role_has(member.role, capability):
        raise PermissionDenied(f"your role ({member.role}) does not allow this")
    return obj, member
