"""Runs: start, list, progress (polling and server-sent events), cancel, log, files, views.

Clients follow a run either by polling ``GET /api/runs/{id}`` (every second or
two is plenty; ``progress_current`` of ``progress_total`` is monotonic and
``eta_seconds`` is re-estimated at each progress write) or with the
server-sent events of ``GET /api/runs/{id}/events``, which push the same body
whenever it changes and end when the run has finished (or after ``timeout``
seconds, after which an ``EventSource`` reconnects by itself).
"""

from __future__ import annotations

import asyncio
import json
import time
from datetime import datetime
from typing import Annotated, Any, Literal

from fastapi import APIRouter, Query, Request
from fastapi import Path as PathParam
from fastapi.responses import FileResponse, PlainTextResponse, StreamingResponse
from pydantic import BaseModel, Field
from starlette.concurrency import run_in_threadpool

from porecast.services import run_views as views
from porecast.services import runs as svc
from porecast.services.run_jobs import FINISHED, Dispatch

from ..deps import MAX_ID, CurrentUser, IdPath, IdQuery, NowDep, SessionDep, SettingsDep
from ..errors import MEMBER, R409

router = APIRouter(tags=["runs"])

RunKind = Literal["simulate", "classify", "calibrate", "summarise", "sensitivity"]
RunStatus = Literal["queued", "running", "succeeded", "failed", "cancelled"]


class RunCreateIn(BaseModel):
    """A run of a scenario revision.

    ``params`` by kind: simulate ``{realisations?}``; classify ``{attribute_grids:
    {attribute: grid_id}, covariate_grids?: {covariate: grid_id}, prospect_ids?: [..],
    max_mahalanobis?, correlation_length_m?, tile_traces?, realisations?}``; calibrate
    ``{well_id, covariates?: {name: value}, hydrocarbon_facies?, block_m?, vshale_cutoff?,
    sw_cutoff?, realisations?}``; summarise ``{prospect_ids?, correlation_length_m?}``;
    sensitivity (maps only) ``{attribute_grids, covariate_grids?, prospect_ids? (default:
    all of the project's), low_quantile? (0.1), high_quantile? (0.9), fix_others?: "mean" |
    "median", correlation_length_m?, realisations?}``.
    """

    kind: RunKind
    seed: int | None = Field(None, ge=0, le=2**32 - 1, description="Default: the revision's")
    revision: int | None = Field(None, ge=1, le=MAX_ID, description="Default: the head")
    override_readiness: bool = Field(
        False, description="Owners: run although not every section is marked ready (recorded)")
    params: dict[str, Any] = Field(default_factory=dict)


class ArtefactOut(BaseModel):
    """A result file of a run."""

    name: str
    size_bytes: int
    url: str


class RunOut(BaseModel):
    """A run, its progress and its files."""

    id: int
    project_id: int
    scenario_id: int
    scenario_name: str
    revision: int
    kind: str
    status: RunStatus
    progress_current: int
    progress_total: int
    stage: str
    eta_seconds: float | None
    error: str | None
    created_at: datetime
    started_at: datetime | None
    finished_at: datetime | None
    seed: int
    input_hash: str
    readiness_override: bool
    parameters: dict[str, Any]
    n_tiles: int
    n_tiles_done: int
    result: dict[str, Any] | None
    artefacts: list[ArtefactOut]

    @classmethod
    def of(cls, v: svc.RunView) -> RunOut:
        r = v.run
        return cls(
            id=r.id, project_id=r.project_id, scenario_id=r.scenario_id,
            scenario_name=v.scenario_name, revision=v.revision, kind=r.kind,
            status=r.status, progress_current=r.progress_current,  # type: ignore[arg-type]
            progress_total=r.progress_total, stage=r.stage, eta_seconds=r.eta_seconds,
            error=r.error, created_at=r.created_at, started_at=r.started_at,
            finished_at=r.finished_at, seed=r.seed, input_hash=r.input_hash,
            readiness_override=r.readiness_override, parameters=r.parameters,
            n_tiles=v.n_tiles, n_tiles_done=v.n_tiles_done, result=r.result,
            artefacts=[ArtefactOut(name=n, size_bytes=s, url=f"/api/runs/{r.id}/artefacts/{n}")
                       for n, s in v.artefacts],
        )


