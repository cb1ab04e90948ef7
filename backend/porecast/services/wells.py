"""Wells: LAS upload, curves stored as ``.npz`` files, curve data for plotting."""

from __future__ import annotations

import hashlib
from datetime import datetime
from pathlib import Path
from typing import Any

import numpy as np
from sqlalchemy import select
from sqlalchemy.orm import Session

from porecast.db.models import User, Well

from . import activity, storage
from .authz import load_in_project, require_project
from .errors import InvalidInput, NotFound

WELL_SUFFIXES = (".las",)
MAX_PLOT_POINTS = 20000


def sha256_of(path: Path) -> str:
    """Hex SHA-256 of a file."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _finite_stats(values: np.ndarray) -> dict[str, Any]:
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return {"count": 0, "min": None, "max": None}
    return {"count": int(finite.size), "min": float(finite.min()), "max": float(finite.max())}


def _read_las(path: Path) -> Any:
    from porecast.io.las import read_well  # io layer, imported where used

    try:
        # Any known curve is worth storing; calibration checks its own needs later.
        return read_well(path, required=())
    except (ValueError, UnicodeDecodeError, OSError) as exc:
        message = str(exc) or type(exc).__name__
        if path.name not in message:
            message = f"{path.name}: {message}"
        raise InvalidInput(message, [{"loc": "file", "msg": message}]) from None


def _location(logs: Any) -> tuple[float | None, float | None]:
    loc = getattr(logs, "location", None)
    if loc is None:
        return None, None
    x, y = (loc.x, loc.y) if hasattr(loc, "x") else (loc[0], loc[1])
    if x is None or y is None or not (np.isfinite(x) and np.isfinite(y)):
        return None, None
    return float(x), float(y)


def check_upload(db: Session, user: User, project_id: int, filename: str) -> None:
    """Refuse an upload before its body is read: wrong role or not a LAS file name."""
    require_project(db, user, project_id, "contribute")
    if not filename.lower().endswith(WELL_SUFFIXES):
        msg = f"{filename}: a well upload must be a LAS file (.las)"
        raise InvalidInput(msg, [{"loc": "filename", "msg": msg}])


def import_well(
    db: Session,
    user: User,
    project_id: int,
    upload: Path,
    *,
    name: str | None,
    files_dir: Path,
    now: datetime,
) -> Well:
    """Parse an uploaded LAS file and store its curves; refused files leave nothing behind."""
    require_project(db, user, project_id, "contribute")
    if upload.suffix.lower() not in WELL_SUFFIXES:
        msg = f"{upload.name}: a well upload must be a LAS file (.las)"
        raise InvalidInput(msg, [{"loc": "filename", "msg": msg}])
    logs = _read_las(upload)
    depth = np.asarray(logs.depth, dtype=np.float64)
    curves = {str(k): np.asarray(v, dtype=np.float64) for k, v in logs.curves.items()}
    units = dict(getattr(logs, "units", {}) or {})
    if not curves:
        msg = f"{upload.name}: no log curve that Porecast knows (e.g. DT, RHOB, GR)"
        raise InvalidInput(msg, [{"loc": "file", "msg": msg}])
    if depth.size == 0 or not np.all(np.isfinite(depth)):
        msg = f"{upload.name}: the depth index is empty or not finite"
        raise InvalidInput(msg, [{"loc": "file", "msg": msg}])
    file_name = storage.new_file_name(".npz")
    final = storage.stored_path(files_dir, "wells", file_name)
    final.parent.mkdir(parents=True, exist_ok=True)
    storage.remove_on_rollback(db, final)
    from porecast.io.atomic import atomic_path

    with atomic_path(final) as tmp:
        with open(tmp, "wb") as fh:
            arrays = {"depth": depth, **{f"curve_{k}": v for k, v in curves.items()}}
            np.savez(fh, **arrays)  # type: ignore[arg-type]
    x, y = _location(logs)
    well = Well(
        project_id=project_id,
        name=(name or getattr(logs, "name", None) or upload.stem)[:120],
        x=x,
        y=y,
        depth_min=float(depth.min()),
        depth_max=float(depth.max()),
        n_samples=int(depth.size),
        curves=[
            {"name": k, "unit": str(units.get(k, "")), **_finite_stats(v)}
            for k, v in curves.items()
        ],
        file_name=file_name,
        original_filename=upload.name,
        size_bytes=upload.stat().st_size,
        sha256=sha256_of(upload),
        uploaded_by_id=user.id,
        created_at=now,
    )
    db.add(well)
    db.flush()
    activity.record(db, project_id, user, "well.uploaded", "well", well.id,
                    f"{user.username} uploaded well {well.name!r} ({len(curves)} curves)", now=now)
    return well


def list_wells(db: Session, user: User, project_id: int) -> list[Well]:
    """Wells of a project by name."""
    require_project(db, user, project_id, "read_detail")
    return list(db.scalars(select(Well).where(Well.project_id == project_id).order_by(Well.name)))


def get_well(db: Session, user: User, well_id: int) -> Well:
    """One well's metadata."""
    well, _ = load_in_project(db, Well, well_id, user, "read_detail", "well")
    return well


