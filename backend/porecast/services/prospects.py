"""Prospect outlines: polygons of ``[x, y]`` map coordinates in metres."""

from __future__ import annotations

import math
from datetime import datetime
from typing import Any

import numpy as np
from sqlalchemy import select
from sqlalchemy.orm import Session

from porecast.db.models import Prospect, User

from . import activity
from .authz import load_in_project, require_project
from .errors import InvalidInput

MAX_VERTICES = 5000


def _bad(msg: str) -> InvalidInput:
    return InvalidInput(f"outline: {msg}", [{"loc": "outline", "msg": msg}])


def shoelace_area(xy: np.ndarray) -> float:
    """Area of a simple polygon (m2) by the shoelace (surveyor's) formula."""
    x, y = xy[:, 0], xy[:, 1]
    return 0.5 * abs(float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))


def _self_intersects(xy: np.ndarray) -> bool:
    """Whether any two non-adjacent edges of the closed polygon touch or cross."""
    a = xy
    b = np.roll(xy, -1, axis=0)
    n = len(xy)

    def orient(p: np.ndarray, q: np.ndarray, r: np.ndarray) -> np.ndarray:
        return np.sign(
            (q[..., 0] - p[..., 0]) * (r[..., 1] - p[..., 1])
            - (q[..., 1] - p[..., 1]) * (r[..., 0] - p[..., 0])
        )

    i, j = np.triu_indices(n, k=2)
    keep = ~((i == 0) & (j == n - 1))  # first and last edges share a vertex
    i, j = i[keep], j[keep]
    if i.size == 0:
        return False
    p1, q1, p2, q2 = a[i], b[i], a[j], b[j]
    o1, o2 = orient(p1, q1, p2), orient(p1, q1, q2)
    o3, o4 = orient(p2, q2, p1), orient(p2, q2, q1)
    crossing = (o1 * o2 < 0) & (o3 * o4 < 0)

    def on_segment(p: np.ndarray, q: np.ndarray, r: np.ndarray, o: np.ndarray) -> np.ndarray:
        lo, hi = np.minimum(p, q), np.maximum(p, q)
        inside = (lo[:, 0] <= r[:, 0]) & (r[:, 0] <= hi[:, 0]) & (lo[:, 1] <= r[:, 1])
        return (o == 0) & inside & (r[:, 1] <= hi[:, 1])

    touching = (
        on_segment(p1, q1, p2, o1) | on_segment(p1, q1, q2, o2)
        | on_segment(p2, q2, p1, o3) | on_segment(p2, q2, q1, o4)
    )
    return bool(np.any(crossing | touching))


def validate_outline(outline: Any) -> list[list[float]]:
    """Check an outline and return it without a repeated closing vertex.

    Needs at least 3 distinct vertices, finite coordinates, a non-zero area and
    no self-intersection.
    """
    if not isinstance(outline, list):
        raise _bad("a list of [x, y] pairs")
    pts: list[list[float]] = []
    for k, p in enumerate(outline):
        if (
            not isinstance(p, list | tuple)
            or len(p) != 2
            or not all(isinstance(v, int | float) and not isinstance(v, bool) for v in p)
        ):
            raise _bad(f"vertex {k} is not an [x, y] pair of numbers")
        if not all(math.isfinite(v) for v in p):
            raise _bad(f"vertex {k} has a coordinate that is not finite")
        pts.append([float(p[0]), float(p[1])])
    if len(pts) > 1 and pts[0] == pts[-1]:
        pts = pts[:-1]
    if len(pts) < 3:
        raise _bad("a polygon needs at least 3 distinct vertices")
    if len(pts) > MAX_VERTICES:
        raise _bad(f"at most {MAX_VERTICES} vertices")
    if any(pts[k] == pts[k + 1] for k in range(len(pts) - 1)):
        raise _bad("consecutive vertices must differ")
    xy = np.asarray(pts)
    if shoelace_area(xy) <= 0:
        raise _bad("the polygon has zero area")
    if _self_intersects(xy):
        raise _bad("the outline crosses or touches itself")
    return pts


def list_prospects(db: Session, user: User, project_id: int) -> list[Prospect]:
    """Prospects of a project by name."""
    require_project(db, user, project_id, "read_summary")
    return list(
        db.scalars(
            select(Prospect).where(Prospect.project_id == project_id).order_by(Prospect.name)
        )
    )


def create_prospect(
    db: Session, user: User, project_id: int, *, name: str, outline: Any, now: datetime
) -> Prospect:
    """A new prospect outline."""
    require_project(db, user, project_id, "contribute")
    pts = validate_outline(outline)
    prospect = Prospect(
        project_id=project_id, name=name, outline=pts, area_m2=shoelace_area(np.asarray(pts)),
        created_by_id=user.id, created_at=now, updated_at=now,
    )
    db.add(prospect)
    db.flush()
    activity.record(db, project_id, user, "prospect.created", "prospect", prospect.id,
                    f"{user.username} drew prospect {name!r}", now=now)
    return prospect


def get_prospect(db: Session, user: User, prospect_id: int) -> Prospect:
    """One prospect."""
    prospect, _ = load_in_project(db, Prospect, prospect_id, user, "read_summary", "prospect")
    return prospect


def update_prospect(
    db: Session, user: User, prospect_id: int, *, name: str | None, outline: Any | None,
    now: datetime,
) -> Prospect:
    """Rename or redraw a prospect."""
    prospect, _ = load_in_project(db, Prospect, prospect_id, user, "contribute", "prospect")
    if outline is not None:
        pts = validate_outline(outline)
        prospect.outline = pts
        prospect.area_m2 = shoelace_area(np.asarray(pts))
    if name is not None:
        prospect.name = name
    prospect.updated_at = now
    activity.record(db, prospect.project_id, user, "prospect.updated", "prospect", prospect.id,
                    f"{user.username} changed prospect {prospect.name!r}", now=now)
    return prospect


def delete_prospect(db: Session, user: User, prospect_id: int, *, now: datetime) -> None:
    """Delete a prospect."""
    prospect, _ = load_in_project(db, Prospect, prospect_id, user, "contribute", "prospect")
    activity.record(db, prospect.project_id, user, "prospect.deleted", "prospect", prospect.id,
                    f"{user.username} deleted prospect {prospect.name!r}", now=now)
    db.delete(prospect)