class FaciesOut(BaseModel):
    """A facies and its index in ``most_likely`` layers."""

    index: int
    name: str
    hydrocarbon: bool


class HeatmapOut(BaseModel):
    """A map or section for a plotly heatmap: ``z[row][column]``, null without data."""

    run_id: int
    layer: str
    kind: str
    unit: str
    x: list[float]
    y: list[float]
    z: list[list[float | None]]
    facies: list[FaciesOut]
    shape: list[int]
    stride: list[int]
    zmin: float | None = None
    zmax: float | None = None
    rotation_deg: float | None = None
    line: int | None = None
    n_lines: int | None = None
    y_unit: str | None = None


class RiskSummaryOut(BaseModel):
    """Prospects x scenarios: probability of hydrocarbon, areas (km2), readiness."""

    project_id: int
    prospects: list[dict[str, Any]]
    scenarios: list[dict[str, Any]]
    rows: list[dict[str, Any]]
    convention: str
    caution: str


def dispatch_for(request: Request) -> Dispatch:
    """The app's message sender for its current settings (built on first use)."""
    from porecast.worker.app import make_celery
    from porecast.worker.dispatch import CeleryDispatch

    settings = request.app.state.settings
    key = (settings.broker_url, settings.result_backend, str(settings.data_dir))
    cached = getattr(request.app.state, "run_dispatch", None)
    if cached is None or cached[0] != key:
        cached = (key, CeleryDispatch(make_celery(settings)))
        request.app.state.run_dispatch = cached
    return cached[1]


Layer = Annotated[str, Query(min_length=1, max_length=140,
                             description="most_likely, posterior:<facies>, mahalanobis or "
                             "entropy")]


@router.post("/scenarios/{scenario_id}/runs", response_model=RunOut, status_code=202,
             responses=MEMBER | R409)
def create_run(scenario_id: IdPath, body: RunCreateIn, request: Request, user: CurrentUser,
               db: SessionDep, settings: SettingsDep, now: NowDep) -> RunOut:
    """Queue a run of a scenario revision (409 when sections are not marked ready)."""
    v = svc.create_run(db, user, scenario_id, kind=body.kind, params=body.params, now=now,
                       dispatch=dispatch_for(request), data_dir=settings.data_dir,
                       seed=body.seed, revision=body.revision,
                       override_readiness=body.override_readiness)
    return RunOut.of(v)


@router.get("/projects/{project_id}/runs", response_model=list[RunOut], responses=MEMBER)
def list_runs(
    project_id: IdPath, user: CurrentUser, db: SessionDep, settings: SettingsDep,
    scenario_id: IdQuery = None, kind: RunKind | None = None, status: RunStatus | None = None,
    limit: int = Query(50, ge=1, le=500), before_id: IdQuery = None,
) -> list[RunOut]:
    """Runs of a project, newest first."""
    return [RunOut.of(v) for v in svc.list_runs(
        db, user, project_id, settings.data_dir, scenario_id=scenario_id, kind=kind,
        status=status, limit=limit, before_id=before_id)]


@router.get("/runs/{run_id}", response_model=RunOut, responses=MEMBER)
def get_run(run_id: IdPath, user: CurrentUser, db: SessionDep, settings: SettingsDep) -> RunOut:
    """A run with its progress, ETA and files."""
    return RunOut.of(svc.get_run_view(db, user, run_id, settings.data_dir))


@router.get("/runs/{run_id}/events", responses=MEMBER | {
    200: {"content": {"text/event-stream": {}},
          "description": "Server-sent events: `progress` with the run body on every change, "
                         "`end` when it has finished"}})
