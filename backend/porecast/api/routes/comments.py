"""Threaded comments."""

from __future__ import annotations

from fastapi import APIRouter, Query

from porecast.services import comments as svc

from .. import schemas as s
from ..deps import CurrentUser, IdPath, NowDep, SessionDep
from ..errors import MEMBER

router = APIRouter(tags=["comments"])


@router.get("/projects/{project_id}/comments", response_model=list[s.CommentOut],
            responses=MEMBER)
def list_comments(
    project_id: IdPath,
    user: CurrentUser,
    db: SessionDep,
    scenario_id: IdPath | None = None,
    section: s.SectionName | None = None,
    grid_id: IdPath | None = None,
    unresolved: bool | None = Query(None, description="true: open threads only"),
) -> list[s.CommentOut]:
    """Comments of a project in thread order, optionally filtered."""
    found = svc.list_comments(db, user, project_id, scenario_id=scenario_id, section=section,
                              grid_id=grid_id, unresolved=unresolved)
    return [s.CommentOut.of(c) for c in found]


@router.post("/projects/{project_id}/comments", response_model=s.CommentOut, status_code=201,
             responses=MEMBER)
def create_comment(project_id: IdPath, body: s.CommentIn, user: CurrentUser, db: SessionDep,
                   now: NowDep) -> s.CommentOut:
    """Start a thread on a scenario section/field or map location, or reply to one."""
    comment = svc.create_comment(db, user, project_id, now=now, **body.model_dump())
    return s.CommentOut.of(comment)


@router.get("/comments/{comment_id}", response_model=s.CommentOut, responses=MEMBER)
def get_comment(comment_id: IdPath, user: CurrentUser, db: SessionDep) -> s.CommentOut:
    """One comment."""
    return s.CommentOut.of(svc.get_comment(db, user, comment_id))


@router.patch("/comments/{comment_id}", response_model=s.CommentOut, responses=MEMBER)
def edit_comment(comment_id: IdPath, body: s.CommentPatch, user: CurrentUser, db: SessionDep,
                 now: NowDep) -> s.CommentOut:
    """Edit the text of your own comment."""
    return s.CommentOut.of(svc.edit_comment(db, user, comment_id, body.body, now=now))


@router.put("/comments/{comment_id}/resolved", response_model=s.CommentOut, responses=MEMBER)
def set_resolved(comment_id: IdPath, body: s.ResolveIn, user: CurrentUser, db: SessionDep,
                 now: NowDep) -> s.CommentOut:
    """Resolve or reopen a thread."""
    return s.CommentOut.of(svc.set_resolved(db, user, comment_id, body.resolved, now=now))
