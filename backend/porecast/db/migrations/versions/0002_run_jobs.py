"""Run jobs: stage, ETA and result summary on runs; units of work; run log.

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-02
"""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

import porecast.db.types

revision: str = "0002"
down_revision: str | None = "0001"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "run_events",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("run_id", sa.Integer(), nullable=False),
        sa.Column("at", porecast.db.types.UTCDateTime(timezone=True), nullable=False),
        sa.Column("level", sa.String(length=8), nullable=False),
        sa.Column("message", sa.Text(), nullable=False),
        sa.ForeignKeyConstraint(
            ["run_id"], ["runs.id"], name=op.f("fk_run_events_run_id_runs"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_run_events")),
    )
    with op.batch_alter_table("run_events", schema=None) as batch_op:
        batch_op.create_index("ix_run_events_run_id_id", ["run_id", "id"], unique=False)

    op.create_table(
        "run_tasks",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("run_id", sa.Integer(), nullable=False),
        sa.Column("key", sa.String(length=40), nullable=False),
        sa.Column("kind", sa.String(length=12), nullable=False),
        sa.Column("status", sa.String(length=12), nullable=False),
        sa.Column("trace_start", sa.Integer(), nullable=True),
        sa.Column("trace_stop", sa.Integer(), nullable=True),
        sa.Column("progress_done", sa.Integer(), nullable=False),
        sa.Column("progress_total", sa.Integer(), nullable=False),
        sa.Column("deliveries", sa.Integer(), nullable=False),
        sa.Column("task_id", sa.String(length=64), nullable=True),
        sa.Column("worker", sa.String(length=255), nullable=True),
        sa.Column("host", sa.String(length=255), nullable=True),
        sa.Column("pid", sa.Integer(), nullable=True),
        sa.Column("sent_at", porecast.db.types.UTCDateTime(timezone=True), nullable=True),
        sa.Column("started_at", porecast.db.types.UTCDateTime(timezone=True), nullable=True),
        sa.Column("heartbeat_at", porecast.db.types.UTCDateTime(timezone=True), nullable=True),
        sa.Column("finished_at", porecast.db.types.UTCDateTime(timezone=True), nullable=True),
        sa.Column("error", sa.Text(), nullable=True),
        sa.Column("result", sa.JSON(), nullable=True),
        sa.CheckConstraint(
            "status IN ('waiting', 'queued', 'running', 'succeeded', 'failed', 'cancelled')",
            name=op.f("ck_run_tasks_status"),
        ),
        sa.ForeignKeyConstraint(
            ["run_id"], ["runs.id"], name=op.f("fk_run_tasks_run_id_runs"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_run_tasks")),
        sa.UniqueConstraint("run_id", "key", name=op.f("uq_run_tasks_run_id")),
    )
    with op.batch_alter_table("runs", schema=None) as batch_op:
        # server default only fills rows that exist before this migration
        batch_op.add_column(
            sa.Column("stage", sa.String(length=120), nullable=False, server_default="")
        )
        batch_op.add_column(sa.Column("eta_seconds", sa.Float(), nullable=True))
        batch_op.add_column(sa.Column("result", sa.JSON(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("runs", schema=None) as batch_op:
        batch_op.drop_column("result")
        batch_op.drop_column("eta_seconds")
        batch_op.drop_column("stage")

    op.drop_table("run_tasks")
    with op.batch_alter_table("run_events", schema=None) as batch_op:
        batch_op.drop_index("ix_run_events_run_id_id")

    op.drop_table("run_events")
