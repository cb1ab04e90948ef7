"""Database set-up, migrations, the service commands, and real concurrent saves."""

from __future__ import annotations

import argparse
import threading
from datetime import UTC, datetime

import pytest
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from api_helpers import PASSWORD
from fastapi.testclient import TestClient
from sqlalchemy import delete, text
from sqlalchemy.exc import IntegrityError

from porecast import cli_service
from porecast.api.app import create_app
from porecast.db.migrate import current_revision, head_revision
from porecast.db.models import Base, Membership, Project, User
from porecast.db.session import make_engine, make_session_factory
from porecast.services import auth as auth_service
from porecast.services import projects as project_service
from porecast.settings import Settings


def test_migrations_match_the_models(engine):
    with engine.connect() as conn:
        assert current_revision(conn) == head_revision()
        diff = compare_metadata(MigrationContext.configure(conn), Base.metadata)
    assert diff == []


def test_sqlite_connection_pragmas(tmp_path):
    eng = make_engine(f"sqlite:///{tmp_path / 'p.sqlite'}")
    with eng.connect() as conn:
        assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
        assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
        assert conn.exec_driver_sql("PRAGMA busy_timeout").scalar() == 10_000
    eng.dispose()


def test_foreign_keys_enforced(connection):
    factory = make_session_factory(connection, join_transaction_mode="create_savepoint")
    with factory() as db:
        db.add(Membership(project_id=987654, user_id=987654, role="owner",
                          created_at=datetime.now(UTC)))
        with pytest.raises(IntegrityError):
            db.flush()


def _local_settings(tmp_path, **extra) -> Settings:
    return Settings(environment="test", data_dir=tmp_path / "data",
                    password_hash_profile="test-fast", frontend_dir=None, **extra)


def test_db_upgrade_createuser_and_login(tmp_path):
    settings = _local_settings(tmp_path)
    url = cli_service.db_upgrade(settings)
    assert url.endswith("porecast.sqlite")
    user_id = cli_service.create_user("firstuser", PASSWORD, admin=True, settings=settings)
    assert user_id == 1
    app = create_app(settings)
    with TestClient(app) as client:
        r = client.post("/api/auth/login", json={"username": "firstuser", "password": PASSWORD})
        assert r.status_code == 200 and r.json()["user"]["is_admin"] is True
    app.state.engine.dispose()


def test_argparse_commands(tmp_path, monkeypatch, capsys):
    monkeypatch.setenv("PORECAST_ENVIRONMENT", "test")
    monkeypatch.setenv("PORECAST_PASSWORD_HASH_PROFILE", "test-fast")
    parser = argparse.ArgumentParser()
    cli_service.add_service_commands(parser.add_subparsers(dest="command"))
    data = str(tmp_path / "d")
    args = parser.parse_args(["db", "upgrade", "--data-dir", data])
    assert args.handler(args) == 0
    args = parser.parse_args(["createuser", "ops", "--password", PASSWORD, "--data-dir", data])
    assert args.handler(args) == 0
    args = parser.parse_args(["createuser", "ops", "--password", PASSWORD, "--data-dir", data])
    assert args.handler(args) == 1  # name taken, plain message
    assert "taken" in capsys.readouterr().err
    args = parser.parse_args(["createuser", "x2", "--password", "short", "--data-dir", data])
    assert args.handler(args) == 1


def test_serve_builds_app_and_calls_worker_hook(tmp_path, monkeypatch):
    calls = []

    def hook(settings):
        calls.append("start")
        return lambda: calls.append("stop")

    def fake_run(app, host, port, **kw):
        calls.append((host, port, sorted(r.path for r in app.routes if hasattr(r, "path"))[:1]))

    monkeypatch.setattr(cli_service, "start_worker_hook", hook)
    cli_service.serve("127.0.0.1", 8123, settings=_local_settings(tmp_path), run=fake_run)
    assert calls[0] == "start" and calls[-1] == "stop"
    assert calls[1][:2] == ("127.0.0.1", 8123)


