"""Use-case: train facies PDFs from a forward run and classify maps and cubes.

Shared by ``porecast classify``, ``porecast calibrate`` and the worker tasks.
Training fits one Gaussian per facies at every covariate node of the scenario
(covariates with a single node drop out, so a scenario with one node
everywhere is stationary). Maps are classified in one pass; cubes are streamed
trace-chunk by trace-chunk through :func:`porecast.io.process_cube`, with each
sample's covariates looked up from the covariate maps by its trace (map
location), so memory stays bounded by the chunk size.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ..io import (
    CubeRunResult,
    Grid,
    GridData,
    check_same_geometry,
    open_cube,
    process_cube,
    read_npy,
    read_npz,
    read_xyz,
)
from ..physics import classify as clf
from ..physics.forward import ForwardResult
from ..physics.scenario import COVARIATES, Scenario

SEGY_SUFFIXES = (".sgy", ".segy")
MAP_OUTPUTS = ("most_likely", "mahalanobis", "entropy")


def slug(name: str) -> str:
    """File-name form of a facies name (``"gas sand"`` -> ``"gas_sand"``)."""
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", name).strip("_") or "facies"


@dataclass
class FaciesModel:
    """Trained facies PDFs of one scenario run, ready to classify."""

    facies: tuple[str, ...]
    attributes: tuple[str, ...]
    hydrocarbon: tuple[bool, ...]
    axes: tuple[str, ...]
    """Covariates the PDFs vary with (empty: stationary)."""
    node_axes: dict[str, np.ndarray]
    priors: np.ndarray
    estimator: Any
    """A fitted ``GaussianFacies`` or ``NonstationaryGaussianFacies``."""

    @property
    def stationary(self) -> bool:
        return not self.axes

    def classify(
        self,
        x: np.ndarray,
        covariates: Mapping[str, np.ndarray] | None = None,
        priors: np.ndarray | None = None,
        *,
        max_mahalanobis: float | None = None,
    ) -> clf.Classification:
        """Classify rows of attributes (n, d); NaN rows are carried as no data."""
        p = self.priors if priors is None else priors
        if self.stationary:
            return self.estimator.classify(x, p, max_mahalanobis=max_mahalanobis,
                                           normalised_entropy=True)
        covs = covariates or {}
        missing = [a for a in self.axes if a not in covs]
        if missing:
            raise ValueError(
                f"this scenario's PDFs vary with {list(self.axes)}; covariate map(s) {missing} "
                "are needed (give them with --covariate NAME=FILE)"
            )
        return self.estimator.classify(x, {a: covs[a] for a in self.axes}, p,
                                       max_mahalanobis=max_mahalanobis, normalised_entropy=True)


def train(result: ForwardResult, scenario: Scenario, *, reg_covariance: float = 0.0) -> FaciesModel:
    """Fit the facies PDFs of a forward run at its covariate nodes.

    Parameters
    ----------
    result : ForwardResult
        Run on the scenario's own node grid.
    scenario : Scenario
        Gives the facies priors (proportions) and hydrocarbon flags.
    reg_covariance : float
        Shrinkage of each node covariance towards its diagonal (0 = none).
    """
    grid_shape = result.grid_shape
    n_nodes = result.node_values.shape[0]
    if int(np.prod(grid_shape)) != n_nodes:
        raise ValueError(
            "training needs the forward run on the scenario's full node grid "
            f"(grid {grid_shape} has {int(np.prod(grid_shape))} nodes, the run has {n_nodes})"
        )
    facies = tuple(f.name for f in scenario.geology.facies)
    if facies != result.facies:
        raise ValueError(f"run facies {result.facies} differ from the scenario's {facies}")
    priors = np.array([f.proportion for f in scenario.geology.facies])
    priors = priors / priors.sum()
    varying = [c for c in COVARIATES if len(result.node_axes[c]) > 1]
    k, n, d = result.samples.shape[1:]
    if varying:
        shape = tuple(len(result.node_axes[c]) for c in varying)
        samples = result.samples.reshape(shape + (k, n, d))
        est = clf.NonstationaryGaussianFacies(priors=priors, reg_covariance=reg_covariance)
        est.fit(samples, {c: result.node_axes[c] for c in varying}, classes=list(facies))
    else:
        est = clf.GaussianFacies(priors=priors, reg_covariance=reg_covariance)
        est.fit({name: result.samples[0, j] for j, name in enumerate(facies)})
    return FaciesModel(
        facies=facies,
        attributes=result.attributes,
        hydrocarbon=tuple(f.hydrocarbon for f in scenario.geology.facies),
        axes=tuple(varying),
        node_axes={c: result.node_axes[c] for c in varying},
        priors=priors,
        estimator=est,
    )


# --------------------------------------------------------------------------- inputs


def read_map(path: str | Path, name: str | None = None) -> GridData:
    """A 2-D map from CSV/XYZ, ``.npy`` or ``.npz`` (by suffix)."""
    p = Path(path)
    if not p.is_file():
        raise FileNotFoundError(f"grid file {p} does not exist")
    suffix = p.suffix.lower()
    if suffix == ".npy":
        data = read_npy(p, name=name or p.stem)
    elif suffix == ".npz":
        data = read_npz(p)
    elif suffix in (".csv", ".xyz", ".txt", ".dat"):
        data = read_xyz(p, names=[name] if name else None)
    else:
        raise ValueError(
            f"{p.name}: unknown grid format {suffix!r}; use .csv/.xyz, .npy, .npz or SEG-Y"
        )
    if data.grid.kind != "map":
        raise ValueError(f"{p.name} holds a {data.grid.kind}, a 2-D map is needed here")
    return data


def is_cube(path: str | Path) -> bool:
    """True for SEG-Y files and 3-D ``.npy`` arrays."""
    p = Path(path)
    if p.suffix.lower() in SEGY_SUFFIXES:
        return True
    if p.suffix.lower() == ".npy":
        # A memory map reads only the header here.
        return np.load(p, mmap_mode="r", allow_pickle=False).ndim == 3
    return False


def map_attributes(
    model: FaciesModel, sources: Mapping[str, str | Path]
) -> tuple[Grid, dict[str, np.ndarray]]:
    """Read one map per model attribute; all on the same geometry."""
    missing = [a for a in model.attributes if a not in sources]
    if missing:
        raise ValueError(
            f"the scenario classifies on {list(model.attributes)}; no map given for {missing}"
        )
    grid: Grid | None = None
    first = ""
    values = {}
    for name in model.attributes:
        data = read_map(sources[name], name)
        arr = data.values[name] if name in data.values else next(iter(data.values.values()))
        if grid is None:
            grid, first = data.grid, Path(sources[name]).name
        else:
            check_same_geometry(grid, data.grid, (first, Path(sources[name]).name))
        values[name] = arr
    assert grid is not None
    return grid, values


def covariate_maps(
    model: FaciesModel, sources: Mapping[str, str | Path], shape: tuple[int, ...], ref: str
) -> dict[str, np.ndarray]:
    """Read the covariate maps the model needs, checking their shape against ``shape``."""
    out = {}
    for name in model.axes:
        if name not in sources:
            raise ValueError(
                f"the PDFs vary with {list(model.axes)}: give --covariate {name}=FILE"
            )
        data = read_map(sources[name], name)
        arr = data.values[name] if name in data.values else next(iter(data.values.values()))
        if arr.shape != tuple(shape):
            raise ValueError(
                f"covariate map {Path(sources[name]).name} has shape {arr.shape} but {ref} has "
                f"shape {tuple(shape)}; they must share one geometry"
            )
        out[name] = arr
    return out


# --------------------------------------------------------------------------- maps


def classify_map(
    model: FaciesModel,
    attributes: Mapping[str, np.ndarray],
    covariates: Mapping[str, np.ndarray] | None = None,
    prior_map: np.ndarray | None = None,
    *,
    max_mahalanobis: float | None = None,
) -> dict[str, Any]:
    """Classify a map; returns posterior (ny, nx, k), most_likely, QC and entropy maps."""
    first = attributes[model.attributes[0]]
    shape = first.shape
    x = np.stack([np.asarray(attributes[a], dtype=float).ravel() for a in model.attributes], -1)
    covs = None
    if covariates is not None:
        covs = {}
        for c, arr in covariates.items():
            if np.shape(arr) != shape:
                raise ValueError(
                    f"covariate {c} has shape {np.shape(arr)}, attributes have shape {shape}"
                )
            covs[c] = np.asarray(arr, dtype=float).ravel()
    priors = None
    if prior_map is not None:
        pm = np.asarray(prior_map, dtype=float)
        if pm.shape != shape + (len(model.facies),):
            raise ValueError(
                f"prior map has shape {pm.shape}, expected {shape + (len(model.facies),)} "
                "(one proportion per facies at each map node)"
            )
        priors = pm.reshape(-1, len(model.facies))
    res = model.classify(x, covs, priors, max_mahalanobis=max_mahalanobis)
    return {
        "posterior": res.posterior.reshape(shape + (len(model.facies),)),
        "most_likely": res.most_likely.reshape(shape),
        "mahalanobis": res.mahalanobis.reshape(shape),
        "entropy": res.entropy.reshape(shape),
        "unclassified": res.unclassified.reshape(shape),
        "n_clamped": int(res.n_clamped),
    }


# --------------------------------------------------------------------------- cubes


def cube_output_names(model: FaciesModel) -> list[str]:
    """Output files of a cube classification (without suffix)."""
    return [f"posterior_{slug(f)}" for f in model.facies] + list(MAP_OUTPUTS)


def classify_cube(
    model: FaciesModel,
    sources: Mapping[str, str | Path],
    covariates: Mapping[str, np.ndarray] | None,
    out_dir: str | Path,
    *,
    max_mahalanobis: float | None = None,
    trace_range: tuple[int, int] | None = None,
    chunk_traces: int | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> tuple[CubeRunResult, int]:
    """Stream a cube through the classifier; SEG-Y in gives SEG-Y out.

    Returns the run result of :func:`porecast.io.process_cube` and the number
    of samples whose covariates were clamped to the node range.
    """
    missing = [a for a in model.attributes if a not in sources]
    if missing:
        raise ValueError(
            f"the scenario classifies on {list(model.attributes)}; no cube given for {missing}"
        )
    inputs = {a: str(sources[a]) for a in model.attributes}
    with open_cube(inputs[model.attributes[0]]) as reader:
        line_shape = tuple(reader.shape[:-1])
    covs_flat = {}
    for name in model.axes:
        if covariates is None or name not in covariates:
            raise ValueError(f"the PDFs vary with {list(model.axes)}: a map of {name} is needed")
        arr = np.asarray(covariates[name], dtype=float)
        if arr.shape != line_shape:
            raise ValueError(
                f"covariate map {name} has shape {arr.shape}; the cube has {line_shape} traces "
                "per line: they must share one geometry"
            )
        covs_flat[name] = arr.ravel()
    names = cube_output_names(model)
    clamped = [0]

    def run(rows: np.ndarray, trace_index: np.ndarray) -> dict[str, np.ndarray]:
        covs = {c: v[trace_index] for c, v in covs_flat.items()}
        res = model.classify(rows, covs, max_mahalanobis=max_mahalanobis)
        clamped[0] += int(res.n_clamped)
        out = {f"posterior_{slug(f)}": res.posterior[:, j] for j, f in enumerate(model.facies)}
        out["most_likely"] = res.most_likely.astype(np.float64)
        out["mahalanobis"] = res.mahalanobis
        out["entropy"] = res.entropy
        return out

    segy_in = any(Path(p).suffix.lower() in SEGY_SUFFIXES for p in inputs.values())
    result = process_cube(
        inputs,
        run,
        names,
        out_dir,
        output_format="segy" if segy_in and trace_range is None else "npy",
        chunk_traces=chunk_traces,
        trace_range=trace_range,
        progress=progress,
        trace_context=True,
    )
    return result, clamped[0]
