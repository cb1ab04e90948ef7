"""Wells: LAS upload, metadata and curve data for plotting."""

from __future__ import annotations

from fastapi import APIRouter, Query, Request
from starlette.concurrency import run_in_threadpool

from porecast.services import uploads
from porecast.services import wells as svc

from .. import schemas as s
from ..deps import CurrentUser, IdPath, NowDep, SessionDep, SettingsDep, receive_file, upload_body
from ..errors import MEMBER, R413

router = APIRouter(tags=["wells"])


@router.get("/projects/{project_id}/wells", response_model=list[s.WellOut], responses=MEMBER)
def list_wells(project_id: IdPath, user: CurrentUser, db: SessionDep) -> list[s.WellOut]:
    """Wells of a project."""
    return [s.WellOut.model_validate(w) for w in svc.list_wells(db, user, project_id)]


@router.post("/projects/{project_id}/wells", response_model=s.WellOut, status_code=201,
             responses=MEMBER | R413, openapi_extra=upload_body("A LAS 2.0 file"))
async def upload_well(
    project_id: IdPath,
    request: Request,
    user: CurrentUser,
    db: SessionDep,
    settings: SettingsDep,
    now: NowDep,
    filename: str = Query(min_length=1, max_length=255, description="Client file name (.las)"),
    name: str | None = Query(None, min_length=1, max_length=120),
) -> s.WellOut:
    """Upload a LAS file as the request body; its curves are parsed and stored."""
    await run_in_threadpool(svc.check_upload, db, user, project_id, filename)
    path = await receive_file(request, db, settings, filename)
    try:
        well = await run_in_threadpool(svc.import_well, db, user, project_id, path, name=name,
                                       files_dir=settings.files_dir, now=now)
        return s.WellOut.model_validate(well)
    finally:
        uploads.discard(path)


@router.get("/wells/{well_id}", response_model=s.WellOut, responses=MEMBER)
def get_well(well_id: IdPath, user: CurrentUser, db: SessionDep) -> s.WellOut:
    """A well's metadata and curve list."""
    return s.WellOut.model_validate(svc.get_well(db, user, well_id))


@router.get("/wells/{well_id}/curves/{curve}", response_model=s.CurveDataOut, responses=MEMBER)
def curve_data(
    well_id: IdPath,
    curve: str,
    user: CurrentUser,
    db: SessionDep,
    settings: SettingsDep,
    max_points: int = Query(2000, ge=10, le=20000),
    top: float | None = Query(None, description="Shallowest depth, m"),
    base: float | None = Query(None, description="Deepest depth, m"),
) -> s.CurveDataOut:
    """Depth and values of one curve, thinned to about max_points for plotting."""
    data = svc.curve_data(db, user, well_id, curve, files_dir=settings.files_dir,
                          max_points=max_points, top=top, base=base)
    return s.CurveDataOut(**data)


@router.delete("/wells/{well_id}", status_code=204, responses=MEMBER)
def delete_well(well_id: IdPath, user: CurrentUser, db: SessionDep, settings: SettingsDep,
                now: NowDep) -> None:
    """Delete a well and its stored curves."""
    svc.delete_well(db, user, well_id, files_dir=settings.files_dir, now=now)
