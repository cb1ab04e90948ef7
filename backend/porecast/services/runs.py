"""Runs: start (with readiness, parameters and input hash), list, read, cancel, log, files.

A run is tied to one scenario revision and seed. Its ``input_hash`` is the
SHA-256 of the canonical JSON of the run kind, the revision document's hash
(:func:`porecast.physics.scenario.scenario_hash`), the seed, the parameters
and the SHA-256 of every input file (grids, well) and outline, so two runs with
the same hash computed the same thing, and a re-run of the same revision and
seed reproduces the numbers bit for bit.

The computation itself happens in workers (:mod:`porecast.services.run_steps`);
this module only writes the run and sends its first message, after the run is
committed, through a :class:`porecast.services.run_jobs.Dispatch`.
"""

from __future__ import annotations

import hashlib
import json
import re
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator
from sqlalchemy import select
from sqlalchemy.orm import Session

from porecast.db.models import (
    Grid,
    Prospect,
    Run,
    RunEvent,
    RunTask,
    Scenario,
    ScenarioRevision,
    User,
    Well,
)
from porecast.physics.scenario import COVARIATES, validate_scenario

from . import activity
from . import run_jobs as jobs
from .authz import load_in_project, require_project
from .errors import Conflict, InvalidInput, NotFound
from .run_steps import run_dir
from .scenarios import assert_runnable, get_scenario

KINDS = ("simulate", "classify", "calibrate", "summarise", "sensitivity")
MAX_ID = 2**31 - 1
ARTEFACT_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,127}$")
#: Parameters that change how work is split, not what is computed (left out of the hash).
EXECUTION_ONLY = ("tile_traces",)

Id = Field(ge=1, le=MAX_ID)


class _Params(BaseModel):
    model_config = ConfigDict(extra="forbid")

    realisations: int | None = Field(
        None, ge=10, le=2_000_000, description="Per facies per node (default: the scenario's)"
    )


class SimulateParams(_Params):
    """Parameters of a forward-model run."""


class ClassifyParams(_Params):
    """Parameters of a classification of attribute maps or cubes."""

    attribute_grids: dict[str, int] = Field(min_length=1, max_length=8)
    covariate_grids: dict[str, int] = Field(default_factory=dict, max_length=4)
    prospect_ids: list[int] = Field(default_factory=list, max_length=500)
    max_mahalanobis: float | None = Field(None, gt=0, le=1e6)
    correlation_length_m: float | None = Field(None, ge=0, le=1e6)
    tile_traces: int | None = Field(None, ge=1, le=100_000_000)


class CalibrateParams(_Params):
    """Parameters of a blind test at a well."""

    well_id: int = Id
    covariates: dict[str, float] = Field(default_factory=dict, max_length=4)
    hydrocarbon_facies: str | None = Field(None, min_length=1, max_length=120)
    block_m: float = Field(10.0, ge=0, le=1000)
    vshale_cutoff: float | None = Field(None, gt=0, lt=1)
    sw_cutoff: float | None = Field(None, gt=0, lt=1)


class SensitivityParams(_Params):
    """Parameters of a sensitivity analysis of prospect risk on attribute maps.

    Every uncertain input of the scenario is set to its ``low_quantile`` and then its
    ``high_quantile`` value, one at a time (2 x inputs + 1 runs of the whole chain);
    ``prospect_ids`` empty means every prospect of the project.
    """

    attribute_grids: dict[str, int] = Field(min_length=1, max_length=8)
    covariate_grids: dict[str, int] = Field(default_factory=dict, max_length=4)
    prospect_ids: list[int] = Field(default_factory=list, max_length=500)
    low_quantile: float = Field(0.1, description="Quantile of each input's low swing, "
                                "0 < low_quantile < high_quantile < 1")
    high_quantile: float = Field(0.9, description="Quantile of each input's high swing, "
                                 "0 < low_quantile < high_quantile < 1")
    fix_others: Literal["mean", "median"] | None = Field(
        None, description="Fix the inputs not being swung at their mean or median (default: "
        "leave them uncertain)")
    correlation_length_m: float | None = Field(None, ge=0, le=1e6)

    @field_validator("low_quantile", "high_quantile")
    @classmethod
    def _open_unit_interval(cls, value: float) -> float:
        if not 0.0 < value < 1.0:
            raise ValueError(f"must be between 0 and 1, exclusive (0 < low_quantile < "
                             f"high_quantile < 1); got {value:g}")
        return value


