"""Process state of a worker: its settings, a database engine per process, the sweeper.

``porecast worker`` calls :func:`configure` before Celery starts; prefork pool
processes inherit the settings and open their own database engine on first use
(an engine must not cross a fork).
"""

from __future__ import annotations

import logging
import os
import threading
from typing import Any

from sqlalchemy import Engine
from sqlalchemy.orm import Session, sessionmaker

from porecast.db.session import make_engine, make_session_factory
from porecast.services import run_steps
from porecast.settings import Settings, load_settings

from .app import celery_app, make_celery, prune_processed
from .config import JobSettings, load_job_settings
from .dispatch import CeleryDispatch

logger = logging.getLogger(__name__)

_state: dict[str, Any] = {"settings": None, "jobs": None, "pid": None, "engine": None,
                          "factory": None}


def configure(settings: Settings, jobs: JobSettings | None = None) -> None:
    """Configure :data:`celery_app` and this process's settings."""
    jobs = jobs or load_job_settings()
    make_celery(settings, jobs, app=celery_app)
    _state.update(settings=settings, jobs=jobs, pid=None, engine=None, factory=None)


def settings() -> Settings:
    if _state["settings"] is None:
        configure(load_settings())
    return _state["settings"]


def jobs() -> JobSettings:
    settings()
    return _state["jobs"]


def session_factory() -> sessionmaker[Session]:
    """The session factory of this process (a new engine after a fork)."""
    if _state["pid"] != os.getpid() or _state["factory"] is None:
        engine: Engine = make_engine(settings().sqlalchemy_url)
        _state.update(pid=os.getpid(), engine=engine, factory=make_session_factory(engine))
    return _state["factory"]


def step_env(task: Any = None) -> run_steps.StepEnv:
    """The environment of a step run by ``task`` (a bound Celery task) in this process."""
    s, j = settings(), jobs()
    on_state = None
    worker = f"inline@{os.uname().nodename}"
    task_id = None
    if task is not None and getattr(task.request, "id", None):
        task_id = task.request.id
        worker = task.request.hostname or worker

        def on_state(meta: dict[str, Any]) -> None:
            task.update_state(state="PROGRESS", meta=meta)

    return run_steps.StepEnv(
        factory=session_factory(), dispatch=CeleryDispatch(celery_app), data_dir=s.data_dir,
        files_dir=s.files_dir, max_deliveries=j.max_deliveries, lease_s=j.lease_s,
        heartbeat_s=j.heartbeat_s, progress_interval_s=j.progress_interval_s,
        tile_traces=j.tile_traces, worker=worker, task_id=task_id, on_state=on_state,
    )


class Sweeper:
    """Recovery sweep at worker start and every ``sweep_s`` (daemon thread)."""

    def __init__(self) -> None:
        self._halt = threading.Event()
        self._thread: threading.Thread | None = None

    def start(self) -> None:
        self._thread = threading.Thread(target=self._loop, name="porecast-sweeper", daemon=True)
        self._thread.start()

    def _loop(self) -> None:
        try:
            removed = prune_processed(settings())
            if removed:
                logger.info("removed %d old broker messages", removed)
            sends = run_steps.recover(step_env(), resend_queued=False, reason="worker start")
            if sends:
                logger.warning("worker start: sent %d lost steps again", len(sends))
        except Exception:  # noqa: BLE001 - the sweep retries on its next round
            logger.exception("recovery sweep at worker start failed")
        while not self._halt.wait(jobs().sweep_s):
            try:
                run_steps.recover(step_env(), resend_queued=False, reason="periodic check")
            except Exception:  # noqa: BLE001
                logger.exception("periodic recovery sweep failed")

    def stop(self) -> None:
        self._halt.set()


sweeper = Sweeper()
