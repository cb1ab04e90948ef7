"""``porecast worker``, and the worker ``porecast serve`` starts on one machine.

``porecast serve`` (unless ``--no-worker``) first runs the recovery sweep for a
server restart (every queued unit is sent again, units left running by a process
that is gone are sent again or, after too many deliveries, fail their run), then
starts ``porecast worker`` as a child process with the same settings (passed as
``PORECAST_*`` environment variables), restarts it if it dies, and stops it when
the server stops.
"""

from __future__ import annotations

import contextlib
import ctypes
import json
import logging
import os
import signal
import subprocess
import sys
import threading
import time
from collections.abc import Callable

from porecast.settings import Settings

from .config import JobSettings, load_job_settings

logger = logging.getLogger(__name__)

#: Seconds a stopping worker gets to finish (warm shutdown) before it is killed.
STOP_GRACE_S = 10.0
LOCAL_WORKER_NAME = "porecast-local@%h"


def settings_env(settings: Settings, jobs: JobSettings | None = None) -> dict[str, str]:
    """``PORECAST_*`` variables that rebuild ``settings`` (and ``jobs``) in a child process.

    A field set to None is left out (the child falls back to its default); of the
    settings a worker reads, none is None-valued unless it is None by default.
    """
    env: dict[str, str] = {}
    for model in (settings, jobs):
        if model is None:
            continue
        for name in type(model).model_fields:
            value = getattr(model, name)
            if value is None:
                continue
            if hasattr(value, "get_secret_value"):
                value = value.get_secret_value()
            if name == "data_dir":
                value = value.resolve()
            if isinstance(value, list | dict):
                text = json.dumps(value)
            elif isinstance(value, bool):
                text = "true" if value else "false"
            else:
                text = str(value)
            env[f"PORECAST_{name.upper()}"] = text
    return env


