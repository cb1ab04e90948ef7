"""Maps and cubes: CSV/XYZ, .npy/.npz and SEG-Y uploads, geometry in the database.

CSV/XYZ maps are parsed into a regular grid and stored as ``.npz`` (values plus
geometry record); ``.npy``, ``.npz`` and SEG-Y files are checked and then moved
into the file store unchanged (a rename on the same file system, so large cubes
are not copied). Cube statistics are computed trace range by trace range with
bounded memory.
"""

from __future__ import annotations

import os
from datetime import datetime
from pathlib import Path
from typing import Any

import numpy as np
from sqlalchemy import select
from sqlalchemy.orm import Session

from porecast.db.models import Grid, User

from . import activity, storage
from .authz import load_in_project, require_project
from .errors import InvalidInput, NotFound
from .wells import sha256_of

#: Upload file suffix -> source format.
GRID_SUFFIXES = {
    ".csv": "xyz", ".xyz": "xyz", ".txt": "xyz", ".dat": "xyz",
    ".npy": "npy", ".npz": "npz", ".sgy": "segy", ".segy": "segy",
}
_STORED_SUFFIX = {"xyz": ".npz", "npy": ".npy", "npz": ".npz", "segy": ".sgy"}
_STATS_CHUNK_TRACES = 4096


def _invalid(message: str, loc: str = "file") -> InvalidInput:
    return InvalidInput(message, [{"loc": loc, "msg": message}])


def source_format(filename: str) -> str:
    """The source format named by a file's suffix."""
    suffix = Path(filename).suffix.lower()
    if suffix not in GRID_SUFFIXES:
        allowed = ", ".join(sorted(GRID_SUFFIXES))
        raise _invalid(f"{filename}: unknown grid file type {suffix!r}; allowed: {allowed}",
                       "filename")
    return GRID_SUFFIXES[suffix]


def check_upload(db: Session, user: User, project_id: int, filename: str) -> None:
    """Refuse an upload before its body is read: wrong role or unknown file type."""
    require_project(db, user, project_id, "contribute")
    source_format(filename)


def _array_stats(values: dict[str, np.ndarray]) -> dict[str, Any]:
    out = {}
    for name, arr in values.items():
        finite = np.isfinite(arr)
        n = int(finite.sum())
        out[name] = {
            "count": n,
            "missing": int(arr.size - n),
            "min": float(arr[finite].min()) if n else None,
            "max": float(arr[finite].max()) if n else None,
            "mean": float(arr[finite].mean()) if n else None,
        }
    return out


def _cube_stats(path: Path, name: str, grid: Any = None) -> dict[str, Any]:
    from porecast.io.cubes import open_cube

    count = missing = 0
    lo, hi, total = np.inf, -np.inf, 0.0
    with open_cube(path, name=name, grid=grid) as reader:
        for start in range(0, reader.n_traces, _STATS_CHUNK_TRACES):
            block = reader.read(start, min(start + _STATS_CHUNK_TRACES, reader.n_traces))
            finite = block[np.isfinite(block)]
            count += finite.size
            missing += block.size - finite.size
            if finite.size:
                lo, hi = min(lo, float(finite.min())), max(hi, float(finite.max()))
                total += float(finite.sum())
    return {name: {"count": int(count), "missing": int(missing),
                   "min": lo if count else None, "max": hi if count else None,
                   "mean": total / count if count else None}}


def _parse(upload: Path, fmt: str) -> tuple[str, dict[str, Any], dict[str, Any], Any]:
    """``(kind, geometry, stats, data_to_write_or_None)`` of an uploaded grid file."""
    from porecast.io import grids as io_grids

    if fmt == "xyz":
        data = io_grids.read_xyz(upload)
        return "map", data.grid.to_dict(), _array_stats(data.values), data
    if fmt == "npz":
        data = io_grids.read_npz(upload)
        return data.grid.kind, data.grid.to_dict(), _array_stats(data.values), None
    if fmt == "npy":
        data = io_grids.read_npy(upload, mmap=True)
        grid = data.grid
        if grid.kind == "map":
            stats = _array_stats({k: np.asarray(v) for k, v in data.values.items()})
        else:
            stats = _cube_stats(upload, grid.attributes[0])
        return grid.kind, grid.to_dict(), stats, None
    from porecast.io.segy import segy_geometry

    geom = segy_geometry(upload)
    if geom.grid is not None:
        geometry = geom.grid.to_dict()
        kind = geom.grid.kind
    else:
        geometry = {"kind": "cube", "shape": [int(n) for n in geom.shape],
                    "structured": False}
        kind = "cube"
    geometry["segy"] = {
        "n_traces": int(geom.layout.n_traces), "n_samples": int(geom.layout.n_samples),
        "format_code": int(geom.layout.format_code), "structured": bool(geom.structured),
        "note": geom.note,
    }
    return kind, geometry, _cube_stats(upload, "amplitude"), None


