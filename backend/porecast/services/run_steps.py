"""The steps of a run as plain functions: load inputs, compute, publish files, record.

:func:`execute` is what every worker task calls with a run id and a unit key
(``main``, ``tile-NNNNN``, ``join``); tests call it directly with a session
factory of their own. It claims the unit (:func:`porecast.services.run_jobs.claim`),
loads the inputs from the database, closes the session, runs the computation of
:mod:`porecast.services.run_execution` into a staging folder of this delivery,
renames the finished files into the run folder and only then records the unit as
done. Progress goes to the run row (throttled) and to ``on_state`` (Celery's
``update_state``); between chunks the run's status is checked, so a cancelled
run stops at the next chunk.
"""

from __future__ import annotations

import contextlib
import logging
import os
import shutil
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session, sessionmaker

from porecast.db.models import Grid, Prospect, Run, Scenario, ScenarioRevision, Well

from . import classification as cls
from . import run_execution as ex
from . import run_jobs as jobs
from . import storage

logger = logging.getLogger(__name__)

#: Share of a cube run taken by training (main), the tiles and the join.
CUBE_SPANS = {"main": (0.0, 0.15), "tile": (0.15, 0.95), "join": (0.95, 1.0)}
STAGING = ".staging"
TILES = ".tiles"


def utc_now() -> datetime:
    return datetime.now(UTC)


def run_dir(data_dir: Path, run_id: int) -> Path:
    """The folder of a run's result files."""
    return Path(data_dir) / "runs" / str(int(run_id))


@dataclass
class StepEnv:
    """Everything a step needs besides the run id and unit key."""

    factory: sessionmaker[Session]
    dispatch: jobs.Dispatch
    data_dir: Path
    files_dir: Path
    max_deliveries: int = 3
    lease_s: float = 120.0
    heartbeat_s: float | None = None
    """Seconds between heartbeats written by a side thread; None: no thread."""
    progress_interval_s: float = 0.5
    tile_traces: int = 20000
    worker: str = "inline"
    task_id: str | None = None
    on_state: Callable[[dict[str, Any]], None] | None = None
    clock: Callable[[], datetime] = field(default=utc_now)


# --------------------------------------------------------------------------- inputs


@dataclass
class Inputs:
    """What a step reads from the database, as plain values."""

    run_id: int
    kind: str
    seed: int
    params: dict[str, Any]
    document: dict[str, Any]
    revision: int
    attribute_paths: dict[str, Path] = field(default_factory=dict)
    covariate_paths: dict[str, Path] = field(default_factory=dict)
    cube: bool = False
    prospects: list[dict[str, Any]] = field(default_factory=list)
    well: dict[str, Any] | None = None
    summarise: list[dict[str, Any]] = field(default_factory=list)
    main_result: dict[str, Any] | None = None
    tiles: list[dict[str, Any]] = field(default_factory=list)
    unit: dict[str, Any] = field(default_factory=dict)


def _grid_path(files_dir: Path, grid: Grid) -> Path:
    return storage.stored_path(files_dir, "grids", grid.file_name)


def _prospects(db: Session, project_id: int, ids: list[int]) -> list[dict[str, Any]]:
    query = select(Prospect).where(Prospect.project_id == project_id)
    if ids:
        query = query.where(Prospect.id.in_(ids))
    return [{"id": p.id, "name": p.name, "outline": p.outline}
            for p in db.scalars(query.order_by(Prospect.id))]


