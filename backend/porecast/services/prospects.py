"""Prospect outlines: polygons of ``[x, y]`` map coordinates in metres."""

from __future__ import annotations

import math
from datetime import datetime
from typing import Any

import numpy as np
from sqlalchemy import select
from sqlalchemy.orm import Session

from porecast.db.models import Prospect, User
from porecast.physics.risk import polygon_vertices, shoelace_area

from . import activity
from .authz import load_in_project, require_project
from .errors import InvalidInput

MAX_VERTICES = 5000


def _bad(msg: str) -> InvalidInput:
    return InvalidInput(f"outline: {msg}", [{"loc": "outline", "msg": msg}])


def validate_outline(outline: Any) -> list[list[float]]:
    """Check an outline and return it without a repeated closing vertex.

    ``shoelace_area`` is re-exported from :mod:`porecast.physics.risk`.

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
    # One place for polygon rules: the risk module refuses repeated vertices and
    # edges that cross or touch (which also covers zero-area outlines).
    try:
        polygon_vertices(pts)
    except ValueError as exc:
        raise _bad(f"the outline crosses or touches itself ({exc})") from None
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