class SummariseParams(BaseModel):
    """Parameters of a project risk table."""

    model_config = ConfigDict(extra="forbid")

    prospect_ids: list[int] = Field(default_factory=list, max_length=500)
    correlation_length_m: float | None = Field(None, ge=0, le=1e6)


PARAMS: dict[str, type[BaseModel]] = {
    "simulate": SimulateParams, "classify": ClassifyParams,
    "calibrate": CalibrateParams, "summarise": SummariseParams,
    "sensitivity": SensitivityParams,
}


@dataclass
class RunView:
    """A run with what the API shows beside its row."""

    run: Run
    revision: int
    scenario_name: str
    artefacts: list[tuple[str, int]] = field(default_factory=list)
    n_tiles: int = 0
    n_tiles_done: int = 0


def _invalid(loc: str, msg: str) -> InvalidInput:
    return InvalidInput(f"{loc}: {msg}", [{"loc": loc, "msg": msg}])


def canonical_hash(payload: Any) -> str:
    """SHA-256 of the canonical JSON of ``payload``."""
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(text.encode()).hexdigest()


# --------------------------------------------------------------------------- parameters


def _parse_params(kind: str, raw: Any) -> dict[str, Any]:
    if not isinstance(raw, dict):
        raise _invalid("params", "must be a JSON object")
    try:
        model = PARAMS[kind].model_validate(raw)
    except ValidationError as exc:
        errors = [{"loc": "params." + ".".join(str(p) for p in e["loc"]), "msg": e["msg"]}
                  for e in exc.errors()]
        raise InvalidInput(f"invalid parameters for a {kind} run: {errors[0]['loc']}: "
                           f"{errors[0]['msg']}", errors) from None
    return model.model_dump(exclude_none=True)


def _grid_in_project(db: Session, project_id: int, grid_id: int, loc: str) -> Grid:
    grid = db.get(Grid, grid_id)
    if grid is None or grid.project_id != project_id:
        raise _invalid(loc, f"grid {grid_id} is not in this project")
    return grid


def _prospects_in_project(db: Session, project_id: int, ids: list[int]) -> list[Prospect]:
    found = []
    for i, pid in enumerate(ids):
        p = db.get(Prospect, pid)
        if p is None or p.project_id != project_id:
            raise _invalid(f"params.prospect_ids.{i}", f"prospect {pid} is not in this project")
        found.append(p)
    if len({p.id for p in found}) != len(found):
        raise _invalid("params.prospect_ids", "a prospect is listed twice")
    return found


def _outline_inputs(prospects: list[Prospect]) -> list[Any]:
    return [[p.id, p.name, p.outline] for p in prospects]