def run_events(
    run_id: IdPath, request: Request, user: CurrentUser, db: SessionDep, settings: SettingsDep,
    timeout: float = Query(30.0, ge=1, le=60,
                           description="Close the stream after this, s (clients reconnect)"),
    interval: float = Query(1.0, ge=0.2, le=10, description="Polling interval, s"),
) -> StreamingResponse:
    """Progress of a run as server-sent events (or poll ``GET /api/runs/{id}``)."""
    first = RunOut.of(svc.get_run_view(db, user, run_id, settings.data_dir))
    factory = request.app.state.session_factory
    data_dir = settings.data_dir

    def snapshot() -> RunOut:
        with factory() as session:
            return RunOut.of(svc.get_run_view(session, user, run_id, data_dir))

    async def stream():
        yield "retry: 2000\n\n"
        body = first
        last = None
        deadline = time.monotonic() + timeout
        while True:
            text = body.model_dump_json()
            if text != last:
                yield f"event: progress\nid: {body.progress_current}\ndata: {text}\n\n"
                last = text
            if body.status in FINISHED:
                yield f"event: end\ndata: {json.dumps({'status': body.status})}\n\n"
                return
            if time.monotonic() > deadline or await request.is_disconnected():
                return
            await asyncio.sleep(interval)
            body = await run_in_threadpool(snapshot)

    return StreamingResponse(stream(), media_type="text/event-stream",
                             headers={"Cache-Control": "no-store", "X-Accel-Buffering": "no"})


@router.post("/runs/{run_id}/cancel", response_model=RunOut, responses=MEMBER | R409)
def cancel_run(run_id: IdPath, request: Request, user: CurrentUser, db: SessionDep,
               settings: SettingsDep, now: NowDep) -> RunOut:
    """Cancel a queued or running run (409 when it has already finished)."""
    return RunOut.of(svc.cancel_run(db, user, run_id, now=now, dispatch=dispatch_for(request),
                                    data_dir=settings.data_dir))


@router.get("/runs/{run_id}/log", response_class=PlainTextResponse, responses=MEMBER | {
    200: {"content": {"text/plain": {}}, "description": "One line per event: UTC time, level, "
                                                        "message"}})
def run_log(run_id: IdPath, user: CurrentUser, db: SessionDep) -> PlainTextResponse:
    """The run's log as text lines with timestamps."""
    return PlainTextResponse(svc.format_log(svc.run_log(db, user, run_id)))


@router.get("/runs/{run_id}/artefacts/{name}", response_class=FileResponse,
            responses=MEMBER | {200: {"content": {"application/octet-stream": {}},
                                      "description": "The file"}})
def get_artefact(
    run_id: IdPath,
    name: Annotated[str, PathParam(min_length=1, max_length=128,
                                   description="File name as listed in artefacts")],
    user: CurrentUser,
    db: SessionDep,
    settings: SettingsDep,
) -> FileResponse:
    """Download one result file of a run (names as listed in ``artefacts``)."""
    path = svc.artefact_path(db, user, run_id, name, settings.data_dir)
    return FileResponse(path, filename=path.name, media_type="application/octet-stream")


@router.get("/runs/{run_id}/map", response_model=HeatmapOut, responses=MEMBER | R409)
def run_map(run_id: IdPath, user: CurrentUser, db: SessionDep, settings: SettingsDep,
            layer: Layer = "most_likely") -> HeatmapOut:
    """One layer of a map classification for a heatmap (at most 500 x 500 nodes)."""
    return HeatmapOut(**views.map_view(db, user, run_id, layer=layer,
                                       data_dir=settings.data_dir))


@router.get("/runs/{run_id}/section", response_model=HeatmapOut, responses=MEMBER | R409)
def run_section(
    run_id: IdPath, user: CurrentUser, db: SessionDep, settings: SettingsDep,
    line: int | None = Query(None, ge=0, le=MAX_ID, description="Inline index (axis 0)"),
    layer: Layer = "most_likely",
) -> HeatmapOut:
    """One inline of a cube classification (default: most likely facies, middle line)."""
    return HeatmapOut(**views.section_view(db, user, run_id, line=line, layer=layer,
                                           data_dir=settings.data_dir,
                                           files_dir=settings.files_dir))


@router.get("/projects/{project_id}/risk-summary", response_model=RiskSummaryOut,
            responses=MEMBER)
def risk_summary(project_id: IdPath, user: CurrentUser, db: SessionDep) -> RiskSummaryOut:
    """Prospects x scenarios: probability of hydrocarbon and P90/P50/P10 areas (km2)."""
    return RiskSummaryOut(**views.risk_summary(db, user, project_id))
