"""Maps and cubes: upload (CSV/XYZ, .npy, .npz, SEG-Y), metadata and plot views."""

from __future__ import annotations

from fastapi import APIRouter, Query, Request
from starlette.concurrency import run_in_threadpool

from porecast.services import grids as svc
from porecast.services import uploads

from .. import schemas as s
from ..deps import (
    MAX_ID,
    CurrentUser,
    IdPath,
    NowDep,
    SessionDep,
    SettingsDep,
    receive_file,
    upload_body,
)
from ..errors import MEMBER, R413

router = APIRouter(tags=["grids"])


@router.get("/projects/{project_id}/grids", response_model=list[s.GridOut], responses=MEMBER)
def list_grids(project_id: IdPath, user: CurrentUser, db: SessionDep) -> list[s.GridOut]:
    """Maps and cubes of a project."""
    return [s.GridOut.model_validate(g) for g in svc.list_grids(db, user, project_id)]


@router.post("/projects/{project_id}/grids", response_model=s.GridOut, status_code=201,
             responses=MEMBER | R413,
             openapi_extra=upload_body("A CSV/XYZ map, .npy/.npz array or SEG-Y cube"))
async def upload_grid(
    project_id: IdPath,
    request: Request,
    user: CurrentUser,
    db: SessionDep,
    settings: SettingsDep,
    now: NowDep,
    filename: str = Query(min_length=1, max_length=255,
                          description="Client file name; its suffix gives the format"),
    name: str | None = Query(None, min_length=1, max_length=120),
) -> s.GridOut:
    """Upload a map or cube file as the request body."""
    await run_in_threadpool(svc.check_upload, db, user, project_id, filename)
    path = await receive_file(request, db, settings, filename)
    try:
        grid = await run_in_threadpool(svc.import_grid, db, user, project_id, path, name=name,
                                       files_dir=settings.files_dir, now=now)
        return s.GridOut.model_validate(grid)
    finally:
        uploads.discard(path)


@router.get("/grids/{grid_id}", response_model=s.GridOut, responses=MEMBER)
def get_grid(grid_id: IdPath, user: CurrentUser, db: SessionDep) -> s.GridOut:
    """A grid's geometry and statistics."""
    return s.GridOut.model_validate(svc.get_grid(db, user, grid_id))


@router.get("/grids/{grid_id}/view", response_model=s.GridDataOut, responses=MEMBER)
def grid_view(
    grid_id: IdPath,
    user: CurrentUser,
    db: SessionDep,
    settings: SettingsDep,
    attribute: str | None = Query(None, max_length=120),
    line: int | None = Query(None, ge=0, le=MAX_ID, description="Cube line (axis 0) index"),
    max_points: int = Query(300, ge=10, le=2000, description="Per axis"),
) -> s.GridDataOut:
    """A thinned 2-D view for plotting: the map, or one line of a cube."""
    data = svc.grid_view(db, user, grid_id, files_dir=settings.files_dir, attribute=attribute,
                         line=line, max_points=max_points)
    return s.GridDataOut(**data)


@router.delete("/grids/{grid_id}", status_code=204, responses=MEMBER)
def delete_grid(grid_id: IdPath, user: CurrentUser, db: SessionDep, settings: SettingsDep,
                now: NowDep) -> None:
    """Delete a grid and its stored file."""
    svc.delete_grid(db, user, grid_id, files_dir=settings.files_dir, now=now)
