"""Use-case: run a scenario's Monte Carlo forward model and store the samples.

Shared by the ``porecast simulate`` command and the worker's simulate task.
Results are computed in full before anything is written, and each file is
written to a temporary name and renamed, so a failure leaves no partial output.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np

from ..io.atomic import atomic_path
from ..physics import forward
from ..physics.scenario import (
    COVARIATES,
    Scenario,
    default_scenario,
    load_scenario,
    scenario_hash,
    validate_scenario,
)


def load(scenario: str | Path | dict[str, Any] | Scenario | None) -> tuple[Scenario, dict]:
    """A validated scenario and its JSON document from a path, a dict or nothing (example)."""
    if scenario is None:
        doc = default_scenario()
        return validate_scenario(doc), doc
    if isinstance(scenario, Scenario):
        return scenario, scenario.model_dump(mode="json")
    if isinstance(scenario, dict):
        return validate_scenario(scenario), scenario
    path = Path(scenario)
    if not path.is_file():
        raise FileNotFoundError(f"scenario file {path} does not exist")
    sc = load_scenario(str(path))
    return sc, json.loads(path.read_text(encoding="utf-8"))


def summarise(sc: Scenario, doc: dict, result: forward.ForwardResult) -> dict[str, Any]:
    """JSON summary: per facies and node mean, covariance and count, seed and input hash."""
    stats = forward.node_statistics(result)
    overview = []
    for j, name in enumerate(result.facies):
        phi = result.fields["porosity"][:, j]
        cem = result.fields["cement"][:, j]
        vp = result.fields["vp"][:, j]
        overview.append(
            f"{name:<12} porosity {phi.min():.3f}-{phi.max():.3f}  "
            f"cement {cem.max():.3f} max  Vp {vp.min():.0f}-{vp.max():.0f} m/s"
        )
    return {
        "kind": "porecast.simulation",
        "version": 1,
        "scenario": {"name": sc.name, "hash": scenario_hash(doc)},
        "seed": sc.seed,
        "realisations": int(result.samples.shape[2]),
        "n_nodes": int(result.node_values.shape[0]),
        "covariates": list(COVARIATES),
        "node_axes": {k: v.tolist() for k, v in result.node_axes.items()},
        "facies": list(result.facies),
        "attributes": list(result.attributes),
        "units": {k: forward.UNITS[k] for k in result.attributes},
        "nodes": stats,
        "overview": overview,
        "caution": "Screening estimates for exploration decisions. Pressure and temperature "
        "are not for well design, drilling or well control.",
    }


def write_result(out_dir: Path, result: forward.ForwardResult, summary: dict[str, Any]) -> None:
    """Write ``samples.npz`` and ``summary.json`` into ``out_dir``, each atomically."""
    out_dir.mkdir(parents=True, exist_ok=True)
    arrays = {"samples": result.samples, "node_values": result.node_values}
    arrays.update({f"field_{k}": v.astype(np.float32) for k, v in result.fields.items()})
    with atomic_path(out_dir / "samples.npz") as tmp, open(tmp, "wb") as fh:
        np.savez_compressed(fh, **arrays)
    with atomic_path(out_dir / "summary.json") as tmp:
        Path(tmp).write_text(json.dumps(summary, indent=1), encoding="utf-8")


def run_simulation(
    scenario: str | Path | dict[str, Any] | Scenario | None,
    out_dir: Path,
    *,
    realisations: int | None = None,
    progress: forward.Progress | None = None,
) -> dict[str, Any]:
    """Validate, simulate, summarise and write; returns the summary."""
    sc, doc = load(scenario)
    result = forward.simulate(sc, realisations=realisations, progress=progress)
    summary = summarise(sc, doc, result)
    write_result(Path(out_dir), result, summary)
    return summary
