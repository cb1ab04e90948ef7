"""Real worker processes against real brokers: helpers of the worker suite.

A :class:`Deployment` is a data folder, a migrated database (a SQLite file, or a
PostgreSQL database of its own), a broker (the one-machine filesystem broker or
the Redis of ``PORECAST_TEST_REDIS_URL``), a user with a project and a ready
scenario, and the ``porecast worker`` / ``porecast serve`` processes a test
starts. Every process is started by the test and killed (by pid) in a
finally; every wait is a bounded loop with a timeout.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from collections.abc import Callable
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import psutil
import pytest

from porecast import cli_service
from porecast.db.models import Run, RunTask, User
from porecast.db.session import make_engine, make_session_factory, open_session
from porecast.services import auth, projects, runs, scenarios
from porecast.settings import Settings
from porecast.worker.app import make_celery
from porecast.worker.config import JobSettings
from porecast.worker.dispatch import CeleryDispatch
from porecast.worker.local import SINGLE_THREAD_ENV, settings_env

HERE = Path(__file__).resolve().parent
PASSWORD = "correct horse battery staple"
FINISHED = ("succeeded", "failed", "cancelled")
#: Job settings of the tests: short heartbeats, lease and sweep so recovery is quick.
TEST_JOBS = {"heartbeat_s": 0.5, "lease_s": 4.0, "sweep_s": 1.0, "progress_interval_s": 0.2,
             "task_time_limit_s": 120.0, "broker_visibility_timeout_s": 150.0,
             "max_deliveries": 3}


def need_service(available: bool, reason: str) -> None:
    """Skip when a service is missing; fail instead under PORECAST_REQUIRE_SERVICES=1."""
    if available:
        return
    if os.environ.get("PORECAST_REQUIRE_SERVICES") == "1":
        pytest.fail(f"required service missing in CI: {reason}")
    pytest.skip(reason)


def redis_url() -> str:
    """The test Redis (its database is flushed), or skip."""
    url = os.environ.get("PORECAST_TEST_REDIS_URL")
    need_service(bool(url), "PORECAST_TEST_REDIS_URL is not set (Redis broker tests)")
    import redis

    try:
        client = redis.Redis.from_url(url, socket_connect_timeout=2)
        client.ping()
        client.flushdb()
        client.close()
    except Exception as exc:  # noqa: BLE001 - any failure means "no server"
        need_service(False, f"Redis at {url} is not reachable: {exc}")
    return url


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def wait_for(check: Callable[[], Any], timeout: float, what: str, interval: float = 0.1) -> Any:
    """Poll ``check`` until it returns something truthy (bounded)."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        value = check()
        if value:
            return value
        time.sleep(interval)
    raise AssertionError(f"timed out after {timeout:.0f} s waiting for {what}")


def kill_tree(proc: subprocess.Popen) -> None:
    """SIGKILL a process this test started and every process below it, by pid."""
    try:
        children = psutil.Process(proc.pid).children(recursive=True)
    except psutil.NoSuchProcess:
        children = []
    for p in [proc, *children]:
        try:
            os.kill(p.pid, signal.SIGKILL)
        except (ProcessLookupError, PermissionError):
            pass
    try:
        proc.wait(10)
    except subprocess.TimeoutExpired:  # pragma: no cover
        pass
    for c in children:
        try:
            c.wait(5)
        except psutil.Error:
            pass