#: Variables that keep numerical libraries to one thread per worker process.
SINGLE_THREAD_ENV = {"OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}


def single_threaded_blas() -> None:
    """One BLAS thread per process: a worker already runs one process per CPU.

    Multi-threaded BLAS in every pool process oversubscribes the CPUs; measured on
    the 2-CPU development machine under load, training the example scenario's PDFs
    took 7.7 s with OpenBLAS's default threads and 0.67 s with one. The variables
    reach processes started later; threadpoolctl (when installed) also limits
    this process, whose pool processes inherit the limit when forked.
    """
    for name, value in SINGLE_THREAD_ENV.items():
        os.environ.setdefault(name, value)
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - optional
        return
    threadpool_limits(1)


def worker_argv(hostname: str, *, concurrency: int | None, pool: str, loglevel: str) -> list[str]:
    """Arguments of Celery's ``worker`` command for a Porecast worker."""
    from .app import QUEUE

    argv = ["worker", "-n", hostname, "-P", pool, "-Q", QUEUE, "-l", loglevel,
            "--without-gossip", "--without-mingle", "--without-heartbeat"]
    if concurrency is not None and pool != "solo":
        argv += ["-c", str(concurrency)]
    return argv


def run_worker(
    settings: Settings,
    *,
    hostname: str = "porecast@%h",
    concurrency: int | None = None,
    pool: str | None = None,
    loglevel: str = "INFO",
) -> int:
    """Run a Celery worker for ``settings`` in this process until it is stopped."""
    from . import runtime

    jobs = load_job_settings()
    single_threaded_blas()
    settings.data_dir.mkdir(parents=True, exist_ok=True)
    runtime.configure(settings, jobs)
    from .app import celery_app

    celery_app.worker_main(worker_argv(hostname, concurrency=concurrency or
                                       jobs.worker_concurrency, pool=pool or jobs.worker_pool,
                                       loglevel=loglevel))
    return 0


def recover_on_start(settings: Settings, jobs: JobSettings) -> int:
    """The sweep of a server (re)start; returns how many messages were sent."""
    from porecast.db.session import make_engine, make_session_factory
    from porecast.services import run_steps

    from .app import make_celery
    from .dispatch import CeleryDispatch

    engine = make_engine(settings.sqlalchemy_url)
    try:
        env = run_steps.StepEnv(
            factory=make_session_factory(engine),
            dispatch=CeleryDispatch(make_celery(settings, jobs)), data_dir=settings.data_dir,
            files_dir=settings.files_dir, max_deliveries=jobs.max_deliveries,
            lease_s=jobs.lease_s, worker="serve")
        return len(run_steps.recover(env, resend_queued=True, reason="server restart"))
    finally:
        engine.dispose()


def _parent_death_signal() -> None:  # pragma: no cover - runs in the child before exec
    """Linux: the worker gets SIGTERM when the server process dies, even by SIGKILL."""
    with contextlib.suppress(Exception):
        ctypes.CDLL("libc.so.6", use_errno=True).prctl(1, signal.SIGTERM)  # PR_SET_PDEATHSIG


class LocalWorker:
    """A ``porecast worker`` child process, restarted when it dies, stopped on request."""

    def __init__(self, settings: Settings, jobs: JobSettings, *,
                 hostname: str = LOCAL_WORKER_NAME, restart_delay_s: float = 2.0):
        self.env = {**SINGLE_THREAD_ENV, **os.environ, **settings_env(settings, jobs)}
        self.hostname = hostname
        self.restart_delay_s = restart_delay_s
        self.proc: subprocess.Popen[bytes] | None = None
        self._stopping = threading.Event()
        self._lock = threading.Lock()
        self._thread: threading.Thread | None = None

    def _spawn(self) -> subprocess.Popen[bytes]:
        argv = [sys.executable, "-m", "porecast.cli", "worker", "-n", self.hostname]
        preexec = _parent_death_signal if sys.platform.startswith("linux") else None
        return subprocess.Popen(argv, env=self.env, start_new_session=True,
                                preexec_fn=preexec)  # noqa: PLW1509 - only prctl

    def start(self) -> None:
        """Start the worker and a thread that restarts it after an unexpected exit."""
        with self._lock:
            self.proc = self._spawn()
        self._thread = threading.Thread(target=self._watch, name="porecast-worker-watch",
                                        daemon=True)
        self._thread.start()

    def _watch(self) -> None:
        delay = self.restart_delay_s
        while not self._stopping.is_set():
            proc = self.proc
            assert proc is not None
            code = proc.wait()
            if self._stopping.is_set():
                return
            logger.warning("the local worker exited with status %s; restarting in %.0f s",
                           code, delay)
            if self._stopping.wait(delay):
                return
            delay = min(delay * 2, 60.0)
            with self._lock:
                if self._stopping.is_set():
                    return
                self.proc = self._spawn()

    def stop(self) -> None:
        """Warm shutdown (SIGTERM), then SIGKILL of the worker's process group after a grace."""
        self._stopping.set()
        with self._lock:
            proc = self.proc
        if proc is None or proc.poll() is not None:
            return
        with contextlib.suppress(ProcessLookupError):
            os.killpg(proc.pid, signal.SIGTERM)
        try:
            proc.wait(STOP_GRACE_S)
        except subprocess.TimeoutExpired:
            with contextlib.suppress(ProcessLookupError):
                os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()
        # pool processes left behind by a killed worker belong to its process group
        with contextlib.suppress(ProcessLookupError):
            os.killpg(proc.pid, signal.SIGKILL)


def start_local_worker(settings: Settings) -> Callable[[], None]:
    """``porecast serve``'s hook: recover after a restart, start the worker, return its stop."""
    jobs = load_job_settings()
    sent = recover_on_start(settings, jobs)
    if sent:
        logger.warning("server start: %d queued or lost steps sent again", sent)
    worker = LocalWorker(settings, jobs)
    worker.start()
    deadline = time.monotonic() + 0.5
    while time.monotonic() < deadline and worker.proc is not None and \
            worker.proc.poll() is None:
        time.sleep(0.05)
    return worker.stop