def _check_grids(db: Session, project_id: int, sc: Any, params: dict[str, Any]
                 ) -> tuple[dict[str, Grid], dict[str, Grid], bool]:
    """Attribute and covariate grids of a classification: (attributes, covariates, cube)."""
    wanted: list[str] = [str(a) for a in sc.rockphysics.seismic.attributes]
    given = params["attribute_grids"]
    missing = [a for a in wanted if a not in given]
    extra = [a for a in given if a not in wanted]
    if missing or extra:
        raise _invalid("params.attribute_grids",
                       f"the scenario classifies on {wanted}: give one grid for each"
                       + (f" (missing {missing})" if missing else "")
                       + (f" (not used: {extra})" if extra else ""))
    grids = {a: _grid_in_project(db, project_id, given[a], f"params.attribute_grids.{a}")
             for a in wanted}
    kinds = {g.kind for g in grids.values()}
    if len(kinds) > 1:
        raise _invalid("params.attribute_grids", "mix of maps and cubes: give all maps or all "
                       "cubes")
    cube = kinds == {"cube"}
    shapes = {tuple(g.geometry.get("shape", [])) for g in grids.values()}
    if len(shapes) > 1:
        raise _invalid("params.attribute_grids", f"the attribute grids differ in shape {shapes}")
    shape = next(iter(shapes))
    varying = [c for c in COVARIATES if len(getattr(sc.burial.covariates, c).nodes) > 1]
    covs = params.get("covariate_grids", {})
    unknown = [c for c in covs if c not in COVARIATES]
    if unknown:
        raise _invalid("params.covariate_grids",
                       f"unknown covariate(s) {unknown}; allowed: {', '.join(COVARIATES)}")
    missing = [c for c in varying if c not in covs]
    if missing:
        raise _invalid("params.covariate_grids",
                       f"the scenario's PDFs vary with {varying}: give a map of {missing}")
    cov_grids = {}
    for name, gid in covs.items():
        g = _grid_in_project(db, project_id, gid, f"params.covariate_grids.{name}")
        if g.kind != "map":
            raise _invalid(f"params.covariate_grids.{name}", "a covariate is a map")
        want = shape[:-1] if cube else shape
        got = tuple(g.geometry.get("shape", []))
        if want and got and got != want:
            raise _invalid(f"params.covariate_grids.{name}",
                           f"map of shape {got}; the attribute grids need {want}")
        cov_grids[name] = g
    return grids, cov_grids, cube


def _grid_hashes(grids: dict[str, Grid], cov_grids: dict[str, Grid]) -> dict[str, str]:
    return ({f"attribute:{a}": g.sha256 for a, g in grids.items()}
            | {f"covariate:{c}": g.sha256 for c, g in cov_grids.items()})


def _check_classify(db: Session, project_id: int, doc: dict[str, Any],
                    params: dict[str, Any]) -> dict[str, Any]:
    sc = validate_scenario(doc)
    grids, cov_grids, cube = _check_grids(db, project_id, sc, params)
    prospects = _prospects_in_project(db, project_id, params.get("prospect_ids", []))
    if cube and prospects:
        raise _invalid("params.prospect_ids", "prospect risk needs a map classification; "
                       "classify a map of the horizon for it")
    if not cube and "tile_traces" in params:
        raise _invalid("params.tile_traces", "tiles apply to cubes only")
    return {"grids": _grid_hashes(grids, cov_grids), "prospects": _outline_inputs(prospects)}


def _check_sensitivity(db: Session, project_id: int, doc: dict[str, Any],
                       params: dict[str, Any]) -> dict[str, Any]:
    """Maps only, at least one prospect (empty ``prospect_ids``: all of the project's,
    resolved here so the run keeps the outlines it was started with), names unique."""
    low, high = params.get("low_quantile", 0.1), params.get("high_quantile", 0.9)
    if not low < high:
        raise _invalid("params.high_quantile",
                       f"must be greater than low_quantile ({low:g}): 0 < low_quantile < "
                       f"high_quantile < 1; got {high:g}")
    sc = validate_scenario(doc)
    grids, cov_grids, cube = _check_grids(db, project_id, sc, params)
    if cube:
        names = ", ".join(f"{g.name!r}" for g in grids.values())
        raise _invalid("params.attribute_grids",
                       f"a sensitivity run classifies attribute maps, and {names} are cubes; "
                       "give maps of the horizon (prospect risk is computed on maps)")
    from porecast.physics.forward import uncertain_inputs

    if not uncertain_inputs(sc):
        raise _invalid("document", "the scenario has no uncertain input to swing: give at "
                       "least one input a distribution that is not a constant")
    ids = list(params.get("prospect_ids", []))
    if ids:
        prospects = _prospects_in_project(db, project_id, ids)
    else:
        prospects = list(db.scalars(select(Prospect).where(Prospect.project_id == project_id)
                                    .order_by(Prospect.id)))
        if not prospects:
            raise _invalid("params.prospect_ids",
                           "a sensitivity run needs at least one prospect outline, and the "
                           "project has none: draw one first")
        params["prospect_ids"] = [p.id for p in prospects]
    seen: set[str] = set()
    for p in prospects:
        if p.name in seen:
            raise _invalid("params.prospect_ids", f"two prospects are called {p.name!r}; the "
                           "tornado charts are named by prospect, so rename one or choose "
                           "prospect_ids")
        seen.add(p.name)
    return {"grids": _grid_hashes(grids, cov_grids), "prospects": _outline_inputs(prospects)}