class Deployment:
    """One Porecast installation for a test (see the module docstring)."""

    def __init__(self, root: Path, *, broker_url: str | None = None,
                 database_url: str | None = None, jobs: dict[str, Any] | None = None):
        self.root = root
        self.settings = Settings(environment="test", data_dir=root / "data",
                                 password_hash_profile="test-fast", frontend_dir=None,
                                 broker_url=broker_url, database_url=database_url)
        self.jobs = JobSettings(**{**TEST_JOBS, **(jobs or {})})
        cli_service.db_upgrade(self.settings)
        self.engine = make_engine(self.settings.sqlalchemy_url)
        self.factory = make_session_factory(self.engine)
        self.celery = make_celery(self.settings, self.jobs)
        self.dispatch = CeleryDispatch(self.celery)
        self.procs: list[subprocess.Popen] = []
        self.logs: dict[int, Path] = {}
        self.env = {**os.environ, **SINGLE_THREAD_ENV,
                    **settings_env(self.settings, self.jobs),
                    "PYTHONPATH": os.pathsep.join([str(HERE), os.environ.get("PYTHONPATH", "")])}
        self.user_id, self.project_id, self.scenario_id = self._seed()

    def _seed(self) -> tuple[int, int, int]:
        now = datetime.now(UTC)
        with self.writer() as db:
            user = auth.create_user(db, "owner", PASSWORD, now=now,
                                    hasher=auth.password_hasher("test-fast"))
            project = projects.create_project(db, user, "Worker tests", "", now=now)
            sc = scenarios.create_scenario(db, user, project.id, name="Base case",
                                           description=None, document=None, now=now)
            for row in sc.sections:
                scenarios.set_ready(db, user, sc.id, row.section, True, now=now,
                                    if_match=scenarios.section_etag(sc.id, row.section,
                                                                    row.revision))
            db.commit()
            return user.id, project.id, sc.id

    def writer(self):
        """A session that takes the SQLite write lock at BEGIN (read-then-write safe)."""
        return open_session(self.factory, write=True)

    # processes -------------------------------------------------------------

    def spawn(self, argv: list[str], name: str, env: dict[str, str] | None = None
              ) -> subprocess.Popen:
        log = self.root / f"{name}.log"
        fh = open(log, "ab")  # noqa: SIM115 - the child keeps it
        proc = subprocess.Popen([sys.executable, "-m", "porecast.cli", *argv],
                                env={**self.env, **(env or {})}, stdout=fh,
                                stderr=subprocess.STDOUT, cwd=self.root)
        fh.close()
        self.procs.append(proc)
        self.logs[proc.pid] = log
        return proc

    def start_worker(self, name: str, *, concurrency: int = 1, pool: str = "prefork",
                     env: dict[str, str] | None = None, wait: bool = True) -> subprocess.Popen:
        proc = self.spawn(["worker", "-n", f"{name}@%h", "-c", str(concurrency), "-P", pool,
                           "-l", "INFO"], name, env)
        if wait:
            self.wait_ready(proc)
        return proc

    def wait_ready(self, proc: subprocess.Popen, timeout: float = 60.0) -> None:
        log = self.logs[proc.pid]

        def ready() -> bool:
            if proc.poll() is not None:
                raise AssertionError(f"worker exited ({proc.returncode}):\n{self.tail(proc)}")
            return b" ready." in log.read_bytes()

        wait_for(ready, timeout, f"worker {log.stem} to be ready")

    def tail(self, proc: subprocess.Popen, n: int = 40) -> str:
        text = self.logs[proc.pid].read_text(errors="replace").splitlines()
        return "\n".join(text[-n:])

    def stop_all(self) -> None:
        for proc in self.procs:
            if proc.poll() is None:
                kill_tree(proc)
        self.engine.dispose()

    # runs ------------------------------------------------------------------

    def user(self, db) -> User:
        return db.get(User, self.user_id)

    def start_run(self, kind: str = "simulate", params: dict[str, Any] | None = None,
                  **kw: Any) -> int:
        with self.writer() as db:
            v = runs.create_run(db, self.user(db), self.scenario_id, kind=kind,
                                params=params or {}, now=datetime.now(UTC),
                                dispatch=self.dispatch, data_dir=self.settings.data_dir, **kw)
            db.commit()
            return v.run.id

    def run(self, run_id: int) -> Run:
        with self.factory() as db:
            run = db.get(Run, run_id)
            assert run is not None
            return run

    def units(self, run_id: int) -> list[RunTask]:
        with self.factory() as db:
            return list(db.query(RunTask).filter_by(run_id=run_id).order_by(RunTask.key))

    def wait(self, run_id: int, statuses=FINISHED, timeout: float = 90.0,
             check: Callable[[Run], bool] | None = None) -> Run:
        def done() -> Run | None:
            run = self.run(run_id)
            ok = run.status in statuses and (check is None or check(run))
            return run if ok else None

        try:
            return wait_for(done, timeout, f"run {run_id} to reach {statuses}", 0.2)
        except AssertionError:
            logs = "\n".join(f"--- {p.pid}\n{self.tail(p)}" for p in self.procs)
            raise AssertionError(f"run {run_id} is {self.run(run_id).status}\n{logs}") from None

    def log_text(self, run_id: int) -> str:
        with self.factory() as db:
            return runs.format_log(runs.run_log(db, self.user(db), run_id))
