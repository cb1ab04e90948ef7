"""Fixtures of the API suite: a real database (SQLite, and PostgreSQL when configured).

The schema is built once per database by the Alembic migrations; every test runs
inside an outer transaction that is rolled back at its end, and the app's
sessions join it with SAVEPOINTs (SQLAlchemy's "joining a session into an
external transaction" recipe), so a test sees only its own rows. Each test gets
its own data folder. Password hashing uses the TEST-ONLY cheap argon2 profile;
``test_api_auth.py`` checks the production parameters separately.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest
from api_helpers import PASSWORD, ROLES
from fastapi.testclient import TestClient
from sqlalchemy import Connection, Engine, text

from porecast.api.app import create_app
from porecast.db.migrate import upgrade
from porecast.db.session import make_engine, make_session_factory
from porecast.services import auth as auth_service
from porecast.services import projects as project_service
from porecast.settings import Settings


def need_service(available: bool, reason: str) -> None:
    """Skip when a service is missing; fail instead under PORECAST_REQUIRE_SERVICES=1.

    Same rule as ``tests/conftest.py`` (which this folder cannot import by name).
    """
    if available:
        return
    if os.environ.get("PORECAST_REQUIRE_SERVICES") == "1":
        pytest.fail(f"required service missing in CI: {reason}")
    pytest.skip(reason)


class FakeClock:
    """A clock the tests move by hand (sessions, timeouts, timestamps)."""

    def __init__(self) -> None:
        self.now = datetime(2026, 3, 1, 9, 0, tzinfo=UTC)

    def __call__(self) -> datetime:
        return self.now

    def advance(self, **delta: float) -> None:
        self.now += timedelta(**delta)


PG_SCHEMA = "porecast_api_tests"


def _postgres_engine() -> Engine:
    """An engine whose connections work in a private schema, rebuilt for this run."""
    url = os.environ.get("PORECAST_TEST_DATABASE_URL")
    need_service(bool(url), "PORECAST_TEST_DATABASE_URL is not set (PostgreSQL tests)")
    engine = make_engine(url, connect_args={"options": f"-csearch_path={PG_SCHEMA}"})
    try:
        with engine.begin() as conn:
            conn.execute(text(f"DROP SCHEMA IF EXISTS {PG_SCHEMA} CASCADE"))
            conn.execute(text(f"CREATE SCHEMA {PG_SCHEMA}"))
    except Exception as exc:  # noqa: BLE001 - any connection failure means "no server"
        engine.dispose()
        need_service(False, f"PostgreSQL at {url} is not reachable: {exc}")
    return engine


@pytest.fixture(scope="session",
                params=["sqlite", pytest.param("postgres", marks=pytest.mark.postgres)])
def engine(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory
           ) -> Iterator[Engine]:
    """A migrated database per backend, shared by the whole session."""
    if request.param == "sqlite":
        path = tmp_path_factory.mktemp("db") / "porecast-test.sqlite"
        eng = make_engine(f"sqlite:///{path}")
    else:
        eng = _postgres_engine()
    with eng.connect() as conn:
        upgrade(connection=conn)
        conn.commit()
    yield eng
    eng.dispose()


@pytest.fixture
def connection(engine: Engine) -> Iterator[Connection]:
    """An outer transaction rolled back after the test."""
    conn = engine.connect()
    outer = conn.begin()
    try:
        yield conn
    finally:
        outer.rollback()
        conn.close()


@pytest.fixture
def clock() -> FakeClock:
    return FakeClock()


@pytest.fixture
def settings(tmp_path: Path) -> Settings:
    return Settings(
        environment="test",
        data_dir=tmp_path / "data",
        password_hash_profile="test-fast",  # TEST ONLY: cheap argon2
        login_failure_delay_seconds=0.0,
        max_upload_mb=1.0,
        frontend_dir=None,
    )


def build_app(settings: Settings, connection: Connection, clock: FakeClock) -> Any:
    """A fresh app whose sessions join the test's transaction."""
    app = create_app(settings, clock=clock, engine=connection)
    app.state.session_factory = make_session_factory(
        connection, join_transaction_mode="create_savepoint"
    )
    return app


@pytest.fixture
def make_app() -> Any:
    """The app builder, for tests that need their own settings."""
    return build_app


@pytest.fixture(scope="session")
def shared_app(engine: Engine, tmp_path_factory: pytest.TempPathFactory) -> Any:
    """One app per database, built once (building routes costs ~0.3 s); the per-test
    fixture swaps its settings, clock and session factory in ``app.state``."""
    base = Settings(environment="test", data_dir=tmp_path_factory.mktemp("app"),
                    password_hash_profile="test-fast", max_upload_mb=1.0, frontend_dir=None)
    return create_app(base, engine=engine)


@pytest.fixture
def app(shared_app: Any, settings: Settings, connection: Connection, clock: FakeClock) -> Any:
    assert settings.max_upload_mb == shared_app.state.settings.max_upload_mb
    settings.files_dir.mkdir(parents=True, exist_ok=True)
    settings.tmp_dir.mkdir(parents=True, exist_ok=True)
    shared_app.state.settings = settings
    shared_app.state.clock = clock
    shared_app.state.session_factory = make_session_factory(
        connection, join_transaction_mode="create_savepoint"
    )
    return shared_app


@pytest.fixture
def db(app: Any) -> Iterator[Any]:
    """A session in the test's transaction, for arranging rows and checking them."""
    session = app.state.session_factory()
    try:
        yield session
    finally:
        session.close()


@pytest.fixture
def anon(app: Any) -> Iterator[TestClient]:
    with TestClient(app) as client:
        yield client


@dataclass
class Team:
    """One project with a member per role, an outsider in another project and an admin."""

    project_id: int
    other_project_id: int
    users: dict[str, Any]
    tokens: dict[str, str]
    clients: dict[str, TestClient]

    def __getitem__(self, role: str) -> TestClient:
        return self.clients[role]


def make_user(db: Any, app: Any, username: str, *, admin: bool = False) -> Any:
    return auth_service.create_user(db, username, PASSWORD, now=app.state.clock(),
                                    hasher=app.state.hasher, is_admin=admin)


def bearer_client(app: Any, token: str) -> TestClient:
    return TestClient(app, headers={"Authorization": f"Bearer {token}"})


@pytest.fixture
def team(app: Any, db: Any) -> Iterator[Team]:
    now = app.state.clock()
    users = {role: make_user(db, app, role) for role in ROLES}
    users["outsider"] = make_user(db, app, "outsider")
    users["admin"] = make_user(db, app, "admin", admin=True)
    project = project_service.create_project(db, users["owner"], "Test project", "", now=now)
    for role in ROLES[1:]:
        project_service.add_member(db, users["owner"], project.id, role, role, now=now)
    other = project_service.create_project(db, users["outsider"], "Other", "", now=now)
    tokens = {}
    for name, user in users.items():
        _, raw = auth_service.create_token(db, user, "tests", now=now)
        tokens[name] = raw
    db.commit()
    clients = {name: bearer_client(app, raw) for name, raw in tokens.items()}
    clients["anonymous"] = TestClient(app)
    try:
        yield Team(project.id, other.id, users, tokens, clients)
    finally:
        for c in clients.values():
            c.close()


@pytest.fixture
def scenario(team: Team) -> dict[str, Any]:
    """A scenario created from the bundled example by the owner."""
    r = team["owner"].post(f"/api/projects/{team.project_id}/scenarios",
                           json={"name": "Base case"})
    assert r.status_code == 201, r.text
    return r.json()
