"""Settings of the job system (broker timing, delivery limit, tiles, local worker).

They live next to the worker rather than in :class:`porecast.settings.Settings`
so the worker step touches nothing outside its own files; they are read the
same way (``PORECAST_`` environment variables, then the settings file named by
``PORECAST_SETTINGS_FILE``, then defaults), e.g. ``PORECAST_MAX_DELIVERIES=5``.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any, Literal

from pydantic import Field, model_validator
from pydantic_settings import BaseSettings, SettingsConfigDict

from porecast.settings import read_settings_file


class JobSettings(BaseSettings):
    """Timing and limits of runs, their tasks and the workers."""

    model_config = SettingsConfigDict(env_prefix="PORECAST_", extra="ignore")

    task_time_limit_s: float = Field(
        6 * 3600.0, gt=0, description="Hard time limit of one task (a cube tile, a map run), s"
    )
    broker_visibility_timeout_s: float = Field(
        12 * 3600.0, gt=0,
        description="Redis: an unacknowledged task is handed out again after this long, s. "
        "Must exceed the task time limit or a long task would run twice",
    )
    max_deliveries: int = Field(
        3, ge=1, le=100, description="Starts of one unit of work before the run is failed"
    )
    lease_s: float = Field(
        120.0, gt=0,
        description="A running unit whose heartbeat is older than this is taken as lost, s",
    )
    heartbeat_s: float = Field(15.0, gt=0, description="Heartbeat interval of running units, s")
    sweep_s: float = Field(
        60.0, gt=0, description="Interval of a worker's check for lost or unsent units, s"
    )
    progress_interval_s: float = Field(
        0.5, ge=0, description="Least time between two progress writes of one unit, s"
    )
    tile_traces: int = Field(
        20000, ge=1, description="Traces per tile task of a cube classification"
    )
    broker_polling_interval_s: float = Field(
        0.1, gt=0, le=10, description="Idle polling interval of the filesystem broker, s"
    )
    worker_concurrency: int | None = Field(
        None, ge=1, le=256, description="Processes of a worker (default: one per CPU)"
    )
    worker_pool: Literal["prefork", "solo"] = Field(
        "prefork", description="prefork: a lost child is detected and its task re-delivered"
    )
    worker_imports: list[str] = Field(
        default_factory=list, description="Extra task modules the worker imports"
    )

    @model_validator(mode="after")
    def _visibility_exceeds_time_limit(self) -> JobSettings:
        if self.broker_visibility_timeout_s <= self.task_time_limit_s:
            raise ValueError(
                "broker_visibility_timeout_s must be longer than task_time_limit_s "
                f"({self.broker_visibility_timeout_s:g} s <= {self.task_time_limit_s:g} s), or "
                "Redis hands a task that is still running to a second worker"
            )
        if self.heartbeat_s >= self.lease_s:
            raise ValueError("heartbeat_s must be shorter than lease_s")
        return self


def load_job_settings(settings_file: str | Path | None = None, **overrides: Any) -> JobSettings:
    """``JobSettings`` from overrides > environment > settings file > defaults."""
    file_values: dict[str, Any] = {}
    settings_file = settings_file or os.environ.get("PORECAST_SETTINGS_FILE")
    if settings_file:
        file_values = read_settings_file(settings_file)
    names = set(JobSettings.model_fields)
    in_env = {n for n in names if f"PORECAST_{n.upper()}" in os.environ}
    init = {k: v for k, v in file_values.items() if k in names and k not in in_env}
    init.update(overrides)
    return JobSettings(**init)
