"""Scenarios: metadata, sections with conditional saves, revisions, forks, comparison."""

from __future__ import annotations

from typing import Any, cast

from fastapi import APIRouter, Query, Response

from porecast.physics import scenario as schema
from porecast.services import scenarios as svc

from .. import schemas as s
from ..deps import MAX_ID, CurrentUser, IdPath, IfMatch, NowDep, SessionDep
from ..errors import CONDITIONAL, MEMBER, R401, Responses

router = APIRouter(tags=["scenarios"])

_ETAG: Responses = {200: {"headers": {"ETag": {"description": "Strong ETag for If-Match",
                                    "schema": {"type": "string"}}}}}


def _scenario_out(db, scenario, response: Response | None = None) -> s.ScenarioOut:
    out = s.ScenarioOut.of(scenario, svc.unresolved_counts(db, scenario.id))
    if response is not None:
        response.headers["ETag"] = out.etag
    return out


def _section_out(scenario, section: str, response: Response) -> s.SectionOut:
    row = next(r for r in scenario.sections if r.section == section)
    etag = svc.section_etag(scenario.id, section, row.revision)
    response.headers["ETag"] = etag
    return s.SectionOut(scenario_id=scenario.id, section=cast(s.SectionName, section), etag=etag,
                        revision=row.revision, ready=row.ready, data=row.data)


@router.get("/scenario-template", response_model=dict[str, Any], responses=R401)
def scenario_template(user: CurrentUser) -> dict[str, Any]:
    """The bundled example scenario document, a starting point for new scenarios."""
    return schema.default_scenario()


@router.get("/projects/{project_id}/scenarios", response_model=list[s.ScenarioOut],
            responses=MEMBER)
def list_scenarios(project_id: IdPath, user: CurrentUser, db: SessionDep) -> list[s.ScenarioOut]:
    """Scenarios of a project (metadata and section states)."""
    return [_scenario_out(db, x) for x in svc.list_scenarios(db, user, project_id)]


@router.post("/projects/{project_id}/scenarios", response_model=s.ScenarioOut,
             status_code=201, responses=MEMBER)
def create_scenario(project_id: IdPath, body: s.ScenarioCreateIn, user: CurrentUser,
                    db: SessionDep, now: NowDep, response: Response) -> s.ScenarioOut:
    """Create a scenario from a document or from the bundled example."""
    scenario = svc.create_scenario(db, user, project_id, name=body.name,
                                   description=body.description, document=body.document,
                                   now=now)
    return _scenario_out(db, scenario, response)


@router.get("/scenarios/{scenario_id}", response_model=s.ScenarioOut, responses=MEMBER | _ETAG)
def get_scenario(scenario_id: IdPath, user: CurrentUser, db: SessionDep, response: Response
                 ) -> s.ScenarioOut:
    """Scenario metadata, section states and ETags."""
    scenario, _ = svc.get_scenario(db, user, scenario_id)
    return _scenario_out(db, scenario, response)


@router.patch("/scenarios/{scenario_id}", response_model=s.ScenarioOut, responses=CONDITIONAL)
def update_scenario(scenario_id: IdPath, body: s.ScenarioPatch, user: CurrentUser,
                    db: SessionDep, now: NowDep, response: Response, if_match: IfMatch = None
                    ) -> s.ScenarioOut:
    """Change name, description, seed or realisations (If-Match: scenario ETag)."""
    changes = body.model_dump(exclude_unset=True, exclude={"message"})
    scenario = svc.update_meta(db, user, scenario_id, changes, if_match=if_match, now=now,
                               message=body.message)
    return _scenario_out(db, scenario, response)


@router.delete("/scenarios/{scenario_id}", status_code=204, responses=CONDITIONAL)
def delete_scenario(scenario_id: IdPath, user: CurrentUser, db: SessionDep, now: NowDep,
                    if_match: IfMatch = None) -> None:
    """Delete a scenario with its revisions and comments (owners; If-Match: scenario ETag)."""
    svc.delete_scenario(db, user, scenario_id, if_match=if_match, now=now)


@router.get("/scenarios/{scenario_id}/document", response_model=s.DocumentOut,
            responses=MEMBER | _ETAG)
def get_document(scenario_id: IdPath, user: CurrentUser, db: SessionDep, response: Response
                 ) -> s.DocumentOut:
    """The whole current scenario document."""
    scenario, _ = svc.get_scenario(db, user, scenario_id, "read_detail")
    etag = svc.scenario_etag(scenario)
    response.headers["ETag"] = etag
    return s.DocumentOut(
        scenario_id=scenario.id, revision=scenario.head_revision, etag=etag,
        document=svc.document_of(scenario),
        section_etags={r.section: svc.section_etag(scenario.id, r.section, r.revision)
                       for r in scenario.sections},
    )


@router.get("/scenarios/{scenario_id}/sections/{section}", response_model=s.SectionOut,
            responses=MEMBER | _ETAG)
def get_section(scenario_id: IdPath, section: s.SectionName, user: CurrentUser, db: SessionDep,
                response: Response) -> s.SectionOut:
    """One section's JSON with its ETag."""
    scenario, _ = svc.get_scenario(db, user, scenario_id, "read_detail")
    return _section_out(scenario, section, response)