def load_inputs(db: Session, env: StepEnv, run: Run, key: str) -> Inputs:
    """Gather a step's inputs (file paths, documents, outlines) from the database."""
    rev = db.get(ScenarioRevision, run.scenario_revision_id)
    if rev is None:
        raise ValueError("the scenario revision of this run no longer exists")
    params = dict(run.parameters or {})
    inp = Inputs(run.id, run.kind, int(run.seed), params, dict(rev.document), rev.number)
    if run.kind in ("classify", "sensitivity"):
        for name, grid_id in params.get("attribute_grids", {}).items():
            grid = db.get(Grid, int(grid_id))
            if grid is None:
                raise ValueError(f"attribute grid {grid_id} ({name}) was deleted")
            inp.attribute_paths[name] = _grid_path(env.files_dir, grid)
            inp.cube = grid.kind == "cube"
        for name, grid_id in params.get("covariate_grids", {}).items():
            grid = db.get(Grid, int(grid_id))
            if grid is None:
                raise ValueError(f"covariate grid {grid_id} ({name}) was deleted")
            inp.covariate_paths[name] = _grid_path(env.files_dir, grid)
        inp.prospects = _prospects(db, run.project_id, list(params.get("prospect_ids", [])))
        if params.get("prospect_ids") and len(inp.prospects) != len(params["prospect_ids"]):
            raise ValueError("a prospect of this run was deleted")
    elif run.kind == "calibrate":
        well = db.get(Well, int(params["well_id"]))
        if well is None:
            raise ValueError(f"well {params['well_id']} was deleted")
        location = (well.x, well.y) if well.x is not None and well.y is not None else None
        inp.well = {"path": storage.stored_path(env.files_dir, "wells", well.file_name),
                    "name": well.name, "location": location}
    elif run.kind == "summarise":
        inp.prospects = _prospects(db, run.project_id, list(params.get("prospect_ids", [])))
        for run_id in params.get("classify_run_ids", []):
            src = db.get(Run, int(run_id))
            if src is None or src.status != "succeeded" or not src.result:
                raise ValueError(f"classify run {run_id} is no longer available")
            scen_rev = db.get(ScenarioRevision, src.scenario_revision_id)
            scenario = db.get(Scenario, src.scenario_id)
            inp.summarise.append({
                "scenario_id": src.scenario_id,
                "scenario": scenario.name if scenario else str(src.scenario_id),
                "run_id": src.id,
                "revision": scen_rev.number if scen_rev else None,
                "seed": int(src.seed),
                "hydrocarbon": list(src.result["hydrocarbon"]),
                "classification": run_dir(env.data_dir, src.id) / "classification.npz",
                "correlation_length_m": (src.parameters or {}).get("correlation_length_m"),
            })
    main = jobs.unit(db, run.id, "main")
    inp.main_result = dict(main.result) if main is not None and main.result else None
    if key == "join":
        inp.tiles = [{"key": t.key, "start": t.trace_start, "stop": t.trace_stop,
                      "result": t.result} for t in jobs.units(db, run.id, "tile")]
    task = jobs.unit(db, run.id, key)
    if task is not None:
        inp.unit = {"key": task.key, "kind": task.kind, "start": task.trace_start,
                    "stop": task.trace_stop}
    return inp


# --------------------------------------------------------------------------- context


