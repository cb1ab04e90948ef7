"""The Celery application: broker and result backend from the settings, tasks in ``include``.

Nothing is configured at import: :func:`make_celery` builds a configured app
for a :class:`~porecast.settings.Settings` object (the API uses one to send
messages), and ``porecast worker`` configures the module's :data:`celery_app`
(which the tasks in :mod:`porecast.worker.tasks` are bound to) before starting.

Brokers
-------
* Many machines: ``PORECAST_BROKER_URL=redis://host:6379/0``; the result backend
  defaults to the same Redis. ``visibility_timeout`` is set longer than the task
  time limit, or Redis would hand a task that is still running to a second
  worker.
* One machine (no broker URL): kombu's ``filesystem://`` transport with its
  folders in ``<data_dir>/broker`` and a ``db+sqlite`` result backend in
  ``<data_dir>/celery-results.sqlite``: no server to run.

Why the filesystem transport and not kombu's SQLAlchemy transport on SQLite
(``deploy/measure_broker.py`` on the 2-CPU development machine, otherwise idle:
Celery 5.7.0, kombu 5.7.0, one prefork worker of 2 processes, prefetch 1, late
acks, ``db+sqlite`` results; a round trip of 50 small tasks, median of 3):

========================================  =========  ========
broker, idle polling interval              50 tasks   per task
========================================  =========  ========
``sqla+sqlite``, 1 s (kombu's default)      24.2 s    485 ms
``filesystem``, 1 s                         25.1 s    501 ms
``sqla+sqlite``, 0.1 s (class patched)       2.6 s     52 ms
``filesystem``, 0.1 s (transport option)     2.6 s     51 ms
========================================  =========  ========

At the same polling interval the two are equally fast (a virtual transport
takes about two tasks per poll here, so the interval sets the pace). The
difference is what can be configured and what works: the filesystem transport
takes ``polling_interval`` as a plain transport option, while the SQLAlchemy
transport passes every option to ``create_engine`` (which refuses it), so
without patching kombu it stays at 1 s, ten times slower per task; the
filesystem transport carries broadcast messages, so remote control works
(``revoke`` on cancel, the ``ping`` of ``porecast.worker.health``); its idle poll
is a directory listing rather than a ``BEGIN IMMEDIATE`` on a SQLite file that
the API and workers also write; and it avoids the SQLAlchemy 2.1 deprecation
warning. Both lose a message whose *whole* worker is killed (kombu's virtual
transports keep unacknowledged messages in the worker's memory); a lost *pool
process* is re-delivered through ``task_reject_on_worker_lost``, and the
application's recovery sweep re-sends units held by dead processes either way.
Processed messages are moved by an atomic rename inside ``<data_dir>/broker``
(not copied through ``/tmp``) and pruned when a worker starts.
"""

from __future__ import annotations

import time
from pathlib import Path
from typing import Any

from celery import Celery

from porecast.settings import Settings

from .config import JobSettings, load_job_settings

TASK_MODULES = ("porecast.worker.tasks",)
QUEUE = "porecast"
#: Processed broker messages older than this are removed when a worker starts, s.
PROCESSED_KEEP_S = 24 * 3600.0

celery_app = Celery("porecast", include=list(TASK_MODULES), set_as_current=False)


def is_redis(url: str | None) -> bool:
    return bool(url) and str(url).startswith(("redis://", "rediss://", "redis+socket://"))


def broker_url(settings: Settings) -> str:
    """The configured broker, or the filesystem broker of the one-machine set-up."""
    return settings.broker_url or "filesystem://"


def broker_folder(settings: Settings) -> Path:
    """Folders of the filesystem broker (one machine)."""
    return settings.data_dir.resolve() / "broker"


def result_backend(settings: Settings) -> str:
    """The configured result backend; default Redis for a Redis broker, else SQLite."""
    if settings.result_backend:
        return settings.result_backend
    if is_redis(settings.broker_url):
        return str(settings.broker_url)
    return f"db+sqlite:///{(settings.data_dir / 'celery-results.sqlite').resolve()}"


