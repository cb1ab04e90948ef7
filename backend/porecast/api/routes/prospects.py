"""Prospect outlines."""

from __future__ import annotations

from fastapi import APIRouter

from porecast.services import prospects as svc

from .. import schemas as s
from ..deps import CurrentUser, IdPath, NowDep, SessionDep
from ..errors import MEMBER

router = APIRouter(tags=["prospects"])


@router.get("/projects/{project_id}/prospects", response_model=list[s.ProspectOut],
            responses=MEMBER)
def list_prospects(project_id: IdPath, user: CurrentUser, db: SessionDep) -> list[s.ProspectOut]:
    """Prospect outlines of a project."""
    return [s.ProspectOut.model_validate(p) for p in svc.list_prospects(db, user, project_id)]


@router.post("/projects/{project_id}/prospects", response_model=s.ProspectOut,
             status_code=201, responses=MEMBER)
def create_prospect(project_id: IdPath, body: s.ProspectIn, user: CurrentUser, db: SessionDep,
                    now: NowDep) -> s.ProspectOut:
    """Draw a prospect outline."""
    prospect = svc.create_prospect(db, user, project_id, name=body.name, outline=body.outline,
                                   now=now)
    return s.ProspectOut.model_validate(prospect)


@router.get("/prospects/{prospect_id}", response_model=s.ProspectOut, responses=MEMBER)
def get_prospect(prospect_id: IdPath, user: CurrentUser, db: SessionDep) -> s.ProspectOut:
    """One prospect."""
    return s.ProspectOut.model_validate(svc.get_prospect(db, user, prospect_id))


@router.patch("/prospects/{prospect_id}", response_model=s.ProspectOut, responses=MEMBER)
def update_prospect(prospect_id: IdPath, body: s.ProspectPatch, user: CurrentUser,
                    db: SessionDep, now: NowDep) -> s.ProspectOut:
    """Rename or redraw a prospect."""
    prospect = svc.update_prospect(db, user, prospect_id, name=body.name, outline=body.outline,
                                   now=now)
    return s.ProspectOut.model_validate(prospect)


@router.delete("/prospects/{prospect_id}", status_code=204, responses=MEMBER)
def delete_prospect(prospect_id: IdPath, user: CurrentUser, db: SessionDep, now: NowDep) -> None:
    """Delete a prospect."""
    svc.delete_prospect(db, user, prospect_id, now=now)