def _check_calibrate(db: Session, project_id: int, doc: dict[str, Any],
                     params: dict[str, Any]) -> dict[str, Any]:
    sc = validate_scenario(doc)
    well = db.get(Well, params["well_id"])
    if well is None or well.project_id != project_id:
        raise _invalid("params.well_id", f"well {params['well_id']} is not in this project")
    unknown = [c for c in params.get("covariates", {}) if c not in COVARIATES]
    if unknown:
        raise _invalid("params.covariates",
                       f"unknown covariate(s) {unknown}; allowed: {', '.join(COVARIATES)}")
    hc = params.get("hydrocarbon_facies")
    names = [f.name for f in sc.geology.facies if f.hydrocarbon]
    if hc is not None and hc not in names:
        raise _invalid("params.hydrocarbon_facies",
                       f"{hc!r} is not a hydrocarbon facies of the scenario ({names})")
    return {"well": well.sha256}


def _latest_map_classifications(db: Session, project_id: int) -> list[Run]:
    """Per scenario of the project, its newest successful map classification."""
    out = []
    for scenario in db.scalars(select(Scenario).where(Scenario.project_id == project_id)
                               .order_by(Scenario.id)):
        run = latest_map_classification(db, scenario.id)
        if run is not None:
            out.append(run)
    return out


def latest_map_classification(db: Session, scenario_id: int) -> Run | None:
    """The newest successful classify run of a scenario on maps (None if there is none)."""
    for run in db.scalars(select(Run).where(Run.scenario_id == scenario_id,
                                            Run.kind == "classify", Run.status == "succeeded")
                          .order_by(Run.finished_at.desc(), Run.id.desc()).limit(50)):
        if (run.result or {}).get("input") == "map":
            return run
    return None


def _check_summarise(db: Session, project_id: int, params: dict[str, Any]) -> dict[str, Any]:
    prospects = _prospects_in_project(db, project_id, params.get("prospect_ids", []))
    if not prospects and not db.scalar(select(Prospect.id)
                                       .where(Prospect.project_id == project_id).limit(1)):
        raise Conflict("the project has no prospect outlines to summarise")
    sources = _latest_map_classifications(db, project_id)
    if not sources:
        raise Conflict("no scenario of this project has a successful map classification yet")
    params["classify_run_ids"] = [r.id for r in sources]
    return {"prospects": _outline_inputs(prospects) or "all",
            "runs": {str(r.id): r.input_hash for r in sources}}


# --------------------------------------------------------------------------- create


