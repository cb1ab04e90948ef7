"""Celery tasks: thin wrappers taking ids, calling :func:`porecast.services.run_steps.execute`.

Each task names one unit of work of a run (``run_id``, ``key``); the step
function claims the unit in the database (delivery counter), computes, writes
its files atomically and records the outcome, so a re-delivered message is a
no-op or a clean take-over. Late acknowledgement and rejection on a lost worker
make Celery hand the message out again when the process executing it dies.
"""

from __future__ import annotations

from typing import Any

from celery import signals

from porecast.services.run_jobs import TASK_NAMES

from . import runtime
from .app import celery_app

_OPTIONS = {"bind": True, "acks_late": True, "reject_on_worker_lost": True,
            "ignore_result": False}


@celery_app.task(name=TASK_NAMES["main"], **_OPTIONS)
def run_main(self: Any, run_id: int, key: str = "main") -> dict[str, Any]:
    """A whole simulate, map classification, calibration or summary; a cube's training."""
    from porecast.services import run_steps

    return run_steps.execute(runtime.step_env(self), int(run_id), str(key))


@celery_app.task(name=TASK_NAMES["tile"], **_OPTIONS)
def run_tile(self: Any, run_id: int, key: str) -> dict[str, Any]:
    """One trace range of a cube classification."""
    from porecast.services import run_steps

    return run_steps.execute(runtime.step_env(self), int(run_id), str(key))


@celery_app.task(name=TASK_NAMES["join"], **_OPTIONS)
def run_join(self: Any, run_id: int, key: str = "join") -> dict[str, Any]:
    """Join the tiles of a cube classification into one file per property."""
    from porecast.services import run_steps

    return run_steps.execute(runtime.step_env(self), int(run_id), str(key))


@signals.worker_ready.connect
def _start_sweeper(sender: Any = None, **_kw: Any) -> None:
    runtime.sweeper.start()


@signals.worker_shutdown.connect
def _stop_sweeper(sender: Any = None, **_kw: Any) -> None:
    runtime.sweeper.stop()