class StepContext:
    """Progress, cancellation checks, heartbeat and staging of one delivery."""

    def __init__(self, env: StepEnv, c: jobs.Claim):
        self.env = env
        self.claim = c
        self.out = run_dir(env.data_dir, c.run_id)
        self._last = -1e9
        self._stop_reason: str | None = None
        self._halt = threading.Event()
        self._thread: threading.Thread | None = None

    # progress ---------------------------------------------------------------

    def reporter(self, span: tuple[float, float]) -> ex.Progress:
        """A ``progress(fraction, stage)`` callback for ``span`` of the whole run."""

        def report(fraction: float, stage: str) -> None:
            self.progress(fraction, stage, span)

        return report

    def progress(self, fraction: float, stage: str, span: tuple[float, float], *,
                 tile: tuple[int, int] | None = None, force: bool = False) -> None:
        """Record progress at most every ``progress_interval_s``; raise if the run stopped."""
        if self._stop_reason is not None:
            raise jobs.RunStopped(self._stop_reason)
        t = time.monotonic()
        if not force and t - self._last < self.env.progress_interval_s:
            return
        self._last = t
        now = self.env.clock()
        with jobs.transaction(self.env.factory) as db:
            current, eta = jobs.report(db, self.claim, fraction=fraction, stage=stage,
                                       span=span, now=now, tile=tile)
        if self.env.on_state is not None:
            self.env.on_state({"run_id": self.claim.run_id, "key": self.claim.key,
                               "current": current, "total": jobs.PROGRESS_TOTAL,
                               "stage": stage, "eta_seconds": eta})

    # heartbeat --------------------------------------------------------------

    def start_heartbeat(self) -> None:
        if self.env.heartbeat_s is None:
            return
        self._thread = threading.Thread(target=self._beat, name="porecast-heartbeat",
                                        daemon=True)
        self._thread.start()

    def _beat(self) -> None:
        assert self.env.heartbeat_s is not None
        while not self._halt.wait(self.env.heartbeat_s):
            try:
                with jobs.transaction(self.env.factory) as db:
                    reason = jobs.heartbeat(db, self.claim, now=self.env.clock())
            except Exception:  # noqa: BLE001 - a missed beat is retried at the next one
                logger.warning("heartbeat of run %s %s failed", self.claim.run_id,
                               self.claim.key, exc_info=True)
                continue
            if reason is not None:
                self._stop_reason = reason
                return

    def stop_heartbeat(self) -> None:
        self._halt.set()
        if self._thread is not None:
            self._thread.join(timeout=5)

    # files ------------------------------------------------------------------

    def staging(self) -> Path:
        """A fresh folder for this delivery's outputs (earlier deliveries' leftovers removed)."""
        root = self.out / STAGING
        root.mkdir(parents=True, exist_ok=True)
        prefix = f"{self.claim.key}-d"
        for old in root.glob(f"{prefix}*"):
            shutil.rmtree(old, ignore_errors=True)
        folder = root / f"{prefix}{self.claim.delivery}"
        folder.mkdir()
        return folder

    def publish(self, staging: Path, target: Path | None = None) -> list[str]:
        """Rename finished files into the run folder (or ``target``); returns their names."""
        target = target or self.out
        target.mkdir(parents=True, exist_ok=True)
        names = []
        for path in sorted(staging.iterdir()):
            if path.name.startswith("."):
                continue
            os.replace(path, target / path.name)
            names.append(path.name)
        shutil.rmtree(staging, ignore_errors=True)
        with contextlib.suppress(OSError):
            staging.parent.rmdir()  # the staging root, once no delivery uses it
        return names


# --------------------------------------------------------------------------- steps


def _compact(summary: dict[str, Any], drop: tuple[str, ...] = ()) -> dict[str, Any]:
    return ex._clean({k: v for k, v in summary.items() if k not in drop and k != "caution"})


