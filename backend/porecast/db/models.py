"""ORM models (SQLAlchemy 2 typed declarative).

These classes are the storage shape only; the API's pydantic schemas are
separate classes in ``porecast.api.schemas``. Every schema change goes through
an Alembic migration in ``porecast/db/migrations/versions``.
"""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import (
    JSON,
    BigInteger,
    Boolean,
    CheckConstraint,
    Float,
    ForeignKey,
    Index,
    Integer,
    MetaData,
    String,
    Text,
    UniqueConstraint,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship

from .types import UTCDateTime

#: Project roles, most privileged first.
ROLES = ("owner", "basin_modeller", "geologist", "geophysicist", "reviewer", "viewer")

#: Which discipline role owns which scenario section.
SECTION_ROLES = {"burial": "basin_modeller", "geology": "geologist", "rockphysics": "geophysicist"}

RUN_STATUSES = ("queued", "running", "succeeded", "failed", "cancelled")
#: States of one unit of work of a run; "waiting" is a join step whose tiles are not done.
RUN_TASK_STATUSES = ("waiting", *RUN_STATUSES)

_NAMING = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}


def _in(column: str, values: tuple[str, ...]) -> str:
    return f"{column} IN ({', '.join(repr(v) for v in values)})"


class Base(DeclarativeBase):
    """Declarative base with a constraint naming convention (stable migrations)."""

    metadata = MetaData(naming_convention=_NAMING)
    type_annotation_map = {datetime: UTCDateTime(), dict[str, Any]: JSON, list[Any]: JSON}


# --------------------------------------------------------------------------- accounts


class User(Base):
    """A person who can log in."""

    __tablename__ = "users"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    username: Mapped[str] = mapped_column(String(64), unique=True)
    email: Mapped[str | None] = mapped_column(String(254))
    password_hash: Mapped[str] = mapped_column(String(255))
    is_admin: Mapped[bool] = mapped_column(Boolean, default=False)
    is_active: Mapped[bool] = mapped_column(Boolean, default=True)
    created_at: Mapped[datetime]
    password_changed_at: Mapped[datetime]


class AuthSession(Base):
    """A browser login session; only a SHA-256 hash of the cookie value is kept."""

    __tablename__ = "auth_sessions"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    user_id: Mapped[int] = mapped_column(ForeignKey("users.id", ondelete="CASCADE"), index=True)
    id_hash: Mapped[str] = mapped_column(String(64), unique=True)
    created_at: Mapped[datetime]
    last_seen_at: Mapped[datetime]
    user_agent: Mapped[str | None] = mapped_column(String(255))

    user: Mapped[User] = relationship(lazy="joined")


class ApiToken(Base):
    """A personal token for scripts (``Authorization: Bearer``), stored hashed."""

    __tablename__ = "api_tokens"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    user_id: Mapped[int] = mapped_column(ForeignKey("users.id", ondelete="CASCADE"), index=True)
    name: Mapped[str] = mapped_column(String(100))
    token_hash: Mapped[str] = mapped_column(String(64), unique=True)
    prefix: Mapped[str] = mapped_column(String(16))
    created_at: Mapped[datetime]
    expires_at: Mapped[datetime | None]
    last_used_at: Mapped[datetime | None]

    user: Mapped[User] = relationship(lazy="joined")


class LoginFailure(Base):
    """One failed login, kept for the rate limit window."""

    __tablename__ = "login_failures"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    username: Mapped[str] = mapped_column(String(64), index=True)
    client: Mapped[str | None] = mapped_column(String(64))
    at: Mapped[datetime]


# --------------------------------------------------------------------------- projects


class Project(Base):
    """A team workspace; every other object belongs to exactly one project."""

    __tablename__ = "projects"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(String(120))
    description: Mapped[str] = mapped_column(Text, default="")
    created_by_id: Mapped[int | None] = mapped_column(
        ForeignKey("users.id", ondelete="SET NULL")
    )
    created_at: Mapped[datetime]


