"""Views of run results for plotting and for the manager's risk summary.

Maps and sections come back as plain JSON for a plotly heatmap: node
coordinates in m along the grid's own (unrotated) axes from ``x0, y0`` (the
rotation is given), values with ``null`` where there is no data, thinned by a
whole-number stride to at most ``max_points`` per axis.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np
from sqlalchemy import select
from sqlalchemy.orm import Session

from porecast.db.models import (
    Grid,
    Prospect,
    Run,
    Scenario,
    ScenarioRevision,
    ScenarioSection,
    User,
)

from . import classification as cls
from .authz import require_project
from .errors import Conflict, InvalidInput, NotFound
from .run_steps import run_dir
from .runs import get_run, latest_map_classification

MAX_POINTS = 500
SCALAR_LAYERS = ("most_likely", "mahalanobis", "entropy")
UNITS = {"most_likely": "facies index", "mahalanobis": "standard deviations (Mahalanobis)",
         "entropy": "fraction of the largest entropy", "posterior": "probability (fraction)"}


def _bad_layer(layer: str, facies: list[str]) -> InvalidInput:
    allowed = ", ".join([*SCALAR_LAYERS, *(f"posterior:{f}" for f in facies)])
    return InvalidInput(f"unknown layer {layer!r}; one of {allowed}",
                        [{"loc": "layer", "msg": f"one of {allowed}"}])


def _layer_key(layer: str, facies: list[str]) -> tuple[str, str]:
    """(file key, kind) of a layer name such as ``posterior:gas sand``."""
    if layer in SCALAR_LAYERS:
        return layer, layer
    if layer.startswith("posterior:"):
        wanted = layer.split(":", 1)[1]
        for f in facies:
            if wanted in (f, cls.slug(f)):
                return f"posterior_{cls.slug(f)}", "posterior"
    raise _bad_layer(layer, facies)


def _finished_classification(db: Session, user: User, run_id: int) -> Run:
    run = get_run(db, user, run_id, "read_detail")
    if run.kind != "classify":
        raise Conflict(f"run {run_id} is a {run.kind} run; maps and sections come from "
                       "classify runs")
    if run.status != "succeeded" or not run.result:
        raise Conflict(f"run {run_id} is {run.status}; its results appear when it succeeds")
    return run


def _result(run: Run) -> dict[str, Any]:
    return dict(run.result or {})


def _stride(n: int, max_points: int) -> int:
    return max(1, math.ceil(n / max_points))


def _values(block: np.ndarray, kind: str) -> list[list[float | int | None]]:
    if kind == "most_likely":
        return [[int(v) if np.isfinite(v) and v >= 0 else None for v in row] for row in block]
    return [[float(v) if np.isfinite(v) else None for v in row] for row in block]


def _facies_info(run: Run) -> list[dict[str, Any]]:
    res = run.result or {}
    return [{"index": j, "name": f, "hydrocarbon": bool(h)}
            for j, (f, h) in enumerate(zip(res.get("facies", []), res.get("hydrocarbon", []),
                                           strict=False))]


def map_view(
    db: Session, user: User, run_id: int, *, layer: str, data_dir: Path,
    max_points: int = MAX_POINTS,
) -> dict[str, Any]:
    """One layer of a map classification, thinned to at most ``max_points`` per axis."""
    from porecast.io import read_npz

    run = _finished_classification(db, user, run_id)
    if _result(run).get("input") != "map":
        raise Conflict(f"run {run_id} classified a cube; use its sections")
    facies = list(_result(run)["facies"])
    key, kind = _layer_key(layer, facies)
    data = read_npz(run_dir(data_dir, run_id) / "classification.npz")
    arr = np.asarray(data.values[key], dtype=np.float64)
    grid = data.grid
    ny, nx = arr.shape
    sy, sx = _stride(ny, max_points), _stride(nx, max_points)
    finite = arr[np.isfinite(arr)]
    if kind == "most_likely":
        finite = finite[finite >= 0]
    return {
        "run_id": run.id,
        "layer": layer,
        "kind": kind,
        "unit": UNITS[kind],
        "x": [float(grid.x0 + i * grid.dx) for i in range(0, nx, sx)],
        "y": [float(grid.y0 + j * grid.dy) for j in range(0, ny, sy)],
        "z": _values(arr[::sy, ::sx], kind),
        "zmin": float(finite.min()) if finite.size else None,
        "zmax": float(finite.max()) if finite.size else None,
        "facies": _facies_info(run),
        "shape": [ny, nx],
        "stride": [sy, sx],
        "rotation_deg": float(grid.rotation_deg),
    }


def section_view(
    db: Session, user: User, run_id: int, *, line: int | None, layer: str, data_dir: Path,
    files_dir: Path, max_points: int = MAX_POINTS,
) -> dict[str, Any]:
    """One line (axis 0, an inline) of a cube classification; ``y`` is the sample axis."""
    from porecast.io import open_cube

    run = _finished_classification(db, user, run_id)
    if _result(run).get("input") != "cube":
        raise Conflict(f"run {run_id} classified a map; use its map view")
    facies = list(_result(run)["facies"])
    key, kind = _layer_key(layer, facies)
    folder = run_dir(data_dir, run_id)
    path = next((folder / f"{key}{s}" for s in (".sgy", ".npy") if (folder / f"{key}{s}")
                 .is_file()), None)
    if path is None:
        raise NotFound(f"run {run_id} has no output {key}")
    with open_cube(path, name=key) as reader:
        shape = [int(n) for n in reader.shape]
        per_line = int(np.prod(shape[1:-1])) if len(shape) > 2 else 1
        n_lines = reader.n_traces // per_line
        index = n_lines // 2 if line is None else line
        if not 0 <= index < n_lines:
            raise InvalidInput(f"line must be between 0 and {n_lines - 1}",
                               [{"loc": "line", "msg": f"0 to {n_lines - 1}"}])
        section = reader.read(index * per_line, (index + 1) * per_line)
    geometry: dict[str, Any] = {}
    first = next(iter((run.parameters or {}).get("attribute_grids", {}).values()), None)
    grid = db.get(Grid, int(first)) if first is not None else None
    if grid is not None:
        geometry = dict(grid.geometry)
    n_traces, n_samples = section.shape
    st, ss = _stride(n_traces, max_points), _stride(n_samples, max_points)
    axis = geometry.get("sample_axis") or {"start": 0.0, "step": 1.0}
    x0, dx = float(geometry.get("x0", 0.0)), float(geometry.get("dx", 1.0))
    return {
        "run_id": run.id,
        "layer": layer,
        "kind": kind,
        "unit": UNITS[kind],
        "line": index,
        "n_lines": n_lines,
        "x": [x0 + i * dx for i in range(0, n_traces, st)],
        "y": [float(axis.get("start", 0.0)) + k * float(axis.get("step", 1.0))
              for k in range(0, n_samples, ss)],
        "y_unit": axis.get("unit", "ms" if axis.get("domain") == "time" else "m"),
        "z": _values(section[::st, ::ss].T, kind),
        "facies": _facies_info(run),
        "shape": shape,
        "stride": [st, ss],
    }


# --------------------------------------------------------------------------- risk summary


def _last_change(db: Session, scenario: Scenario) -> dict[str, Any]:
    rev = db.scalar(select(ScenarioRevision).where(ScenarioRevision.scenario_id == scenario.id)
                    .order_by(ScenarioRevision.number.desc()).limit(1))
    if rev is None:
        return {}
    return {"revision": rev.number, "at": rev.created_at.isoformat(),
            "author": rev.author.username if rev.author else None, "section": rev.section,
            "kind": rev.kind, "message": rev.message}


RISK_KEYS = ("probability_hc", "expected_area_km2", "p90_area_km2", "p50_area_km2",
             "p10_area_km2", "n_cells", "n_nodata")


def risk_summary(db: Session, user: User, project_id: int) -> dict[str, Any]:
    """Per prospect x scenario: probability of hydrocarbon and areas, with readiness.

    Numbers come from each scenario's newest successful map classification
    (computed when it ran, with its seed); ``stale`` marks a run made on an
    older revision than the scenario's head. Areas in km2, probabilities as
    fractions; P90 is the low case, P10 the high case.
    """
    require_project(db, user, project_id, "read_summary")
    from porecast.physics.risk import QUANTILE_CONVENTION

    scenarios = list(db.scalars(select(Scenario).where(Scenario.project_id == project_id)
                                .order_by(Scenario.id)))
    prospects = list(db.scalars(select(Prospect).where(Prospect.project_id == project_id)
                                .order_by(Prospect.id)))
    scen_out: list[dict[str, Any]] = []
    by_scenario: dict[int, dict[Any, Any]] = {}
    for s in scenarios:
        sections = list(db.scalars(select(ScenarioSection)
                                   .where(ScenarioSection.scenario_id == s.id)))
        not_ready = sorted(x.section for x in sections if not x.ready)
        run = latest_map_classification(db, s.id)
        run_info = None
        if run is not None:
            rev = db.get(ScenarioRevision, run.scenario_revision_id)
            number = rev.number if rev else None
            run_info = {"id": run.id, "revision": number, "seed": run.seed,
                        "finished_at": run.finished_at.isoformat() if run.finished_at else None,
                        "stale": number != s.head_revision}
            by_scenario[s.id] = {r.get("prospect_id"): r
                                 for r in (run.result or {}).get("prospects", [])}
        scen_out.append({"id": s.id, "name": s.name, "head_revision": s.head_revision,
                         "updated_at": s.updated_at.isoformat(),
                         "readiness": {"ready": not not_ready, "not_ready": not_ready},
                         "last_change": _last_change(db, s), "run": run_info})
    rows = []
    for p in prospects:
        for info in scen_out:
            entry = by_scenario.get(info["id"], {}).get(p.id)
            row: dict[str, Any] = {"prospect_id": p.id, "prospect": p.name,
                                   "scenario_id": info["id"], "scenario": info["name"],
                                   "run_id": info["run"]["id"] if info["run"] else None}
            if entry is None or "error" in entry:
                row.update({k: None for k in RISK_KEYS})
                row["note"] = (entry or {}).get("error") or (
                    "no successful map classification yet" if info["run"] is None
                    else "not among the prospects of the latest classification")
            else:
                row.update({k: entry.get(k) for k in RISK_KEYS})
            rows.append(row)
    return {"project_id": project_id,
            "prospects": [{"id": p.id, "name": p.name, "area_km2": p.area_m2 / 1e6}
                          for p in prospects],
            "scenarios": scen_out, "rows": rows, "convention": QUANTILE_CONVENTION,
            "caution": "Screening estimates for exploration decisions; they carry large "
            "uncertainty and do not replace professional judgement."}