def create_run(
    db: Session,
    user: User,
    scenario_id: int,
    *,
    kind: str,
    params: Any,
    now: datetime,
    dispatch: jobs.Dispatch,
    data_dir: Path,
    seed: int | None = None,
    revision: int | None = None,
    override_readiness: bool = False,
) -> RunView:
    """Queue a run of a scenario revision (default: the head) and send its first message.

    Simulate, classify, calibrate and sensitivity runs need every section marked ready,
    or an owner's recorded override (:func:`porecast.services.scenarios.assert_runnable`;
    the ready marks are those of the current sections, also for an older revision);
    a summarise run reads other runs and needs the right to contribute. The run
    is committed before its message is sent, so a worker always finds it.
    """
    scenario, _ = get_scenario(db, user, scenario_id, "read_summary")
    if kind not in KINDS:
        raise _invalid("kind", f"one of {', '.join(KINDS)}")
    if kind == "summarise":
        require_project(db, user, scenario.project_id, "contribute")
        overridden = False
    else:
        overridden = assert_runnable(db, scenario, user, override_readiness, now=now).overridden
    number = revision or scenario.head_revision
    rev = db.scalar(select(ScenarioRevision).where(
        ScenarioRevision.scenario_id == scenario.id, ScenarioRevision.number == number))
    if rev is None:
        raise _invalid("revision", f"scenario {scenario.id} has no revision {number}")
    doc = dict(rev.document)
    run_seed = int(doc.get("seed", 0)) if seed is None else int(seed)
    if not 0 <= run_seed <= 2**32 - 1:
        raise _invalid("seed", "between 0 and 4294967295")
    clean = _parse_params(kind, params)
    if kind == "classify":
        inputs = _check_classify(db, scenario.project_id, doc, clean)
    elif kind == "calibrate":
        inputs = _check_calibrate(db, scenario.project_id, doc, clean)
    elif kind == "summarise":
        inputs = _check_summarise(db, scenario.project_id, clean)
    elif kind == "sensitivity":
        inputs = _check_sensitivity(db, scenario.project_id, doc, clean)
    else:
        inputs = {}
    hashed = {k: v for k, v in clean.items() if k not in EXECUTION_ONLY}
    input_hash = canonical_hash({"kind": kind, "document": rev.document_hash, "seed": run_seed,
                                 "params": hashed, "inputs": inputs})
    run = Run(project_id=scenario.project_id, scenario_id=scenario.id,
              scenario_revision_id=rev.id, kind=kind, status="queued", progress_current=0,
              progress_total=jobs.PROGRESS_TOTAL, seed=run_seed, input_hash=input_hash,
              parameters=clean, readiness_override=overridden, created_by_id=user.id,
              created_at=now, stage="queued")
    db.add(run)
    db.flush()
    db.add(RunTask(run_id=run.id, key="main", kind="main", status="queued", progress_done=0,
                   progress_total=0, deliveries=0))
    note = " (owner override of missing ready marks)" if overridden else ""
    jobs.log(db, run.id, f"queued by {user.username}: {kind} of revision {number}, seed "
             f"{run_seed}{note}", now=now)
    activity.record(db, scenario.project_id, user, "run.queued", "run", run.id,
                    f"{user.username} started a {kind} run of {scenario.name!r} (revision "
                    f"{number}, seed {run_seed}){note}", now=now,
                    data={"kind": kind, "scenario_id": scenario.id, "revision": number,
                          "seed": run_seed, "readiness_override": overridden})
    db.commit()
    jobs.send_all(db, dispatch, [jobs.Send(run.id, "main", jobs.TASK_NAMES["main"])], now=now)
    db.flush()
    return view(db, run, data_dir)


# --------------------------------------------------------------------------- reading


def list_artefacts(data_dir: Path, run_id: int) -> list[tuple[str, int]]:
    """Result files of a run (name, size in bytes), by name."""
    folder = run_dir(data_dir, run_id)
    if not folder.is_dir():
        return []
    return sorted((p.name, p.stat().st_size) for p in folder.iterdir()
                  if p.is_file() and ARTEFACT_NAME.match(p.name))


