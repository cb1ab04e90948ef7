"""Test data made on the fly (invented wells and grids) and small helpers."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from porecast.io.las import WellLogs, write_well

PASSWORD = "correct horse battery staple"
ROLES = ("owner", "basin_modeller", "geologist", "geophysicist", "reviewer", "viewer")


def las_bytes(tmp_path: Path, n: int = 500, name: str = "Invented-1") -> bytes:
    """A LAS 2.0 file of an invented well: Vp, Vs, density, GR over n samples."""
    rng = np.random.default_rng(7)
    depth = 1500.0 + 0.5 * np.arange(n)
    vp = 2800.0 + 0.4 * (depth - 1500.0) + rng.normal(0.0, 40.0, n)
    logs = WellLogs(
        name=name,
        depth=depth,
        curves={
            "vp": vp,
            "vs": vp / 1.9,
            "density": np.full(n, 2.35),
            "gr": 60.0 + 30.0 * np.sin(depth / 20.0),
        },
        location=(431250.0, 6712900.0),
    )
    path = write_well(tmp_path / f"{name}.las", logs, fsync=False)
    return path.read_bytes()


def csv_map_bytes(nx: int = 6, ny: int = 4) -> bytes:
    """A CSV map on a 25 m grid with a header line."""
    lines = ["x,y,depth_m"]
    for j in range(ny):
        for i in range(nx):
            lines.append(f"{1000 + 25 * i},{2000 + 25 * j},{2000 + 3.5 * i + 2.0 * j}")
    return ("\n".join(lines) + "\n").encode()


def segy_bytes(tmp_path: Path, n_il: int = 3, n_xl: int = 4, n_s: int = 20) -> bytes:
    """A small post-stack SEG-Y cube written by segyio."""
    import segyio

    data = np.arange(n_il * n_xl * n_s, dtype=np.float32).reshape(n_il, n_xl, n_s) / 10.0
    path = tmp_path / "cube.sgy"
    segyio.tools.from_array3D(str(path), data)
    return path.read_bytes()


def files_under(folder: Path) -> list[Path]:
    """Every regular file below a folder."""
    return sorted(p for p in folder.rglob("*") if p.is_file()) if folder.exists() else []