def _main(ctx: StepContext, inp: Inputs) -> list[jobs.Send]:
    p = inp.params
    realisations = p.get("realisations")
    stage = ctx.staging()
    finish: dict[str, Any] = {"final": True}
    if inp.kind == "simulate":
        summary = ex.simulate_outputs(inp.document, inp.seed, stage, realisations=realisations,
                                      progress=ctx.reporter((0.0, 1.0)))
        finish["run_result"] = _compact(summary, ("nodes", "node_axes"))
    elif inp.kind == "classify" and inp.cube:
        sc, result, model = ex.train_model(inp.document, inp.seed, realisations=realisations,
                                           progress=ctx.reporter(CUBE_SPANS["main"]))
        ex.write_training(stage, result)
        layout = ex.cube_layout(inp.attribute_paths, model.attributes[0])
        # refuse a covariate map of the wrong shape before any tile starts
        covs = ex.read_covariate_arrays(model, inp.covariate_paths)
        for name, arr in covs.items():
            if tuple(arr.shape) != tuple(layout["shape"][:-1]):
                raise ValueError(f"covariate map {name} has shape {tuple(arr.shape)}; the cube "
                                 f"has {tuple(layout['shape'][:-1])} traces per line")
        tiles = ex.plan_tiles(layout["n_traces"], int(p.get("tile_traces") or
                                                       ctx.env.tile_traces))
        ctx.publish(stage)
        plan = {"layout": layout, "facies": list(model.facies),
                "hydrocarbon": list(model.hydrocarbon), "attributes": list(model.attributes),
                "axes": list(model.axes), "scenario": sc.name,
                "outputs": cls.cube_output_names(model)}
        with jobs.transaction(ctx.env.factory) as db:
            return jobs.complete_plan(db, ctx.claim, tiles, now=ctx.env.clock(),
                                      unit_result=plan)
    elif inp.kind == "classify":
        summary = ex.classify_map_outputs(
            inp.document, inp.seed, inp.attribute_paths, inp.covariate_paths, inp.prospects,
            stage, realisations=realisations, max_mahalanobis=p.get("max_mahalanobis"),
            correlation_length_m=p.get("correlation_length_m"),
            progress=ctx.reporter((0.0, 1.0)))
        finish["run_result"] = _compact(summary)
    elif inp.kind == "calibrate":
        assert inp.well is not None
        logs = ex.well_logs_from_store(inp.well["path"], inp.well["name"], inp.well["location"])
        summary = ex.calibrate_outputs(
            inp.document, inp.seed, logs, stage, covariates=p.get("covariates") or {},
            hydrocarbon_facies=p.get("hydrocarbon_facies"), block_m=p.get("block_m", 10.0),
            vshale_cutoff=p.get("vshale_cutoff"), sw_cutoff=p.get("sw_cutoff"),
            realisations=realisations, progress=ctx.reporter((0.0, 1.0)))
        c = summary["confusion"]
        finish["run_result"] = _compact({
            "well": summary["well"], "accuracy": c["accuracy"], "n_samples": c["n_samples"],
            "labels": c["labels"], "matrix": c["matrix"],
            "grouped_accuracy": summary["grouped_confusion"]["accuracy"],
            "covariates": summary["covariates"], "assumed": summary["assumed"]})
    elif inp.kind == "sensitivity":
        if inp.cube:
            raise ValueError("a sensitivity run classifies attribute maps, not cubes")
        doc = ex.sensitivity_outputs(
            inp.document, inp.seed, inp.attribute_paths, inp.covariate_paths, inp.prospects,
            stage, realisations=realisations, low_q=p.get("low_quantile", 0.1),
            high_q=p.get("high_quantile", 0.9), fix_others=p.get("fix_others"),
            correlation_length_m=p.get("correlation_length_m"),
            progress=ctx.reporter((0.0, 1.0)))
        finish["run_result"] = _compact(ex.sensitivity_result(doc))
    elif inp.kind == "summarise":
        summary = ex.summarise_outputs(inp.summarise, inp.prospects, stage,
                                       correlation_length_m=p.get("correlation_length_m"),
                                       progress=ctx.reporter((0.0, 0.95)))
        finish["run_result"] = _compact(summary, ("pivot_probability_hc",))
    else:
        raise ValueError(f"unknown run kind {inp.kind!r}")
    ctx.progress(0.99, "publish", (0.0, 1.0), force=True)
    ctx.publish(stage)
    with jobs.transaction(ctx.env.factory) as db:
        return jobs.complete(db, ctx.claim, now=ctx.env.clock(), **finish)


