"""Invented inputs for run tests: attribute and covariate maps, cubes, a well.

Attribute values are drawn from the example scenario's own forward model at
each map node's covariates (a facies pattern picks which facies' sample a node
gets), so they look like what the classifier was trained for. Everything is
seeded; nothing here describes a real place.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from porecast.io import Grid, GridData, write_npz
from porecast.io.las import WellLogs, write_well
from porecast.physics import forward
from porecast.physics.scenario import COVARIATES, default_scenario, validate_scenario

X0, Y0, DX, DY = 10_000.0, 20_000.0, 50.0, 50.0
VARYING = ("present_depth_m", "net_uplift_m", "gradient_c_per_km")


def covariate_fields(shape: tuple[int, int]) -> dict[str, np.ndarray]:
    """Smooth covariate maps inside the example scenario's node ranges."""
    ny, nx = shape
    jj, ii = np.meshgrid(np.linspace(0, 1, ny), np.linspace(0, 1, nx), indexing="ij")
    return {
        "present_depth_m": 1500.0 + 1100.0 * ii,  # deepening to the east
        "net_uplift_m": 1000.0 * (1.0 - jj),  # uplifted in the south
        "gradient_c_per_km": 30.0 + 10.0 * jj,
    }


def facies_pattern(shape: tuple[int, ...], seed: int = 5) -> np.ndarray:
    """Facies index per node: shale background, brine sand band, gas sand in a high."""
    rng = np.random.default_rng(seed)
    ny, nx = shape[:2]
    jj, ii = np.meshgrid(np.arange(ny), np.arange(nx), indexing="ij")
    codes = np.zeros((ny, nx), dtype=int)
    band = np.abs(jj - ny / 2) < ny / 4
    codes[band] = 1
    high = (ii - nx / 3) ** 2 + (jj - ny / 2) ** 2 < (min(nx, ny) / 4) ** 2
    codes[high] = 3
    flip = rng.random((ny, nx)) < 0.05
    codes[flip] = 2
    return codes


def attribute_samples(covs: dict[str, np.ndarray], codes: np.ndarray, *, n_samples: int = 1,
                      seed: int = 11) -> dict[str, np.ndarray]:
    """Attribute values per node (and per sample along a trace) from the forward model."""
    sc = validate_scenario(default_scenario())
    shape = codes.shape
    nodes = np.stack([covs[c].ravel() if c in covs else np.zeros(codes.size)
                      for c in COVARIATES], axis=-1)
    real = max(4, n_samples)
    res = forward.simulate(sc, realisations=real, node_values=nodes)
    rng = np.random.default_rng(seed)
    n = codes.size
    out = {}
    for a, name in enumerate(res.attributes):
        if n_samples == 1:
            pick = rng.integers(0, real, n)
            vals = res.samples[np.arange(n), codes.ravel(), pick, a]
            out[name] = vals.reshape(shape)
        else:
            # along each trace: shale above, the node's facies in a middle layer, shale below
            layer = np.zeros((n, n_samples), dtype=int)
            top, base = n_samples // 3, 2 * n_samples // 3
            layer[:, top:base] = codes.ravel()[:, None]
            pick = rng.integers(0, real, (n, n_samples))
            idx = np.arange(n)[:, None]
            vals = res.samples[idx, layer, pick, a]
            out[name] = vals.reshape(shape + (n_samples,))
    return out


def map_grid(shape: tuple[int, int], attributes: tuple[str, ...]) -> Grid:
    return Grid(kind="map", shape=shape, x0=X0, y0=Y0, dx=DX, dy=DY, attributes=attributes)


def write_maps(folder: Path, shape: tuple[int, int] = (16, 20)) -> dict[str, Path]:
    """``.npz`` maps: intercept, gradient and the three varying covariates."""
    folder.mkdir(parents=True, exist_ok=True)
    covs = covariate_fields(shape)
    attrs = attribute_samples(covs, facies_pattern(shape))
    paths = {}
    for name, arr in {**attrs, **covs}.items():
        paths[name] = write_npz(folder / f"{name}.npz",
                                GridData(map_grid(shape, (name,)), {name: arr}), fsync=False)
    return paths


def write_cubes(folder: Path, shape: tuple[int, int, int] = (6, 8, 12), *,
                segy: bool = True) -> dict[str, Path]:
    """Attribute cubes (SEG-Y by segyio, or ``.npy``) and covariate maps of their traces."""
    import segyio

    folder.mkdir(parents=True, exist_ok=True)
    n_il, n_xl, ns = shape
    covs = covariate_fields((n_il, n_xl))
    attrs = attribute_samples(covs, facies_pattern((n_il, n_xl)), n_samples=ns)
    paths: dict[str, Path] = {}
    for name, arr in attrs.items():
        if segy:
            path = folder / f"{name}.sgy"
            segyio.tools.from_array3D(str(path), arr.astype(np.float32))
        else:
            path = folder / f"{name}.npy"
            np.save(path, arr)
        paths[name] = path
    for name, arr in covs.items():
        paths[name] = write_npz(folder / f"{name}.npz",
                                GridData(Grid(kind="map", shape=(n_il, n_xl),
                                              attributes=(name,)), {name: arr}), fsync=False)
    return paths


def write_las(path: Path, n: int = 400, seed: int = 3) -> Path:
    """An invented well with Vp, Vs, density, GR and Sw (a gas sand between shales)."""
    rng = np.random.default_rng(seed)
    depth = 1800.0 + 0.5 * np.arange(n)
    sand = (depth > 1860.0) & (depth < 1900.0)
    vp = np.where(sand, 3300.0, 3000.0) + rng.normal(0.0, 30.0, n)
    vs = np.where(sand, 2000.0, 1450.0) + rng.normal(0.0, 20.0, n)
    rho = np.where(sand, 2.15, 2.40) + rng.normal(0.0, 0.01, n)
    gr = np.where(sand, 35.0, 110.0) + rng.normal(0.0, 5.0, n)
    sw = np.where(sand, 0.3, 1.0)
    logs = WellLogs(name="Invented-7", depth=depth,
                    curves={"vp": vp, "vs": vs, "density": rho, "gr": gr, "sw": sw},
                    location=(X0 + 300.0, Y0 + 300.0))
    return write_well(path, logs, fsync=False)


def square(x0: float, y0: float, size: float) -> list[list[float]]:
    """A square outline (m)."""
    return [[x0, y0], [x0 + size, y0], [x0 + size, y0 + size], [x0, y0 + size]]


def high_outline(shape: tuple[int, int] = (16, 20)) -> list[list[float]]:
    """An outline around the gas-sand high of :func:`facies_pattern`."""
    ny, nx = shape
    cx, cy = X0 + DX * nx / 3, Y0 + DY * ny / 2
    r = DX * min(nx, ny) / 4
    return square(cx - r, cy - r, 2 * r)


def document() -> dict[str, Any]:
    return default_scenario()