def delete_well(db: Session, user: User, well_id: int, *, files_dir: Path, now: datetime) -> None:
    """Delete a well; its file goes once the deletion commits."""
    well, _ = load_in_project(db, Well, well_id, user, "contribute", "well")
    storage.remove_after_commit(db, storage.stored_path(files_dir, "wells", well.file_name))
    activity.record(db, well.project_id, user, "well.deleted", "well", well.id,
                    f"{user.username} deleted well {well.name!r}", now=now)
    db.delete(well)


def decimate_min_max(depth: np.ndarray, values: np.ndarray, max_points: int) -> tuple[
    np.ndarray, np.ndarray
]:
    """Thin a log to about ``max_points`` samples keeping each bucket's extremes.

    Plain striding would drop thin beds; here every bucket of consecutive samples
    contributes its minimum and maximum (in depth order), so spikes survive.
    """
    n = depth.size
    if n <= max_points:
        return depth, values
    buckets = max(1, max_points // 2)
    edges = np.linspace(0, n, buckets + 1).astype(int)
    keep: list[int] = []
    for lo, hi in zip(edges[:-1], edges[1:], strict=True):
        seg = values[lo:hi]
        finite = np.isfinite(seg)
        if not finite.any():
            keep.append(lo)
            continue
        idx = np.flatnonzero(finite)
        k_min = lo + idx[np.argmin(seg[idx])]
        k_max = lo + idx[np.argmax(seg[idx])]
        keep.extend(sorted({int(k_min), int(k_max)}))
    sel = np.asarray(keep)
    return depth[sel], values[sel]


def curve_data(
    db: Session,
    user: User,
    well_id: int,
    curve: str,
    *,
    files_dir: Path,
    max_points: int = 2000,
    top: float | None = None,
    base: float | None = None,
) -> dict[str, Any]:
    """Depth and values of one curve (optionally between ``top`` and ``base``, m), thinned."""
    well = get_well(db, user, well_id)
    meta = next((c for c in well.curves if c["name"] == curve), None)
    if meta is None:
        raise NotFound(f"well {well.name!r} has no curve {curve!r}")
    if top is not None and base is not None and top > base:
        raise InvalidInput("top must be above (smaller than) base",
                           [{"loc": "top", "msg": "top <= base"}])
    with np.load(storage.stored_path(files_dir, "wells", well.file_name)) as data:
        depth = data["depth"]
        values = data[f"curve_{curve}"]
    mask = np.ones(depth.shape, dtype=bool)
    if top is not None:
        mask &= depth >= top
    if base is not None:
        mask &= depth <= base
    d, v = decimate_min_max(depth[mask], values[mask], min(max_points, MAX_PLOT_POINTS))
    return {
        "well_id": well.id,
        "curve": curve,
        "unit": meta.get("unit", ""),
        "n_total": int(mask.sum()),
        "depth": [float(x) for x in d],
        "values": [float(x) if np.isfinite(x) else None for x in v],
    }
