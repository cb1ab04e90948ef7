"""Fixtures of the io tests: small SEG-Y cubes written with segyio itself."""

from __future__ import annotations

import math
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest
import segyio


def write_test_segy(
    path: Path,
    data: np.ndarray,
    *,
    ilines: list[int],
    xlines: list[int],
    sorting: str = "inline",
    fmt: int = 5,
    endian: str = "big",
    dt_ms: float = 4.0,
    t0_ms: float = 0.0,
    origin: tuple[float, float] = (500000.0, 6000000.0),
    spacing: tuple[float, float] = (25.0, 12.5),
    rotation_deg: float = 30.0,
    scalar: int = -100,
) -> None:
    """Write ``data`` (shape (n_lines, n_per_line, n_samples) in file order) with segyio.

    CDP coordinates: crossline k, inline j of an inline-sorted cube lie at
    origin + k * spacing[0] * u + j * spacing[1] * v, u at ``rotation_deg``
    counter-clockwise from east and v 90 degrees further; stored in
    integers with coordinate scalar ``scalar`` (SEG-Y rev 1 bytes 71-72: -100
    divides the stored integers by 100, +10 multiplies them by 10).
    """
    n0, n1, ns = data.shape
    spec = segyio.spec()
    spec.ilines = ilines
    spec.xlines = xlines
    spec.samples = t0_ms + dt_ms * np.arange(ns)
    spec.format = fmt
    spec.endian = endian
    spec.sorting = (
        segyio.TraceSortingFormat.INLINE_SORTING
        if sorting == "inline"
        else segyio.TraceSortingFormat.CROSSLINE_SORTING
    )
    factor = float(scalar) if scalar > 0 else 1.0 / abs(scalar) if scalar < 0 else 1.0
    r = math.radians(rotation_deg)
    u = np.array([math.cos(r), math.sin(r)])
    v = np.array([-math.sin(r), math.cos(r)])
    with segyio.create(str(path), spec) as f:
        f.text[0] = segyio.tools.create_text_header({1: "PORECAST TEST CUBE", 2: "INVENTED DATA"})
        f.bin.update(tsort=spec.sorting, mfeet=1)
        t = 0
        outer, inner = (ilines, xlines) if sorting == "inline" else (xlines, ilines)
        for a, la in enumerate(outer):
            for b, lb in enumerate(inner):
                il, xl = (la, lb) if sorting == "inline" else (lb, la)
                ii, kk = ilines.index(il), xlines.index(xl)
                xy = np.asarray(origin) + kk * spacing[0] * u + ii * spacing[1] * v
                f.header[t] = {
                    segyio.su.iline: il,
                    segyio.su.xline: xl,
                    segyio.su.cdp: t + 1,
                    segyio.su.cdpx: int(round(xy[0] / factor)),
                    segyio.su.cdpy: int(round(xy[1] / factor)),
                    segyio.su.scalco: scalar,
                    segyio.su.ns: ns,
                    segyio.su.dt: int(dt_ms * 1000),
                    segyio.su.delrt: int(t0_ms),
                    segyio.su.offset: 0,
                }
                f.trace[t] = data[a, b].astype(np.float32)
                t += 1


@pytest.fixture
def make_segy(tmp_path: Path) -> Callable[..., tuple[Path, np.ndarray]]:
    """Factory: ``make_segy(name, shape, seed=..., **kwargs) -> (path, data)``."""

    def factory(
        name: str = "cube.sgy",
        shape: tuple[int, int, int] = (4, 6, 20),
        *,
        seed: int = 7,
        data: np.ndarray | None = None,
        **kwargs,
    ) -> tuple[Path, np.ndarray]:
        if data is None:
            data = np.random.default_rng(seed).normal(size=shape).astype(np.float32)
        n0, n1, _ = data.shape
        sorting = kwargs.get("sorting", "inline")
        ilines = kwargs.pop("ilines", None) or list(
            range(100, 100 + 2 * (n0 if sorting == "inline" else n1), 2)
        )
        xlines = kwargs.pop("xlines", None) or list(
            range(10, 10 + (n1 if sorting == "inline" else n0))
        )
        path = tmp_path / name
        write_test_segy(path, data, ilines=ilines, xlines=xlines, **kwargs)
        return path, data

    return factory