def test_frontend_and_plotly_served(tmp_path):
    front = tmp_path / "frontend"
    front.mkdir()
    (front / "index.html").write_text("<!doctype html><title>Porecast</title>")
    settings = _local_settings(tmp_path).model_copy(update={"frontend_dir": front})
    app = create_app(settings)
    with TestClient(app) as client:
        assert "Porecast" in client.get("/").text
        r = client.get("/vendor/plotly.min.js")
        assert r.status_code == 200 and "javascript" in r.headers["content-type"]
        assert client.get("/openapi.json").json()["info"]["title"] == "Porecast"
    app.state.engine.dispose()


def test_concurrent_saves_of_one_section_exactly_one_wins(engine, tmp_path):
    """Two writers with the same ETag at the same moment: one 200, one 412 (real engine)."""
    settings = _local_settings(tmp_path)
    app = create_app(settings, engine=engine)
    factory = make_session_factory(engine)
    now = app.state.clock()
    with factory() as db:
        users = [auth_service.create_user(db, f"race-{k}", PASSWORD, now=now,
                                          hasher=app.state.hasher) for k in range(2)]
        project = project_service.create_project(db, users[0], "Race", "", now=now)
        project_service.add_member(db, users[0], project.id, "race-1", "basin_modeller", now=now)
        tokens = [auth_service.create_token(db, u, "t", now=now)[1] for u in users]
        db.commit()
        project_id, user_ids = project.id, [u.id for u in users]
    try:
        clients = [TestClient(app, headers={"Authorization": f"Bearer {t}"}) for t in tokens]
        sid = clients[0].post(f"/api/projects/{project_id}/scenarios",
                              json={"name": "Race"}).json()["id"]
        for round_ in range(4):
            r = clients[0].get(f"/api/scenarios/{sid}/sections/burial")
            etag, data = r.headers["ETag"], r.json()["data"]
            results: list[int] = []
            start = threading.Barrier(2)

            def save(k: int, data=data, etag=etag, round_=round_, start=start,
                     results=results) -> None:
                body = dict(data, surface_temperature_c=10.0 + round_ + k / 10)
                start.wait()
                results.append(clients[k].put(f"/api/scenarios/{sid}/sections/burial",
                                              json={"data": body},
                                              headers={"If-Match": etag}).status_code)

            threads = [threading.Thread(target=save, args=(k,)) for k in range(2)]
            for t in threads:
                t.start()
            for t in threads:
                t.join()
            assert sorted(results) == [200, 412], results
        revs = clients[0].get(f"/api/scenarios/{sid}/revisions").json()
        assert [r["number"] for r in revs] == [5, 4, 3, 2, 1]
    finally:
        with factory() as db:
            db.execute(delete(Project).where(Project.id == project_id))
            db.execute(delete(User).where(User.id.in_(user_ids)))
            db.commit()
        with engine.connect() as conn:
            assert conn.execute(text("SELECT count(*) FROM projects")).scalar() == 0


def test_settings_file_and_environment_precedence(tmp_path, monkeypatch):
    from porecast.settings import load_settings

    path = tmp_path / "porecast.toml"
    path.write_text('environment = "test"\nmax_upload_mb = 64\nsession_idle_minutes = 5\n')
    monkeypatch.setenv("PORECAST_SESSION_IDLE_MINUTES", "7")
    s = load_settings(path, data_dir=tmp_path / "d")
    assert s.max_upload_mb == 64  # from the file
    assert s.session_idle_minutes == 7  # the environment wins over the file
    assert s.sqlalchemy_url == f"sqlite:///{(tmp_path / 'd' / 'porecast.sqlite').resolve()}"


def test_main_cli_runs_service_commands(tmp_path, monkeypatch):
    from porecast.cli import main

    monkeypatch.setenv("PORECAST_ENVIRONMENT", "test")
    monkeypatch.setenv("PORECAST_PASSWORD_HASH_PROFILE", "test-fast")
    data = str(tmp_path / "d")
    assert main(["db", "upgrade", "--data-dir", data]) == 0
    assert main(["createuser", "lead", "--password", PASSWORD, "--admin", "--data-dir", data]) == 0