@router.put("/scenarios/{scenario_id}/sections/{section}", response_model=s.SectionOut,
            responses=CONDITIONAL)
def put_section(scenario_id: IdPath, section: s.SectionName, body: s.SectionPutIn,
                user: CurrentUser, db: SessionDep, now: NowDep, response: Response,
                if_match: IfMatch = None) -> s.SectionOut:
    """Replace a section (its discipline or an owner; If-Match: section ETag)."""
    scenario = svc.save_section(db, user, scenario_id, section, body.data, if_match=if_match,
                                now=now, message=body.message)
    return _section_out(scenario, section, response)


@router.patch("/scenarios/{scenario_id}/sections/{section}", response_model=s.SectionOut,
              responses=CONDITIONAL)
def patch_section(scenario_id: IdPath, section: s.SectionName, body: s.SectionPatchIn,
                  user: CurrentUser, db: SessionDep, now: NowDep, response: Response,
                  if_match: IfMatch = None) -> s.SectionOut:
    """Merge-patch a section (RFC 7396; If-Match: section ETag)."""
    scenario = svc.save_section(db, user, scenario_id, section, body.patch, if_match=if_match,
                                now=now, message=body.message, patch=True)
    return _section_out(scenario, section, response)


@router.put("/scenarios/{scenario_id}/sections/{section}/ready", response_model=s.SectionOut,
            responses=CONDITIONAL)
def set_ready(scenario_id: IdPath, section: s.SectionName, body: s.ReadyIn, user: CurrentUser,
              db: SessionDep, now: NowDep, response: Response, if_match: IfMatch = None
              ) -> s.SectionOut:
    """Mark the section version named by If-Match ready for runs, or not."""
    scenario = svc.set_ready(db, user, scenario_id, section, body.ready, if_match=if_match,
                             now=now)
    return _section_out(scenario, section, response)


@router.get("/scenarios/{scenario_id}/readiness", response_model=s.ReadinessOut,
            responses=MEMBER)
def get_readiness(scenario_id: IdPath, user: CurrentUser, db: SessionDep) -> s.ReadinessOut:
    """Whether every section is marked ready for a run."""
    scenario, not_ready = svc.readiness(db, user, scenario_id)
    return s.ReadinessOut(scenario_id=scenario.id, runnable=not not_ready, not_ready=not_ready)


@router.post("/scenarios/{scenario_id}/fork", response_model=s.ScenarioOut, status_code=201,
             responses=MEMBER)
def fork_scenario(scenario_id: IdPath, body: s.ForkIn, user: CurrentUser, db: SessionDep,
                  now: NowDep, response: Response) -> s.ScenarioOut:
    """Copy the scenario (latest or a given revision) into a new scenario."""
    scenario = svc.fork_scenario(db, user, scenario_id, name=body.name, revision=body.revision,
                                 now=now)
    return _scenario_out(db, scenario, response)


@router.get("/scenarios/{scenario_id}/revisions", response_model=list[s.RevisionSummaryOut],
            responses=MEMBER)
def list_revisions(scenario_id: IdPath, user: CurrentUser, db: SessionDep
                   ) -> list[s.RevisionSummaryOut]:
    """Revisions of a scenario, newest first."""
    return [s.RevisionSummaryOut.of(r) for r in svc.list_revisions(db, user, scenario_id)]


@router.get("/scenarios/{scenario_id}/revisions/{number}", response_model=s.RevisionOut,
            responses=MEMBER)
def get_revision(scenario_id: IdPath, number: IdPath, user: CurrentUser, db: SessionDep
                 ) -> s.RevisionOut:
    """One revision: author, time, diff and the document after it."""
    return s.RevisionOut.of(svc.get_revision(db, user, scenario_id, number))


@router.post("/scenarios/{scenario_id}/revisions/{number}/revert",
             response_model=s.ScenarioOut, responses=CONDITIONAL)
def revert_revision(scenario_id: IdPath, number: IdPath, body: s.RevertIn, user: CurrentUser,
                    db: SessionDep, now: NowDep, response: Response, if_match: IfMatch = None
                    ) -> s.ScenarioOut:
    """Bring back a revision as a new revision (If-Match: scenario or section ETag)."""
    scenario = svc.revert(db, user, scenario_id, number, section=body.section,
                          if_match=if_match, now=now)
    return _scenario_out(db, scenario, response)


@router.get("/scenarios/{scenario_id}/compare", response_model=s.ComparisonOut,
            responses=MEMBER)
def compare(
    scenario_id: IdPath,
    user: CurrentUser,
    db: SessionDep,
    revision: int | None = Query(None, ge=1, le=MAX_ID, description="Revision of this scenario"),
    other_scenario_id: int | None = Query(None, ge=1, le=MAX_ID,
                                          description="Default: this scenario"),
    other_revision: int | None = Query(None, ge=1, le=MAX_ID, description="Default: latest"),
) -> s.ComparisonOut:
    """Field-by-field differences between two revisions or two scenarios."""
    result = svc.compare(db, user, scenario_id, revision=revision,
                         other_scenario_id=other_scenario_id, other_revision=other_revision)
    return s.ComparisonOut(**result.__dict__)
