"""The computations of runs, on plain inputs (documents, file paths) and output folders.

No database and no broker here: :mod:`porecast.services.run_steps` loads the
inputs of a run from the database, calls these functions with a staging folder
and publishes the files when they are complete. Every function is a
deterministic function of its inputs (the scenario document, the run's seed,
the input files), so re-running a run reproduces its numbers bit for bit.

Outputs per kind
----------------
simulate
    ``samples.npz`` (attribute samples and every intermediate), ``summary.json``.
classify (maps)
    ``classification.npz`` (``posterior_<facies>``, ``most_likely``,
    ``mahalanobis``, ``entropy`` on the attribute maps' geometry),
    ``training_samples.npz``, ``summary.json`` with the prospect risk numbers.
classify (cubes)
    one file per property (``posterior_<facies>``, ``most_likely``,
    ``mahalanobis``, ``entropy``): SEG-Y when an input is SEG-Y, else ``.npy``;
    computed in tiles of traces that are joined afterwards.
calibrate
    ``calibration.json`` (blind-test confusion matrices) and ``well_facies.csv``.
summarise
    ``risk_table.json`` and ``risk_table.csv``: every prospect x scenario.
sensitivity (maps)
    ``sensitivity.json`` (tornado of every prospect's risk numbers, first-order
    indices; :func:`porecast.services.sensitivity.prospect_sensitivity`) and
    ``tornado.html``, the charts as a self-contained page (plotly.js inlined).
"""

from __future__ import annotations

import copy
import csv
import io as _io
import json
import math
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import numpy as np

from ..io import GridData, NpyTraceWriter, SegyTraceWriter, atomic_path, open_cube, write_npz
from ..io.las import WRITE_MNEMONICS, WellLogs, write_well
from ..physics import forward, risk
from ..physics.scenario import Scenario, scenario_hash, validate_scenario
from . import calibration as calibration_service
from . import classification as cls
from . import simulation

#: ``progress(fraction, stage)``: fraction of the current step in [0, 1].
Progress = Callable[[float, str], None]

CAUTION = (
    "Screening estimates for exploration decisions; they carry large uncertainty and do not "
    "replace professional judgement. Pressure and temperature are not for well design, "
    "drilling or well control."
)


def _quiet(_fraction: float, _stage: str) -> None:
    return None


def _json_default(value: Any) -> Any:
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    raise TypeError(f"not JSON serialisable: {type(value).__name__}")