def view(db: Session, run: Run, data_dir: Path) -> RunView:
    """A run with its revision number, scenario name, files and tile counts."""
    rev = db.get(ScenarioRevision, run.scenario_revision_id)
    scenario = db.get(Scenario, run.scenario_id)
    tiles = jobs.units(db, run.id, "tile")
    return RunView(run=run, revision=rev.number if rev else 0,
                   scenario_name=scenario.name if scenario else "",
                   artefacts=list_artefacts(data_dir, run.id), n_tiles=len(tiles),
                   n_tiles_done=sum(t.status == "succeeded" for t in tiles))


def get_run(db: Session, user: User, run_id: int, capability: str = "read_summary") -> Run:
    """A run the caller may see."""
    run, _ = load_in_project(db, Run, run_id, user, capability, "run")
    return run


def get_run_view(db: Session, user: User, run_id: int, data_dir: Path) -> RunView:
    """One run for the API."""
    return view(db, get_run(db, user, run_id), data_dir)


def list_runs(
    db: Session,
    user: User,
    project_id: int,
    data_dir: Path,
    *,
    scenario_id: int | None = None,
    kind: str | None = None,
    status: str | None = None,
    limit: int = 50,
    before_id: int | None = None,
) -> list[RunView]:
    """Runs of a project, newest first; page with ``before_id``."""
    require_project(db, user, project_id, "read_summary")
    query = select(Run).where(Run.project_id == project_id)
    if scenario_id is not None:
        query = query.where(Run.scenario_id == scenario_id)
    if kind is not None:
        query = query.where(Run.kind == kind)
    if status is not None:
        query = query.where(Run.status == status)
    if before_id is not None:
        query = query.where(Run.id < before_id)
    runs = db.scalars(query.order_by(Run.id.desc()).limit(limit))
    return [view(db, r, data_dir) for r in runs]


def run_log(db: Session, user: User, run_id: int) -> list[RunEvent]:
    """The run's log lines, oldest first."""
    get_run(db, user, run_id)
    return list(db.scalars(select(RunEvent).where(RunEvent.run_id == run_id)
                           .order_by(RunEvent.id)))


def format_log(events: list[RunEvent]) -> str:
    """Log lines as text: ISO 8601 UTC time, level, message."""
    return "".join(f"{e.at.strftime('%Y-%m-%dT%H:%M:%S.%f')[:-3]}Z  {e.level:<7}  {e.message}\n"
                   for e in events)


def artefact_path(db: Session, user: User, run_id: int, name: str, data_dir: Path) -> Path:
    """The file of one artefact; only names the run folder lists are accepted."""
    get_run(db, user, run_id, "read_detail")
    if not ARTEFACT_NAME.match(name) or name not in dict(list_artefacts(data_dir, run_id)):
        raise NotFound(f"run {run_id} has no file {name!r}")
    return run_dir(data_dir, run_id) / name


# --------------------------------------------------------------------------- cancel


def cancel_run(
    db: Session, user: User, run_id: int, *, now: datetime, dispatch: jobs.Dispatch,
    data_dir: Path,
) -> RunView:
    """Cancel a queued or running run; running steps stop at their next chunk.

    Queued messages are revoked (best effort); a step that already runs sees the
    cancelled status at its next progress check and stops, discarding its
    partial output.
    """
    run = get_run(db, user, run_id, "read_summary")
    require_project(db, user, run.project_id, "contribute")
    locked = jobs.lock_run(db, run_id)
    assert locked is not None
    run = locked
    if run.status in jobs.FINISHED:
        raise Conflict(f"run {run_id} has already {run.status}")
    pending = jobs.finish_run(db, run, "cancelled", now=now, actor=user,
                              error=f"cancelled by {user.username}")
    db.commit()
    if pending:
        try:
            dispatch.revoke(pending)
        except Exception as exc:  # noqa: BLE001 - revoking is only a shortcut
            jobs.log(db, run_id, f"could not revoke queued messages ({exc}); the steps stop "
                     "when they start", now=now, level="warning")
    return view(db, run, data_dir)