def _tile(ctx: StepContext, inp: Inputs) -> list[jobs.Send]:
    start, stop = int(inp.unit["start"]), int(inp.unit["stop"])
    total = stop - start
    ctx.progress(0.0, "classify cube", CUBE_SPANS["tile"], tile=(0, total), force=True)
    model = ex.model_from_training(inp.document, inp.seed, ctx.out / ex.TRAINING_FILE)
    covs = ex.read_covariate_arrays(model, inp.covariate_paths)
    stage = ctx.staging()

    def on_chunk(done: int, _total: int) -> None:
        ctx.progress(0.0, "classify cube", CUBE_SPANS["tile"], tile=(done, total))

    res = ex.classify_tile(model, inp.attribute_paths, covs, (start, stop), stage,
                           max_mahalanobis=inp.params.get("max_mahalanobis"), progress=on_chunk)
    target = ctx.out / TILES / ctx.claim.key
    if target.exists():  # an earlier delivery published and was lost before recording it
        shutil.rmtree(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    os.replace(stage, target)
    with contextlib.suppress(OSError):
        stage.parent.rmdir()
    res["worker"] = ctx.env.worker
    with jobs.transaction(ctx.env.factory) as db:
        return jobs.complete(db, ctx.claim, now=ctx.env.clock(), unit_result=res)


def _join(ctx: StepContext, inp: Inputs) -> list[jobs.Send]:
    plan = inp.main_result
    if plan is None:
        raise ValueError("the plan of this cube run is missing")
    stage = ctx.staging()
    tiles = [(int(t["start"]), int(t["stop"]), ctx.out / TILES / t["key"]) for t in inp.tiles]
    outputs = ex.join_tiles(tiles, plan["outputs"], inp.attribute_paths, plan["layout"]["shape"],
                            stage, progress=ctx.reporter(CUBE_SPANS["join"]))
    summary = ex.cube_summary(inp.document, plan, inp.seed,
                              [t["result"] for t in inp.tiles], outputs)
    ex.write_json(stage / "summary.json", summary)
    ctx.progress(1.0, "publish", CUBE_SPANS["join"], force=True)  # stopped meanwhile?
    ctx.publish(stage)
    with jobs.transaction(ctx.env.factory) as db:
        sends = jobs.complete(db, ctx.claim, now=ctx.env.clock(), final=True,
                              run_result=_compact(summary))
    shutil.rmtree(ctx.out / TILES, ignore_errors=True)
    return sends


STEPS = {"main": _main, "tile": _tile, "join": _join}


def _cleanup_finished(env: StepEnv, run_id: int) -> None:
    """Remove tiles and staging folders of a run that has finished."""
    out = run_dir(env.data_dir, run_id)
    for name in (TILES, STAGING):
        shutil.rmtree(out / name, ignore_errors=True)


def execute(env: StepEnv, run_id: int, key: str) -> dict[str, Any]:
    """Execute one delivery of a unit of a run; returns a small report.

    Never raises for problems of the run itself (they fail the run with a
    message); an exception escapes only when the database is unreachable.
    """
    with jobs.transaction(env.factory) as db:
        c = jobs.claim(db, run_id, key, worker=env.worker, task_id=env.task_id,
                       now=env.clock(), max_deliveries=env.max_deliveries, lease_s=env.lease_s)
    report = {"run_id": run_id, "key": key, "outcome": c.outcome, "detail": c.detail,
              "delivery": c.delivery, "worker": env.worker}
    if c.outcome != "run":
        if c.outcome in ("done", "exhausted"):
            status = None
            with env.factory() as db:
                status = db.scalar(select(Run.status).where(Run.id == run_id))
            if status in jobs.FINISHED:
                _cleanup_finished(env, run_id)
        logger.info("run %s %s: %s (%s)", run_id, key, c.outcome, c.detail)
        return report
    ctx = StepContext(env, c)
    sends: list[jobs.Send] = []
    try:
        with env.factory() as db:
            run = db.get(Run, run_id)
            assert run is not None
            inp = load_inputs(db, env, run, key)
        ctx.start_heartbeat()
        sends = STEPS[c.kind](ctx, inp)
    except jobs.RunStopped as exc:
        report.update(outcome="stopped", detail=str(exc))
        with jobs.transaction(env.factory) as db:
            jobs.release(db, c, str(exc), now=env.clock())
        _cleanup_finished(env, run_id)
        return report
    except Exception as exc:  # noqa: BLE001 - every failure of the computation fails the run
        message = str(exc) or type(exc).__name__
        if type(exc).__name__ == "SoftTimeLimitExceeded":  # Celery's, raised in the task
            message = ("the step ran longer than the task time limit "
                       "(PORECAST_TASK_TIME_LIMIT_S) and was stopped")
        elif not isinstance(exc, ValueError | FileNotFoundError | KeyError):
            logger.exception("run %s %s failed", run_id, key)
            message = f"{type(exc).__name__}: {message}"
        with jobs.transaction(env.factory) as db:
            failed = jobs.fail(db, c, message, now=env.clock())
        report.update(outcome="failed" if failed else "stopped", detail=message)
        _cleanup_finished(env, run_id)
        return report
    finally:
        ctx.stop_heartbeat()
    with jobs.transaction(env.factory) as db:
        jobs.send_all(db, env.dispatch, sends, now=env.clock())
    report["outcome"] = "succeeded"
    report["sent"] = [s.key for s in sends]
    return report


def recover(env: StepEnv, *, resend_queued: bool, reason: str) -> list[jobs.Send]:
    """Run the recovery sweep of :func:`porecast.services.run_jobs.recover` and send."""
    with jobs.transaction(env.factory) as db:
        sends = jobs.recover(db, now=env.clock(), lease_s=env.lease_s,
                             max_deliveries=env.max_deliveries, resend_queued=resend_queued,
                             reason=reason)
    if sends:
        with jobs.transaction(env.factory) as db:
            jobs.send_all(db, env.dispatch, sends, now=env.clock())
    return sends