def _finite_or_none(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def write_json(path: Path, doc: Any) -> None:
    """Write a JSON document atomically (NaN/inf become null)."""
    text = json.dumps(_clean(doc), indent=1, default=_json_default, allow_nan=False)
    with atomic_path(path) as tmp:
        Path(tmp).write_text(text, encoding="utf-8")


def _clean(value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_clean(v) for v in value]
    if isinstance(value, np.ndarray):
        return _clean(value.tolist())
    if isinstance(value, np.generic):
        return _clean(value.item())
    return _finite_or_none(value)


# --------------------------------------------------------------------------- scenario


def scenario_for_run(document: Mapping[str, Any], seed: int) -> tuple[Scenario, dict[str, Any]]:
    """The validated scenario of a revision document with the run's seed in place."""
    doc = copy.deepcopy(dict(document))
    doc["seed"] = int(seed)
    return validate_scenario(doc), doc


def forward_progress(progress: Progress, lo: float, hi: float) -> forward.Progress:
    """Map the forward model's ``(done, total, stage)`` onto ``[lo, hi]`` of a step."""

    def report(done: int, total: int, stage: str) -> None:
        frac = done / total if total else 1.0
        progress(lo + (hi - lo) * frac, f"simulate: {stage}")

    return report


def simulate_outputs(
    document: Mapping[str, Any],
    seed: int,
    out_dir: Path,
    *,
    realisations: int | None = None,
    progress: Progress = _quiet,
) -> dict[str, Any]:
    """Forward model of a scenario: ``samples.npz`` and ``summary.json`` in ``out_dir``."""
    sc, doc = scenario_for_run(document, seed)
    result = forward.simulate(sc, realisations=realisations,
                              progress=forward_progress(progress, 0.0, 0.95))
    summary = simulation.summarise(sc, doc, result)
    progress(0.97, "write")
    simulation.write_result(out_dir, result, summary)
    return summary


# --------------------------------------------------------------------------- training


TRAINING_FILE = "training_samples.npz"


def train_model(
    document: Mapping[str, Any],
    seed: int,
    *,
    realisations: int | None = None,
    progress: Progress = _quiet,
    span: tuple[float, float] = (0.0, 1.0),
) -> tuple[Scenario, forward.ForwardResult, cls.FaciesModel]:
    """Simulate the training data of a scenario and fit the facies PDFs."""
    sc, _ = scenario_for_run(document, seed)
    lo, hi = span
    mid = lo + 0.85 * (hi - lo)
    result = forward.simulate(sc, realisations=realisations,
                              progress=forward_progress(progress, lo, mid))
    progress(mid, "train facies PDFs")
    model = cls.train(result, sc)
    progress(hi, "trained")
    return sc, result, model


def write_training(out_dir: Path, result: forward.ForwardResult) -> Path:
    """Keep the training samples (float64, lossless) so tiles train the same model."""
    path = out_dir / TRAINING_FILE
    with atomic_path(path) as tmp, open(tmp, "wb") as fh:
        np.savez_compressed(fh, samples=result.samples, node_values=result.node_values,
                            facies=np.array(result.facies), attributes=np.array(result.attributes))
    return path


def model_from_training(document: Mapping[str, Any], seed: int, path: Path) -> cls.FaciesModel:
    """The facies model trained on stored training samples (same numbers as the first fit)."""
    sc, _ = scenario_for_run(document, seed)
    axes, node_values = forward.covariate_grid(sc)
    with np.load(path, allow_pickle=False) as data:
        samples = data["samples"]
        stored_nodes = data["node_values"]
        facies = tuple(str(f) for f in data["facies"])
        attributes = tuple(str(a) for a in data["attributes"])
    if not np.array_equal(stored_nodes, node_values):
        raise ValueError(f"{path.name} was simulated on other covariate nodes than the scenario")
    result = forward.ForwardResult(facies, attributes, axes, stored_nodes, samples, {})
    return cls.train(result, sc)


# --------------------------------------------------------------------------- maps


def _facies_fraction(most_likely: np.ndarray, facies: Sequence[str]) -> dict[str, float]:
    valid = most_likely >= 0
    if not valid.any():
        return {}
    return {f: float(np.mean(most_likely[valid] == j)) for j, f in enumerate(facies)}


def prospect_risks(
    posterior: np.ndarray,
    grid: Any,
    hydrocarbon: Sequence[bool],
    prospects: Sequence[Mapping[str, Any]],
    *,
    seed: int,
    correlation_length_m: float | None,
) -> list[dict[str, Any]]:
    """Risk numbers of each prospect outline on a classified map (areas in m2 and km2).

    A prospect whose outline misses the map, or covers only cells without data,
    gets an ``error`` entry instead of numbers; the other prospects are kept.
    """
    X, Y = risk.cell_centres(grid.shape[:2], grid.x0, grid.y0, grid.dx, grid.dy,
                             grid.rotation_deg)
    cell_area = abs(grid.dx * grid.dy)
    rows = []
    for p in prospects:
        entry: dict[str, Any] = {"prospect_id": p.get("id"), "name": p["name"]}
        try:
            mask = risk.polygon_mask(p["outline"], X, Y)
            r = risk.prospect_risk(posterior, list(hydrocarbon), mask, cell_area, seed=seed,
                                   correlation_length_m=correlation_length_m or None,
                                   spacing=(abs(grid.dx), abs(grid.dy)))
        except ValueError as exc:
            entry["error"] = str(exc)
            rows.append(entry)
            continue
        entry.update({k: v for k, v in r._asdict().items() if k != "realised_areas"})
        for key in ("expected", "p90", "p50", "p10"):
            entry[f"{key}_area_km2"] = float(entry[f"{key}_area_m2"]) / 1e6
        rows.append(entry)
    return rows


def classify_map_outputs(
    document: Mapping[str, Any],
    seed: int,
    attribute_paths: Mapping[str, Path],
    covariate_paths: Mapping[str, Path],
    prospects: Sequence[Mapping[str, Any]],
    out_dir: Path,
    *,
    realisations: int | None = None,
    max_mahalanobis: float | None = None,
    correlation_length_m: float | None = None,
    progress: Progress = _quiet,
) -> dict[str, Any]:
    """Classify attribute maps; write ``classification.npz``, training samples and summary."""
    sc, result, model = train_model(document, seed, realisations=realisations,
                                    progress=progress, span=(0.0, 0.6))
    write_training(out_dir, result)
    progress(0.62, "classify map")
    grid, values = cls.map_attributes(model, attribute_paths)
    covs = cls.covariate_maps(model, covariate_paths, grid.shape, "the attribute maps")
    res = cls.classify_map(model, values, covs, max_mahalanobis=max_mahalanobis)
    maps = {f"posterior_{cls.slug(f)}": res["posterior"][..., j]
            for j, f in enumerate(model.facies)}
    maps.update({k: np.asarray(res[k], dtype=float) for k in cls.MAP_OUTPUTS})
    progress(0.8, "prospect risk")
    rows = prospect_risks(res["posterior"], grid, model.hydrocarbon, prospects, seed=seed,
                          correlation_length_m=correlation_length_m)
    progress(0.95, "write")
    write_npz(out_dir / "classification.npz", GridData(grid.with_attributes(tuple(maps)), maps))
    summary = {
        "kind": "porecast.classification",
        "version": 1,
        "input": "map",
        "scenario": {"name": sc.name, "hash": scenario_hash(dict(document))},
        "seed": int(seed),
        "facies": list(model.facies),
        "hydrocarbon": list(model.hydrocarbon),
        "attributes": list(model.attributes),
        "varying_covariates": list(model.axes),
        "shape": list(grid.shape),
        "geometry": {"x0": grid.x0, "y0": grid.y0, "dx": grid.dx, "dy": grid.dy,
                     "rotation_deg": grid.rotation_deg},
        "n_clamped": int(res["n_clamped"]),
        "n_no_data": int((res["most_likely"] < 0).sum()),
        "facies_fraction": _facies_fraction(res["most_likely"], model.facies),
        "correlation_length_m": correlation_length_m,
        "prospects": rows,
        "convention": risk.QUANTILE_CONVENTION,
        "outputs": ["classification.npz", TRAINING_FILE],
        "caution": CAUTION,
    }
    write_json(out_dir / "summary.json", summary)
    return summary


# --------------------------------------------------------------------------- cubes


def plan_tiles(n_traces: int, tile_traces: int) -> list[tuple[int, int]]:
    """Consecutive trace ranges of at most ``tile_traces`` traces covering the cube."""
    if n_traces < 1 or tile_traces < 1:
        raise ValueError(f"a cube of {n_traces} traces cannot be split in tiles of {tile_traces}")
    return [(a, min(a + tile_traces, n_traces)) for a in range(0, n_traces, tile_traces)]


def cube_layout(attribute_paths: Mapping[str, Path], first: str) -> dict[str, Any]:
    """Shape and trace count of the first attribute cube, and whether any input is SEG-Y."""
    with open_cube(attribute_paths[first], name=first) as reader:
        shape = [int(n) for n in reader.shape]
        n_traces = int(reader.n_traces)
    segy = any(Path(p).suffix.lower() in cls.SEGY_SUFFIXES for p in attribute_paths.values())
    return {"shape": shape, "n_traces": n_traces, "segy": segy}


def read_covariate_arrays(
    model: cls.FaciesModel, covariate_paths: Mapping[str, Path]
) -> dict[str, np.ndarray]:
    """The covariate maps a (non-stationary) model needs, as arrays."""
    out = {}
    for name in model.axes:
        if name not in covariate_paths:
            raise ValueError(f"the PDFs vary with {list(model.axes)}: a map of {name} is needed")
        data = cls.read_map(covariate_paths[name], name)
        out[name] = data.values[name] if name in data.values else next(iter(data.values.values()))
    return out


def classify_tile(
    model: cls.FaciesModel,
    attribute_paths: Mapping[str, Path],
    covariate_arrays: Mapping[str, np.ndarray],
    trace_range: tuple[int, int],
    out_dir: Path,
    *,
    max_mahalanobis: float | None = None,
    progress: Callable[[int, int], None] | None = None,
    chunk_traces: int | None = None,
) -> dict[str, Any]:
    """Classify traces ``start:stop`` of a cube into ``.npy`` tiles in ``out_dir``."""
    result, clamped = cls.classify_cube(
        model, attribute_paths, covariate_arrays, out_dir, max_mahalanobis=max_mahalanobis,
        trace_range=trace_range, chunk_traces=chunk_traces, progress=progress,
    )
    return {"n_traces": int(result.n_traces), "n_dead_traces": int(result.n_dead_traces),
            "n_no_data_samples": int(result.n_no_data_samples), "n_clamped": int(clamped),
            "outputs": sorted(p.name for p in result.outputs.values())}


def join_tiles(
    tiles: Sequence[tuple[int, int, Path]],
    names: Sequence[str],
    attribute_paths: Mapping[str, Path],
    shape: Sequence[int],
    out_dir: Path,
    *,
    progress: Progress = _quiet,
) -> list[str]:
    """Join tile outputs into one file per property (SEG-Y for SEG-Y input, else ``.npy``).

    The tiles must cover traces ``0:n_traces`` without gaps or overlaps.
    """
    ordered = sorted(tiles)
    n_traces = int(np.prod(shape[:-1]))
    expected = 0
    for start, stop, _ in ordered:
        if start != expected:
            raise ValueError(f"tiles leave traces {expected}:{start} uncovered")
        expected = stop
    if expected != n_traces:
        raise ValueError(f"tiles cover {expected} of {n_traces} traces")
    template = next((Path(p) for p in attribute_paths.values()
                     if Path(p).suffix.lower() in cls.SEGY_SUFFIXES), None)
    written = []
    for i, name in enumerate(names):
        writer: SegyTraceWriter | NpyTraceWriter
        if template is not None:
            writer = SegyTraceWriter(template, out_dir / f"{name}.sgy")
        else:
            writer = NpyTraceWriter(out_dir / f"{name}.npy", tuple(shape), np.float32)
        with writer:
            for start, stop, folder in ordered:
                block = np.load(folder / f"{name}.npy", allow_pickle=False)
                writer.write(slice(start, stop), block)
        written.append(writer.path.name)
        progress((i + 1) / len(names), f"join {name}")
    return written


def cube_summary(
    document: Mapping[str, Any],
    plan: Mapping[str, Any],
    seed: int,
    tile_results: Sequence[Mapping[str, Any]],
    outputs: Sequence[str],
) -> dict[str, Any]:
    """Summary of a joined cube classification.

    ``plan`` is the result of the cube's main step: ``layout`` (shape, traces,
    SEG-Y or not), ``facies``, ``hydrocarbon``, ``attributes``, ``axes``, ``scenario``.
    """
    return {
        "kind": "porecast.classification",
        "version": 1,
        "input": "cube",
        "scenario": {"name": plan["scenario"], "hash": scenario_hash(dict(document))},
        "seed": int(seed),
        "facies": list(plan["facies"]),
        "hydrocarbon": list(plan["hydrocarbon"]),
        "attributes": list(plan["attributes"]),
        "varying_covariates": list(plan["axes"]),
        "shape": list(plan["layout"]["shape"]),
        "segy": bool(plan["layout"]["segy"]),
        "n_tiles": len(tile_results),
        "n_clamped": int(sum(t["n_clamped"] for t in tile_results)),
        "n_dead_traces": int(sum(t["n_dead_traces"] for t in tile_results)),
        "n_no_data_samples": int(sum(t["n_no_data_samples"] for t in tile_results)),
        "outputs": sorted([*outputs, TRAINING_FILE]),
        "caution": CAUTION,
    }


# --------------------------------------------------------------------------- calibration


def well_logs_from_store(path: Path, name: str, location: tuple[float, float] | None) -> WellLogs:
    """Well logs from the ``.npz`` the well upload stored (canonical curves, Porecast units)."""
    with np.load(path, allow_pickle=False) as data:
        depth = np.asarray(data["depth"], dtype=np.float64)
        curves = {k[len("curve_"):]: np.asarray(data[k], dtype=np.float64)
                  for k in data.files
                  if k.startswith("curve_") and k[len("curve_"):] in WRITE_MNEMONICS}
    return WellLogs(name=name, depth=depth, curves=curves, location=location)


def calibrate_outputs(
    document: Mapping[str, Any],
    seed: int,
    logs: WellLogs,
    out_dir: Path,
    *,
    covariates: Mapping[str, float] | None = None,
    hydrocarbon_facies: str | None = None,
    block_m: float = 10.0,
    vshale_cutoff: float | None = None,
    sw_cutoff: float | None = None,
    realisations: int | None = None,
    work_dir: Path | None = None,
    progress: Progress = _quiet,
) -> dict[str, Any]:
    """Blind test of a scenario at a well: ``calibration.json`` and ``well_facies.csv``."""
    sc, _, model = train_model(document, seed, realisations=realisations, progress=progress,
                               span=(0.0, 0.8))
    progress(0.82, "calibrate at the well")
    # The calibration reads LAS; the stored curves are written back as LAS 2.0 first.
    las = write_well((work_dir or out_dir) / ".well.las", logs, fsync=False)
    kw: dict[str, Any] = {}
    if vshale_cutoff is not None:
        kw["vshale_cutoff"] = vshale_cutoff
    if sw_cutoff is not None:
        kw["sw_cutoff"] = sw_cutoff
    try:
        res = calibration_service.calibrate_well(
            sc, model, las, covariates=dict(covariates or {}), block_m=block_m,
            hydrocarbon_facies=hydrocarbon_facies, **kw,
        )
    finally:
        las.unlink(missing_ok=True)
    well_logs = res.pop("logs")
    progress(0.95, "write")
    _write_well_csv(out_dir / "well_facies.csv", well_logs, model)
    res.update(kind="porecast.calibration", version=1, seed=int(seed),
               scenario={"name": sc.name, "hash": scenario_hash(dict(document))},
               outputs=["calibration.json", "well_facies.csv"], caution=CAUTION)
    write_json(out_dir / "calibration.json", res)
    return res


def _write_well_csv(path: Path, logs: Mapping[str, Any], model: cls.FaciesModel) -> None:
    buf = _io.StringIO()
    out = csv.writer(buf, lineterminator="\n")
    out.writerow(["depth_m", "vp_m_s", "vs_m_s", "density_g_cm3", "vshale", "sw",
                  *model.attributes, "facies_cutoff", "facies_predicted",
                  *(f"p_{cls.slug(f)}" for f in model.facies)])
    for i in range(logs["depth_m"].size):
        nums = [logs["depth_m"][i], logs["vp"][i], logs["vs"][i], logs["density"][i],
                logs["vshale"][i], logs["sw"][i], *logs["attributes"][i]]
        out.writerow([f"{v:.6g}" for v in nums]
                     + [logs["facies_cutoff"][i], logs["facies_predicted"][i]]
                     + [f"{v:.4f}" for v in logs["posterior"][i]])
    with atomic_path(path) as tmp:
        Path(tmp).write_text(buf.getvalue(), encoding="utf-8")


# --------------------------------------------------------------------------- summaries


def risk_from_classification(
    path: Path,
    hydrocarbon: Sequence[bool],
    prospects: Sequence[Mapping[str, Any]],
    *,
    seed: int,
    correlation_length_m: float | None,
) -> list[dict[str, Any]]:
    """Prospect risk numbers from a stored ``classification.npz`` (its posterior maps)."""
    from ..io import read_npz

    data = read_npz(path)
    names = [k for k in data.values if k.startswith("posterior_")]
    if len(names) != len(hydrocarbon):
        raise ValueError(f"{path.name} holds {len(names)} posterior maps for "
                         f"{len(hydrocarbon)} facies")
    posterior = np.stack([data.values[k] for k in names], axis=-1)
    return prospect_risks(posterior, data.grid, hydrocarbon, prospects, seed=seed,
                          correlation_length_m=correlation_length_m)


def summarise_outputs(
    entries: Sequence[Mapping[str, Any]],
    prospects: Sequence[Mapping[str, Any]],
    out_dir: Path,
    *,
    correlation_length_m: float | None = None,
    progress: Progress = _quiet,
) -> dict[str, Any]:
    """The risk table of a project: every prospect x scenario side by side.

    Parameters
    ----------
    entries : sequence of dict
        One per scenario: ``scenario_id``, ``scenario``, ``run_id``, ``revision``,
        ``seed``, ``hydrocarbon`` (flags per facies), ``classification`` (path of
        its ``classification.npz``) and ``correlation_length_m`` of that run.
    prospects : sequence of dict
        ``id``, ``name``, ``outline`` (m).
    correlation_length_m : float, optional
        Overrides the correlation length of every classify run.
    """
    rows: list[tuple[str, str, risk.ProspectRisk]] = []
    ids: dict[tuple[str, str], dict[str, Any]] = {}
    skipped = []
    for i, e in enumerate(entries):
        corr = correlation_length_m if correlation_length_m is not None \
            else e.get("correlation_length_m")
        risks = risk_from_classification(Path(e["classification"]), e["hydrocarbon"], prospects,
                                         seed=int(e["seed"]), correlation_length_m=corr)
        for r in risks:
            if "error" in r:
                skipped.append({"scenario": e["scenario"], "prospect": r["name"],
                                "reason": r["error"]})
                continue
            pr = risk.ProspectRisk(
                probability_hc=r["probability_hc"], expected_area_m2=r["expected_area_m2"],
                p10_area_m2=r["p10_area_m2"], p50_area_m2=r["p50_area_m2"],
                p90_area_m2=r["p90_area_m2"], n_cells=r["n_cells"], n_nodata=r["n_nodata"],
                realised_areas=np.empty(0), covariance_error=r["covariance_error"],
            )
            rows.append((e["scenario"], r["name"], pr))
            ids[(e["scenario"], r["name"])] = {"scenario_id": e["scenario_id"],
                                               "prospect_id": r["prospect_id"],
                                               "run_id": e["run_id"], "revision": e["revision"]}
        progress((i + 1) / max(len(entries), 1), f"risk of {e['scenario']}")
    table = risk.scenario_table(rows)
    out_rows = [{**ids[(r["scenario"], r["prospect"])], **r} for r in table.rows]
    summary = {
        "kind": "porecast.risk_table",
        "version": 1,
        "scenarios": table.scenarios,
        "prospects": table.prospects,
        "rows": out_rows,
        "pivot_probability_hc": table.pivot("probability_hc"),
        "skipped": skipped,
        "convention": table.convention,
        "outputs": ["risk_table.json", "risk_table.csv"],
        "caution": CAUTION,
    }
    write_json(out_dir / "risk_table.json", summary)
    buf = _io.StringIO()
    out = csv.writer(buf, lineterminator="\n")
    cols = ["prospect", "scenario", "probability_hc", "expected_area_km2", "p90_area_km2",
            "p50_area_km2", "p10_area_km2", "n_cells", "n_nodata", "run_id", "revision"]
    out.writerow(cols)
    for r in out_rows:
        out.writerow([r[c] for c in cols])
    with atomic_path(out_dir / "risk_table.csv") as tmp:
        Path(tmp).write_text(buf.getvalue(), encoding="utf-8")
    return summary


# --------------------------------------------------------------------------- sensitivity


SENSITIVITY_FILES = ("sensitivity.json", "tornado.html")


def sensitivity_outputs(
    document: Mapping[str, Any],
    seed: int,
    attribute_paths: Mapping[str, Path],
    covariate_paths: Mapping[str, Path],
    prospects: Sequence[Mapping[str, Any]],
    out_dir: Path,
    *,
    realisations: int | None = None,
    low_q: float = 0.1,
    high_q: float = 0.9,
    fix_others: str | None = None,
    correlation_length_m: float | None = None,
    progress: Progress = _quiet,
) -> dict[str, Any]:
    """Tornado charts and first-order indices of prospect risk on attribute maps.

    Writes ``sensitivity.json`` (the document of
    :func:`porecast.services.sensitivity.prospect_sensitivity` with the scenario,
    seed, facies and prospects added) and ``tornado.html`` (its charts, plotly.js
    inlined from the local package) into ``out_dir``. Progress: the chain
    evaluations of the tornado take 0-92 % of the step, labelled
    ``tornado (done of total evaluations)``.
    """
    from . import sensitivity  # imports this module (prospect_risks)

    sc, _ = scenario_for_run(document, seed)
    # What the maps must supply: the scenario's attributes and its varying covariates
    # (the two attributes of a facies model the map readers ask for).
    node_axes, _ = forward.covariate_grid(sc)
    probe: Any = SimpleNamespace(attributes=tuple(sc.rockphysics.seismic.attributes),
                            axes=tuple(c for c, v in node_axes.items() if len(v) > 1))
    grid, values = cls.map_attributes(probe, attribute_paths)
    covs = cls.covariate_maps(probe, covariate_paths, grid.shape, "the attribute maps")
    total = 2 * len(sensitivity.input_distributions(sc)) + 1
    progress(0.0, f"tornado (0 of {total} evaluations)")

    def on_evaluation(done: int, n: int, label: str) -> None:
        progress(0.92 * done / n, f"{label} ({done} of {n} evaluations)")

    doc = sensitivity.prospect_sensitivity(
        sc, values, grid, covs, prospects, realisations=realisations, low_q=low_q,
        high_q=high_q, fix_others=fix_others, correlation_length_m=correlation_length_m,
        progress=on_evaluation)
    progress(0.95, "write")
    doc.update(
        kind="porecast.sensitivity", version=1,
        scenario={"name": sc.name, "hash": scenario_hash(dict(document))}, seed=int(seed),
        facies=[f.name for f in sc.geology.facies],
        hydrocarbon=[bool(f.hydrocarbon) for f in sc.geology.facies],
        prospects=[{"id": p.get("id"), "name": p["name"]} for p in prospects],
        correlation_length_m=correlation_length_m, outputs=list(SENSITIVITY_FILES),
        indices_confidence=_default("confidence", sensitivity.sensitivity.first_order_indices),
        caution=CAUTION)
    figure = sensitivity.tornado_figure({**doc, "scenario": sc.name})
    with atomic_path(out_dir / "tornado.html") as tmp:
        figure.write_html(tmp, include_plotlyjs=True, full_html=True)
    write_json(out_dir / "sensitivity.json", doc)
    return doc


def _default(name: str, func: Callable[..., Any]) -> Any:
    """The default value of a keyword of ``func`` (the coverage of the index intervals)."""
    import inspect

    return inspect.signature(func).parameters[name].default


def sensitivity_result(doc: Mapping[str, Any]) -> dict[str, Any]:
    """The small summary of a sensitivity run kept on its row (``run.result``).

    Per prospect and outcome the base value, its unit and the input with the
    largest swing (with both outcomes; None when no input moves the outcome); the
    charts themselves are in ``sensitivity.json``.
    """
    prospects = []
    for p in doc["prospects"]:
        entry: dict[str, Any] = {"id": p["id"], "name": p["name"], "outcomes": {}}
        for outcome, t in doc["tornado"][p["name"]].items():
            top = next((sw for sw in t["swings"]  # largest swing first
                        if sw["outcome_low"] != t["base"] or sw["outcome_high"] != t["base"]),
                       None)
            entry["outcomes"][outcome] = {
                "base": t["base"], "unit": t["unit"],
                "largest": None if top is None else {
                    "path": top["path"], "outcome_low": top["outcome_low"],
                    "outcome_high": top["outcome_high"]}}
        prospects.append(entry)
    return {
        "kind": doc["kind"], "scenario": doc["scenario"], "seed": doc["seed"],
        "facies": doc["facies"], "hydrocarbon": doc["hydrocarbon"],
        "n_inputs": len(doc["inputs"]), "n_evaluations": doc["n_evaluations"],
        "low_quantile": doc["low_quantile"], "high_quantile": doc["high_quantile"],
        "fix_others": doc["fix_others"], "realisations": doc["realisations"],
        "prospects": prospects, "outputs": list(doc["outputs"]),
    }
