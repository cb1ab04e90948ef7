"""The project activity feed: who changed what, who commented, which runs finished."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from porecast.db.models import Activity, User

from .authz import require_project


def record(
    db: Session,
    project_id: int,
    actor: User | None,
    verb: str,
    object_type: str,
    object_id: int | None,
    summary: str,
    *,
    now: datetime,
    data: dict[str, Any] | None = None,
) -> Activity:
    """Append one entry; it commits or rolls back with the change it describes."""
    entry = Activity(
        project_id=project_id,
        actor_id=actor.id if actor else None,
        verb=verb,
        object_type=object_type,
        object_id=object_id,
        summary=summary[:500],
        data=data or {},
        created_at=now,
    )
    db.add(entry)
    return entry


def feed(
    db: Session, user: User, project_id: int, *, limit: int = 50, before_id: int | None = None
) -> list[Activity]:
    """Newest entries first; page with ``before_id`` (the smallest id already seen)."""
    require_project(db, user, project_id, "read_summary")
    query = select(Activity).where(Activity.project_id == project_id)
    if before_id is not None:
        query = query.where(Activity.id < before_id)
    return list(db.scalars(query.order_by(Activity.id.desc()).limit(limit)))