class Membership(Base):
    """A user's role in a project."""

    __tablename__ = "memberships"
    __table_args__ = (
        UniqueConstraint("project_id", "user_id"),
        CheckConstraint(_in("role", ROLES), name="role"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    project_id: Mapped[int] = mapped_column(ForeignKey("projects.id", ondelete="CASCADE"))
    user_id: Mapped[int] = mapped_column(ForeignKey("users.id", ondelete="CASCADE"), index=True)
    role: Mapped[str] = mapped_column(String(20))
    created_at: Mapped[datetime]

    user: Mapped[User] = relationship(lazy="joined")


# --------------------------------------------------------------------------- scenarios


class Scenario(Base):
    """A scenario: metadata here, section documents in ``scenario_sections``.

    ``head_revision`` is the number of the latest revision. Every save first locks
    this row (``SELECT ... FOR UPDATE`` on PostgreSQL, ``BEGIN IMMEDIATE`` on
    SQLite), so concurrent saves of one scenario are serialised and get distinct,
    gap-free revision numbers.
    """

    __tablename__ = "scenarios"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    project_id: Mapped[int] = mapped_column(
        ForeignKey("projects.id", ondelete="CASCADE"), index=True
    )
    name: Mapped[str] = mapped_column(String(120))
    #: Every top-level field of the document that is not a section
    #: (schema_version, name, description, seed, realisations, ...).
    meta: Mapped[dict[str, Any]]
    head_revision: Mapped[int] = mapped_column(Integer, default=1)
    meta_revision: Mapped[int] = mapped_column(Integer, default=1)
    forked_from_scenario_id: Mapped[int | None] = mapped_column(
        ForeignKey("scenarios.id", ondelete="SET NULL")
    )
    forked_from_revision: Mapped[int | None] = mapped_column(Integer)
    created_by_id: Mapped[int | None] = mapped_column(ForeignKey("users.id", ondelete="SET NULL"))
    created_at: Mapped[datetime]
    updated_at: Mapped[datetime]

    sections: Mapped[list[ScenarioSection]] = relationship(
        back_populates="scenario",
        order_by="ScenarioSection.section",
        cascade="all, delete-orphan",
        passive_deletes=True,
    )


class ScenarioSection(Base):
    """The current JSON of one section, its last-change revision and ready flag."""

    __tablename__ = "scenario_sections"

    scenario_id: Mapped[int] = mapped_column(
        ForeignKey("scenarios.id", ondelete="CASCADE"), primary_key=True
    )
    section: Mapped[str] = mapped_column(String(20), primary_key=True)
    data: Mapped[dict[str, Any]]
    revision: Mapped[int] = mapped_column(Integer)
    ready: Mapped[bool] = mapped_column(Boolean, default=False)
    ready_by_id: Mapped[int | None] = mapped_column(ForeignKey("users.id", ondelete="SET NULL"))
    ready_at: Mapped[datetime | None]

    scenario: Mapped[Scenario] = relationship(back_populates="sections")


class ScenarioRevision(Base):
    """One save: who, when, which section, the diff and the whole document after it."""

    __tablename__ = "scenario_revisions"
    __table_args__ = (UniqueConstraint("scenario_id", "number"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    scenario_id: Mapped[int] = mapped_column(ForeignKey("scenarios.id", ondelete="CASCADE"))
    number: Mapped[int] = mapped_column(Integer)
    kind: Mapped[str] = mapped_column(String(20))
    section: Mapped[str | None] = mapped_column(String(20))
    author_id: Mapped[int | None] = mapped_column(ForeignKey("users.id", ondelete="SET NULL"))
    created_at: Mapped[datetime]
    message: Mapped[str] = mapped_column(Text, default="")
    diff: Mapped[list[Any]]
    document: Mapped[dict[str, Any]]
    document_hash: Mapped[str] = mapped_column(String(64))

    author: Mapped[User | None] = relationship(lazy="joined")


# --------------------------------------------------------------------------- data


class Well(Base):
    """A well with parsed log curves; the curves are an ``.npz`` file on disk."""

    __tablename__ = "wells"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    project_id: Mapped[int] = mapped_column(
        ForeignKey("projects.id", ondelete="CASCADE"), index=True
    )
    name: Mapped[str] = mapped_column(String(120))
    x: Mapped[float | None] = mapped_column(Float)
    y: Mapped[float | None] = mapped_column(Float)
    depth_min: Mapped[float] = mapped_column(Float)
    depth_max: Mapped[float] = mapped_column(Float)
    n_samples: Mapped[int] = mapped_column(Integer)
    curves: Mapped[list[Any]]
    file_name: Mapped[str] = mapped_column(String(80), unique=True)
    original_filename: Mapped[str] = mapped_column(String(255))
    size_bytes: Mapped[int] = mapped_column(BigInteger)
    sha256: Mapped[str] = mapped_column(String(64))
    uploaded_by_id: Mapped[int | None] = mapped_column(
        ForeignKey("users.id", ondelete="SET NULL")
    )
    created_at: Mapped[datetime]


class Grid(Base):
    """A map (2-D) or cube (3-D) attribute grid; values in a file, geometry here."""

    __tablename__ = "grids"
    __table_args__ = (CheckConstraint(_in("kind", ("map", "cube")), name="kind"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    project_id: Mapped[int] = mapped_column(
        ForeignKey("projects.id", ondelete="CASCADE"), index=True
    )
    name: Mapped[str] = mapped_column(String(120))
    kind: Mapped[str] = mapped_column(String(8))
    source_format: Mapped[str] = mapped_column(String(16))
    geometry: Mapped[dict[str, Any]]
    stats: Mapped[dict[str, Any]]
    file_name: Mapped[str] = mapped_column(String(80), unique=True)
    original_filename: Mapped[str] = mapped_column(String(255))
    size_bytes: Mapped[int] = mapped_column(BigInteger)
    sha256: Mapped[str] = mapped_column(String(64))
    uploaded_by_id: Mapped[int | None] = mapped_column(
        ForeignKey("users.id", ondelete="SET NULL")
    )
    created_at: Mapped[datetime]


class Prospect(Base):
    """A prospect outline: a polygon of ``[x, y]`` map coordinates (m)."""

    __tablename__ = "prospects"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    project_id: Mapped[int] = mapped_column(
        ForeignKey("projects.id", ondelete="CASCADE"), index=True
    )
    name: Mapped[str] = mapped_column(String(120))
    outline: Mapped[list[Any]]
    area_m2: Mapped[float] = mapped_column(Float)
    created_by_id: Mapped[int | None] = mapped_column(ForeignKey("users.id", ondelete="SET NULL"))
    created_at: Mapped[datetime]
    updated_at: Mapped[datetime]


# --------------------------------------------------------------------------- collaboration


class Comment(Base):
    """A threaded comment on a scenario section/field or a map location."""

    __tablename__ = "comments"
    __table_args__ = (Index("ix_comments_scenario_section", "scenario_id", "section"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    project_id: Mapped[int] = mapped_column(
        ForeignKey("projects.id", ondelete="CASCADE"), index=True
    )
    parent_id: Mapped[int | None] = mapped_column(
        ForeignKey("comments.id", ondelete="CASCADE"), index=True
    )
    thread_id: Mapped[int | None] = mapped_column(Integer, index=True)
    scenario_id: Mapped[int | None] = mapped_column(ForeignKey("scenarios.id", ondelete="CASCADE"))
    section: Mapped[str | None] = mapped_column(String(20))
    field_path: Mapped[str | None] = mapped_column(String(300))
    grid_id: Mapped[int | None] = mapped_column(ForeignKey("grids.id", ondelete="SET NULL"))
    x: Mapped[float | None] = mapped_column(Float)
    y: Mapped[float | None] = mapped_column(Float)
    author_id: Mapped[int | None] = mapped_column(ForeignKey("users.id", ondelete="SET NULL"))
    body: Mapped[str] = mapped_column(Text)
    created_at: Mapped[datetime]
    edited_at: Mapped[datetime | None]
    resolved_at: Mapped[datetime | None]
    resolved_by_id: Mapped[int | None] = mapped_column(
        ForeignKey("users.id", ondelete="SET NULL")
    )

    author: Mapped[User | None] = relationship(foreign_keys=[author_id], lazy="joined")


class Activity(Base):
    """One entry of a project's activity feed, written by the services."""

    __tablename__ = "activity"
    __table_args__ = (Index("ix_activity_project_id_id", "project_id", "id"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    project_id: Mapped[int] = mapped_column(ForeignKey("projects.id", ondelete="CASCADE"))
    actor_id: Mapped[int | None] = mapped_column(ForeignKey("users.id", ondelete="SET NULL"))
    verb: Mapped[str] = mapped_column(String(40))
    object_type: Mapped[str] = mapped_column(String(20))
    object_id: Mapped[int | None] = mapped_column(Integer)
    summary: Mapped[str] = mapped_column(String(500))
    data: Mapped[dict[str, Any]]
    created_at: Mapped[datetime]

    actor: Mapped[User | None] = relationship(lazy="joined")


class Run(Base):
    """A simulation/classification run tied to one scenario revision and seed.

    ``readiness_override`` records an owner starting a run although not every
    section was marked ready. Progress is in thousandths of the whole run
    (``progress_total`` = 1000 once started), monotonic; ``result`` holds the
    small summary (risk numbers), never arrays (those are files in the run's
    result folder). The units of work (main step, cube tiles, join) are rows of
    ``run_tasks``; the log is ``run_events``.
    """

    __tablename__ = "runs"
    __table_args__ = (CheckConstraint(_in("status", RUN_STATUSES), name="status"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    project_id: Mapped[int] = mapped_column(
        ForeignKey("projects.id", ondelete="CASCADE"), index=True
    )
    scenario_id: Mapped[int] = mapped_column(
        ForeignKey("scenarios.id", ondelete="CASCADE"), index=True
    )
    scenario_revision_id: Mapped[int] = mapped_column(
        ForeignKey("scenario_revisions.id", ondelete="CASCADE")
    )
    kind: Mapped[str] = mapped_column(String(20))
    status: Mapped[str] = mapped_column(String(12), default="queued")
    progress_current: Mapped[int] = mapped_column(Integer, default=0)
    progress_total: Mapped[int] = mapped_column(Integer, default=0)
    seed: Mapped[int] = mapped_column(BigInteger)
    input_hash: Mapped[str] = mapped_column(String(64))
    parameters: Mapped[dict[str, Any]]
    readiness_override: Mapped[bool] = mapped_column(Boolean, default=False)
    error: Mapped[str | None] = mapped_column(Text)
    task_id: Mapped[str | None] = mapped_column(String(64))
    created_by_id: Mapped[int | None] = mapped_column(ForeignKey("users.id", ondelete="SET NULL"))
    created_at: Mapped[datetime]
    started_at: Mapped[datetime | None]
    finished_at: Mapped[datetime | None]
    stage: Mapped[str] = mapped_column(String(120), default="")
    eta_seconds: Mapped[float | None] = mapped_column(Float)
    result: Mapped[dict[str, Any] | None] = mapped_column(JSON)


class RunTask(Base):
    """One unit of work of a run (``main``, ``tile-00003``, ``join``), its own delivery counter.

    ``deliveries`` is incremented (and committed) when a worker starts the unit,
    so a unit that keeps killing its worker is failed after the configured
    number of tries; ``host``/``pid``/``heartbeat_at`` tell whether the process
    holding a running unit is still alive.
    """

    __tablename__ = "run_tasks"
    __table_args__ = (
        UniqueConstraint("run_id", "key"),
        CheckConstraint(_in("status", RUN_TASK_STATUSES), name="status"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    run_id: Mapped[int] = mapped_column(ForeignKey("runs.id", ondelete="CASCADE"))
    key: Mapped[str] = mapped_column(String(40))
    kind: Mapped[str] = mapped_column(String(12))
    status: Mapped[str] = mapped_column(String(12), default="queued")
    trace_start: Mapped[int | None] = mapped_column(Integer)
    trace_stop: Mapped[int | None] = mapped_column(Integer)
    progress_done: Mapped[int] = mapped_column(Integer, default=0)
    progress_total: Mapped[int] = mapped_column(Integer, default=0)
    deliveries: Mapped[int] = mapped_column(Integer, default=0)
    task_id: Mapped[str | None] = mapped_column(String(64))
    worker: Mapped[str | None] = mapped_column(String(255))
    host: Mapped[str | None] = mapped_column(String(255))
    pid: Mapped[int | None] = mapped_column(Integer)
    sent_at: Mapped[datetime | None]
    started_at: Mapped[datetime | None]
    heartbeat_at: Mapped[datetime | None]
    finished_at: Mapped[datetime | None]
    error: Mapped[str | None] = mapped_column(Text)
    result: Mapped[dict[str, Any] | None] = mapped_column(JSON)


class RunEvent(Base):
    """One line of a run's log."""

    __tablename__ = "run_events"
    __table_args__ = (Index("ix_run_events_run_id_id", "run_id", "id"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    run_id: Mapped[int] = mapped_column(ForeignKey("runs.id", ondelete="CASCADE"))
    at: Mapped[datetime]
    level: Mapped[str] = mapped_column(String(8), default="info")
    message: Mapped[str] = mapped_column(Text)
