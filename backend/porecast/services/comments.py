"""Threaded comments on a scenario (section or field) or a map location."""

from __future__ import annotations

import math
from datetime import datetime

from sqlalchemy import select
from sqlalchemy.orm import Session, aliased

from porecast.db.models import Comment, Grid, Scenario, User

from . import activity
from .authz import load_in_project, require_project
from .diff import resolve_path
from .errors import InvalidInput, PermissionDenied
from .scenarios import SECTIONS, document_of


def _bad(loc: str, msg: str) -> InvalidInput:
    return InvalidInput(f"{loc}: {msg}", [{"loc": loc, "msg": msg}])


def create_comment(
    db: Session,
    user: User,
    project_id: int,
    *,
    body: str,
    now: datetime,
    parent_id: int | None = None,
    scenario_id: int | None = None,
    section: str | None = None,
    field_path: str | None = None,
    x: float | None = None,
    y: float | None = None,
    grid_id: int | None = None,
) -> Comment:
    """Start a thread (anchored to a scenario and/or a map location) or reply to one.

    A reply takes its anchor from the thread and must not name one itself.
    """
    require_project(db, user, project_id, "comment")
    if not body.strip():
        raise _bad("body", "must not be empty")
    anchor = (scenario_id, section, field_path, x, y, grid_id)
    comment = Comment(project_id=project_id, author_id=user.id, body=body, created_at=now)
    if parent_id is not None:
        if any(v is not None for v in anchor):
            raise _bad("parent_id", "a reply takes the anchor of its thread; send no anchor")
        parent = db.get(Comment, parent_id)
        if parent is None or parent.project_id != project_id:
            raise _bad("parent_id", "no such comment in this project")
        comment.parent_id = parent.id
        comment.thread_id = parent.thread_id or parent.id
        for name in ("scenario_id", "section", "field_path", "x", "y", "grid_id"):
            setattr(comment, name, getattr(parent, name))
    else:
        _set_anchor(db, comment, project_id, scenario_id, section, field_path, x, y, grid_id)
    db.add(comment)
    db.flush()
    if comment.thread_id is None:
        comment.thread_id = comment.id
    where = comment.field_path or comment.section or (
        f"map ({comment.x:g}, {comment.y:g})" if comment.x is not None else "a scenario"
    )
    activity.record(db, project_id, user, "comment.created", "comment", comment.id,
                    f"{user.username} commented on {where}", now=now,
                    data={"scenario_id": comment.scenario_id, "thread_id": comment.thread_id})
    db.flush()
    return comment


def _set_anchor(
    db: Session,
    comment: Comment,
    project_id: int,
    scenario_id: int | None,
    section: str | None,
    field_path: str | None,
    x: float | None,
    y: float | None,
    grid_id: int | None,
) -> None:
    if scenario_id is None and x is None and y is None:
        raise _bad("scenario_id", "a comment needs a scenario or a map location (x, y)")
    if (x is None) != (y is None):
        raise _bad("x" if x is None else "y", "a map location needs both x and y")
    if x is not None and y is not None and not (math.isfinite(x) and math.isfinite(y)):
        raise _bad("x", "map coordinates must be finite numbers")
    if (section is not None or field_path is not None) and scenario_id is None:
        raise _bad("scenario_id", "a section or field comment needs its scenario")
    if scenario_id is not None:
        scenario = db.get(Scenario, scenario_id)
        if scenario is None or scenario.project_id != project_id:
            raise _bad("scenario_id", "no such scenario in this project")
        if field_path is not None:
            head = field_path.split(".", 1)[0]
            if section is None:
                section = head
            if head != section:
                raise _bad("field_path", f"must start with the section name {section!r}")
            found, _ = resolve_path(document_of(scenario), field_path)
            if not found:
                raise _bad("field_path", f"{field_path!r} is not a field of the scenario")
        if section is not None and section not in SECTIONS:
            raise _bad("section", f"one of {', '.join(SECTIONS)}")
    if grid_id is not None:
        if x is None:
            raise _bad("grid_id", "a grid comment needs a map location (x, y)")
        grid = db.get(Grid, grid_id)
        if grid is None or grid.project_id != project_id:
            raise _bad("grid_id", "no such grid in this project")
    comment.scenario_id, comment.section, comment.field_path = scenario_id, section, field_path
    comment.x, comment.y, comment.grid_id = x, y, grid_id


def list_comments(
    db: Session,
    user: User,
    project_id: int,
    *,
    scenario_id: int | None = None,
    section: str | None = None,
    grid_id: int | None = None,
    unresolved: bool | None = None,
) -> list[Comment]:
    """Comments of a project in thread order; ``unresolved=True`` keeps open threads."""
    require_project(db, user, project_id, "read_detail")
    query = select(Comment).where(Comment.project_id == project_id)
    if scenario_id is not None:
        query = query.where(Comment.scenario_id == scenario_id)
    if section is not None:
        query = query.where(Comment.section == section)
    if grid_id is not None:
        query = query.where(Comment.grid_id == grid_id)
    if unresolved is not None:
        root = aliased(Comment)
        open_roots = select(root.id).where(
            root.project_id == project_id, root.parent_id.is_(None), root.resolved_at.is_(None)
        )
        cond = Comment.thread_id.in_(open_roots)
        query = query.where(cond if unresolved else ~cond)
    return list(db.scalars(query.order_by(Comment.thread_id, Comment.id)))


def _load(db: Session, user: User, comment_id: int, capability: str) -> Comment:
    comment, _ = load_in_project(db, Comment, comment_id, user, capability, "comment")
    return comment


def get_comment(db: Session, user: User, comment_id: int) -> Comment:
    """One comment."""
    return _load(db, user, comment_id, "read_detail")


def edit_comment(db: Session, user: User, comment_id: int, body: str, *, now: datetime) -> Comment:
    """Change the text of one's own comment."""
    comment = _load(db, user, comment_id, "comment")
    if comment.author_id != user.id:
        raise PermissionDenied("only the author can edit a comment")
    if not body.strip():
        raise _bad("body", "must not be empty")
    comment.body = body
    comment.edited_at = now
    return comment


def set_resolved(
    db: Session, user: User, comment_id: int, resolved: bool, *, now: datetime
) -> Comment:
    """Resolve or reopen a thread (given its first comment)."""
    comment = _load(db, user, comment_id, "comment")
    if comment.parent_id is not None:
        raise _bad("comment_id", "resolve the thread's first comment, not a reply")
    if resolved and comment.resolved_at is None:
        comment.resolved_at, comment.resolved_by_id = now, user.id
        verb, word = "comment.resolved", "resolved"
    elif not resolved and comment.resolved_at is not None:
        comment.resolved_at, comment.resolved_by_id = None, None
        verb, word = "comment.reopened", "reopened"
    else:
        return comment
    activity.record(db, comment.project_id, user, verb, "comment", comment.id,
                    f"{user.username} {word} a comment thread", now=now)
    return comment