def transport_options(settings: Settings, jobs: JobSettings) -> dict[str, Any]:
    """``broker_transport_options`` for the configured broker."""
    url = broker_url(settings)
    if url.startswith("filesystem"):
        root = broker_folder(settings)
        folders = {"queue": root / "queue", "processed": root / "processed",
                   "control": root / "control"}
        for folder in folders.values():
            folder.mkdir(parents=True, exist_ok=True)
        return {"data_folder_in": str(folders["queue"]), "data_folder_out": str(folders["queue"]),
                "store_processed": True, "processed_folder": str(folders["processed"]),
                "control_folder": str(folders["control"]),
                "polling_interval": jobs.broker_polling_interval_s}
    if is_redis(url):
        return {"visibility_timeout": jobs.broker_visibility_timeout_s,
                # a restart finds unacknowledged messages older than the timeout at once
                "unacked_restore_interval": min(60.0, jobs.broker_visibility_timeout_s / 4)}
    return {}


def celery_config(settings: Settings, jobs: JobSettings) -> dict[str, Any]:
    """The Celery settings of Porecast."""
    if not settings.broker_url:
        settings.data_dir.mkdir(parents=True, exist_ok=True)
    soft = max(1.0, jobs.task_time_limit_s - min(60.0, 0.05 * jobs.task_time_limit_s))
    return {
        "broker_url": broker_url(settings),
        "result_backend": result_backend(settings),
        "broker_transport_options": transport_options(settings, jobs),
        "result_backend_transport_options": (
            {"visibility_timeout": jobs.broker_visibility_timeout_s}
            if is_redis(result_backend(settings)) else {}),
        "include": [*TASK_MODULES, *jobs.worker_imports],
        "task_default_queue": QUEUE,
        "task_acks_late": True,
        "task_reject_on_worker_lost": True,
        "worker_prefetch_multiplier": 1,
        # a lost pool process is reported after this wait; results live in the database,
        # so there is nothing in flight worth Celery's default 10 s
        "worker_lost_wait": 2.0,
        "task_time_limit": jobs.task_time_limit_s,
        "task_soft_time_limit": soft,
        "task_serializer": "json",
        "result_serializer": "json",
        "accept_content": ["json"],
        "result_expires": 7 * 24 * 3600,
        "result_extended": False,
        "task_track_started": False,
        "worker_send_task_events": False,
        "task_send_sent_event": False,
        "worker_cancel_long_running_tasks_on_connection_loss": True,
        "broker_connection_retry_on_startup": True,
        "database_short_lived_sessions": True,
        "worker_hijack_root_logger": False,
        "timezone": "UTC",
        "enable_utc": True,
    }


def make_celery(settings: Settings, jobs: JobSettings | None = None,
                app: Celery | None = None) -> Celery:
    """A Celery app configured from ``settings`` (a new one unless ``app`` is given)."""
    jobs = jobs or load_job_settings()
    app = app or Celery("porecast", set_as_current=False)
    app.conf.update(celery_config(settings, jobs))
    return app


def prune_processed(settings: Settings, keep_s: float = PROCESSED_KEEP_S) -> int:
    """Remove old filesystem-broker files; returns how many.

    Processed messages older than ``keep_s``, and remote-control messages
    (``*.celery.pidbox.msg``) older than an hour, which only a worker of that
    name would read (a worker that is gone does not).
    """
    if settings.broker_url:
        return 0
    root = broker_folder(settings)
    now = time.time()
    removed = 0
    candidates = [(root / "processed", keep_s, "")]
    candidates.append((root / "queue", 3600.0, ".celery.pidbox.msg"))
    for folder, age, suffix in candidates:
        if not folder.is_dir():
            continue
        for path in folder.iterdir():
            if suffix and not path.name.endswith(suffix):
                continue
            try:
                if path.stat().st_mtime < now - age:
                    path.unlink()
                    removed += 1
            except FileNotFoundError:
                continue
    return removed