def import_grid(
    db: Session,
    user: User,
    project_id: int,
    upload: Path,
    *,
    name: str | None,
    files_dir: Path,
    now: datetime,
) -> Grid:
    """Check an uploaded grid file and store it; refused files leave nothing behind."""
    require_project(db, user, project_id, "contribute")
    fmt = source_format(upload.name)
    size, digest = upload.stat().st_size, sha256_of(upload)
    try:
        kind, geometry, stats, to_write = _parse(upload, fmt)
    except (ValueError, UnicodeDecodeError, OSError, EOFError) as exc:
        message = str(exc) or type(exc).__name__
        if upload.name not in message:
            message = f"{upload.name}: {message}"
        raise _invalid(message) from None
    file_name = storage.new_file_name(_STORED_SUFFIX[fmt])
    final = storage.stored_path(files_dir, "grids", file_name)
    final.parent.mkdir(parents=True, exist_ok=True)
    storage.remove_on_rollback(db, final)
    if to_write is not None:
        from porecast.io.grids import write_npz

        write_npz(final, to_write)
    else:
        os.replace(upload, final)
    grid = Grid(
        project_id=project_id, name=(name or Path(upload.name).stem)[:120], kind=kind,
        source_format=fmt, geometry=geometry, stats=stats, file_name=file_name,
        original_filename=upload.name, size_bytes=size, sha256=digest,
        uploaded_by_id=user.id, created_at=now,
    )
    db.add(grid)
    db.flush()
    shape = "x".join(str(n) for n in geometry.get("shape", []))
    activity.record(db, project_id, user, "grid.uploaded", "grid", grid.id,
                    f"{user.username} uploaded {kind} {grid.name!r} ({shape})", now=now)
    return grid


def list_grids(db: Session, user: User, project_id: int) -> list[Grid]:
    """Maps and cubes of a project."""
    require_project(db, user, project_id, "read_detail")
    return list(db.scalars(select(Grid).where(Grid.project_id == project_id).order_by(Grid.name)))


def get_grid(db: Session, user: User, grid_id: int) -> Grid:
    """One grid's metadata."""
    grid, _ = load_in_project(db, Grid, grid_id, user, "read_detail", "grid")
    return grid


def delete_grid(db: Session, user: User, grid_id: int, *, files_dir: Path, now: datetime) -> None:
    """Delete a grid; its file goes once the deletion commits."""
    grid, _ = load_in_project(db, Grid, grid_id, user, "contribute", "grid")
    storage.remove_after_commit(db, storage.stored_path(files_dir, "grids", grid.file_name))
    activity.record(db, grid.project_id, user, "grid.deleted", "grid", grid.id,
                    f"{user.username} deleted {grid.kind} {grid.name!r}", now=now)
    db.delete(grid)


def _axis(start: float, step: float, n: int, stride: int) -> list[float]:
    return [float(start + i * step) for i in range(0, n, stride)]


def _nullable(block: np.ndarray) -> list[list[float | None]]:
    return [[float(v) if np.isfinite(v) else None for v in row] for row in block]


def grid_view(
    db: Session,
    user: User,
    grid_id: int,
    *,
    files_dir: Path,
    attribute: str | None = None,
    line: int | None = None,
    max_points: int = 300,
) -> dict[str, Any]:
    """A thinned 2-D view for plotting: a map, or one line (axis 0) of a cube.

    Axes are the grid's own (unrotated) node axes in metres from ``x0, y0``;
    for a cube section ``y`` is the sample axis (ms or m).
    """
    from porecast.io import grids as io_grids

    grid = get_grid(db, user, grid_id)
    path = storage.stored_path(files_dir, "grids", grid.file_name)
    geometry = dict(grid.geometry)
    names = list(grid.stats)
    attr = attribute or (names[0] if names else "value")
    if attr not in grid.stats:
        raise NotFound(f"grid {grid.name!r} has no attribute {attr!r}")
    if grid.kind == "map":
        if grid.source_format == "npy":
            values = io_grids.read_npy(path, mmap=True).values
            arr = np.asarray(next(iter(values.values())))
        else:
            arr = io_grids.read_npz(path).values[attr]
        ny, nx = arr.shape
        sy, sx = max(1, -(-ny // max_points)), max(1, -(-nx // max_points))
        return {
            "grid_id": grid.id,
            "x": _axis(geometry.get("x0", 0.0), geometry.get("dx", 1.0), nx, sx),
            "y": _axis(geometry.get("y0", 0.0), geometry.get("dy", 1.0), ny, sy),
            "z": _nullable(np.asarray(arr[::sy, ::sx], dtype=np.float64)),
            "slice": {"kind": "map", "attribute": attr, "stride": [sy, sx],
                      "rotation_deg": geometry.get("rotation_deg", 0.0)},
        }
    from porecast.io.cubes import open_cube

    shape = [int(n) for n in geometry["shape"]]
    if grid.source_format == "npz":
        arr = io_grids.read_npz(path).values[attr]
        n_lines = arr.shape[0]
        index = n_lines // 2 if line is None else line
        if not 0 <= index < n_lines:
            raise InvalidInput(f"line must be between 0 and {n_lines - 1}",
                               [{"loc": "line", "msg": f"0 to {n_lines - 1}"}])
        section = np.asarray(arr[index], dtype=np.float64)
    else:
        with open_cube(path, name=attr) as reader:
            per_line = int(np.prod(reader.shape[1:-1])) if len(reader.shape) > 2 else 1
            n_lines = reader.n_traces // per_line
            index = n_lines // 2 if line is None else line
            if not 0 <= index < n_lines:
                raise InvalidInput(f"line must be between 0 and {n_lines - 1}",
                                   [{"loc": "line", "msg": f"0 to {n_lines - 1}"}])
            section = reader.read(index * per_line, (index + 1) * per_line)
    n_traces, n_samples = section.shape
    st, ss = max(1, -(-n_traces // max_points)), max(1, -(-n_samples // max_points))
    axis = geometry.get("sample_axis") or {"start": 0.0, "step": 1.0}
    return {
        "grid_id": grid.id,
        "x": _axis(geometry.get("x0", 0.0), geometry.get("dx", 1.0), n_traces, st),
        "y": _axis(axis.get("start", 0.0), axis.get("step", 1.0), n_samples, ss),
        "z": _nullable(section[::st, ::ss].T),
        "slice": {"kind": "line", "line": index, "n_lines": n_lines, "shape": shape,
                  "attribute": attr, "stride": [st, ss]},
    }
