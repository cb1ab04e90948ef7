"""Service commands of the ``porecast`` CLI: ``serve``, ``worker``, ``createuser``, ``db upgrade``.

The functions take plain arguments so they can be called from code and tests;
:func:`add_service_commands` registers them on the main parser's sub-parsers.
Each handler returns a process exit status.
"""

from __future__ import annotations

import argparse
import getpass
import os
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

from porecast.settings import Settings, load_settings

#: Hook for the worker step: ``porecast serve`` calls it (with the settings)
#: before starting the web server, e.g. to start a Celery worker process for
#: the one-machine set-up. It returns a callable that stops what it started.
StartWorker = Callable[[Settings], Callable[[], None]]


def start_local_worker(settings: Settings) -> Callable[[], None]:
    """Recover runs left by a previous server, start ``porecast worker`` as a child process."""
    from porecast.worker.local import start_local_worker as start

    return start(settings)


start_worker_hook: StartWorker | None = start_local_worker


def db_upgrade(settings: Settings | None = None, revision: str = "head") -> str:
    """Apply the Alembic migrations to the configured database; returns the URL used."""
    from porecast.db.migrate import upgrade

    settings = settings or load_settings()
    settings.data_dir.mkdir(parents=True, exist_ok=True)
    upgrade(settings.sqlalchemy_url, revision=revision)
    return settings.sqlalchemy_url


def create_user(
    username: str,
    password: str,
    *,
    email: str | None = None,
    admin: bool = False,
    settings: Settings | None = None,
) -> int:
    """Create an account in the configured database; returns the new user id."""
    from porecast.api.deps import utc_now
    from porecast.db.session import make_engine, make_session_factory
    from porecast.services.auth import create_user as create
    from porecast.services.auth import password_hasher

    settings = settings or load_settings()
    engine = make_engine(settings.sqlalchemy_url)
    try:
        with make_session_factory(engine)() as db:
            user = create(db, username, password, now=utc_now(), email=email, is_admin=admin,
                          hasher=password_hasher(settings.password_hash_profile))
            db.commit()
            return user.id
    finally:
        engine.dispose()


def serve(
    host: str = "127.0.0.1",
    port: int = 8000,
    *,
    data_dir: str | Path | None = None,
    upgrade_db: bool = True,
    settings: Settings | None = None,
    run: Callable[..., Any] | None = None,
    start_worker: bool = True,
) -> None:
    """Run the web app with uvicorn (migrating the database first).

    ``start_worker_hook`` (by default: recover runs left by a previous server and
    start a local ``porecast worker``) is called before the server starts and its
    stop function after it ends; ``start_worker=False`` skips it (workers run
    elsewhere).
    """
    import uvicorn

    from porecast.api.app import create_app

    overrides: dict[str, Any] = {}
    if data_dir is not None:
        overrides["data_dir"] = Path(data_dir)
    settings = settings or load_settings(**overrides)
    if upgrade_db:
        db_upgrade(settings)
    hook = start_worker_hook if start_worker else None
    stop = hook(settings) if hook is not None else None
    try:
        (run or uvicorn.run)(create_app(settings), host=host, port=port, proxy_headers=True)
    finally:
        if stop is not None:
            stop()


# --------------------------------------------------------------------------- argparse


def _settings_from(args: argparse.Namespace) -> Settings:
    overrides: dict[str, Any] = {}
    if getattr(args, "data_dir", None):
        overrides["data_dir"] = Path(args.data_dir)
    if getattr(args, "database_url", None):
        overrides["database_url"] = args.database_url
    return load_settings(getattr(args, "settings", None), **overrides)


def _job_settings_file(args: argparse.Namespace) -> None:
    # The job settings (porecast.worker.config) and a local worker process read the
    # settings file named in the environment, like porecast.settings does.
    if getattr(args, "settings", None):
        os.environ["PORECAST_SETTINGS_FILE"] = str(Path(args.settings).resolve())


def _cmd_serve(args: argparse.Namespace) -> int:
    _job_settings_file(args)
    serve(args.host, args.port, settings=_settings_from(args), upgrade_db=not args.no_upgrade,
          start_worker=not args.no_worker)
    return 0


def _cmd_worker(args: argparse.Namespace) -> int:
    from porecast.worker.local import run_worker

    _job_settings_file(args)
    return run_worker(_settings_from(args), hostname=args.hostname,
                      concurrency=args.concurrency, pool=args.pool, loglevel=args.loglevel)


def _cmd_createuser(args: argparse.Namespace) -> int:
    from porecast.services.errors import ServiceError

    password = args.password or os.environ.get("PORECAST_NEW_USER_PASSWORD")
    if not password:
        if not sys.stdin.isatty():
            print("error: give --password, PORECAST_NEW_USER_PASSWORD or run interactively",
                  file=sys.stderr)
            return 2
        password = getpass.getpass("Password: ")
        if password != getpass.getpass("Repeat password: "):
            print("error: the passwords differ", file=sys.stderr)
            return 2
    try:
        user_id = create_user(args.username, password, email=args.email, admin=args.admin,
                              settings=_settings_from(args))
    except ServiceError as exc:
        print(f"error: {exc.detail}", file=sys.stderr)
        return 1
    print(f"created user {args.username} (id {user_id}{', administrator' if args.admin else ''})")
    return 0


def _cmd_db(args: argparse.Namespace) -> int:
    url = db_upgrade(_settings_from(args), revision=args.revision)
    print(f"database at {url.split('@')[-1]} is at revision {args.revision}")
    return 0


def _common(p: argparse.ArgumentParser) -> None:
    p.add_argument("--data-dir", help="data folder (default: PORECAST_DATA_DIR or ./porecast-data)")
    p.add_argument("--database-url", help="SQLAlchemy URL (default: SQLite in the data folder)")
    p.add_argument("--settings", help="settings file (TOML or JSON)")


def add_service_commands(subparsers: Any) -> None:
    """Register ``serve``, ``createuser`` and ``db`` on the main parser's sub-parsers.

    Each sub-parser sets ``handler`` (the main CLI's convention), a function
    ``(args) -> exit status``.
    """
    p = subparsers.add_parser("serve", help="run the web application")
    p.add_argument("--host", default="127.0.0.1", help="bind address (default %(default)s)")
    p.add_argument("--port", type=int, default=8000, help="port (default %(default)s)")
    p.add_argument("--no-upgrade", action="store_true", help="do not migrate the database")
    p.add_argument("--no-worker", action="store_true",
                   help="start no local worker (workers run as `porecast worker` elsewhere)")
    _common(p)
    p.set_defaults(handler=_cmd_serve)

    p = subparsers.add_parser("worker", help="run a worker that executes runs (Celery)")
    p.add_argument("-n", "--hostname", default="porecast@%h",
                   help="worker name, unique per worker (default %(default)s; %%h = host name)")
    p.add_argument("-c", "--concurrency", type=int, default=None,
                   help="processes (default: PORECAST_WORKER_CONCURRENCY or one per CPU)")
    p.add_argument("-P", "--pool", choices=("prefork", "solo"), default=None,
                   help="pool (default: PORECAST_WORKER_POOL or prefork)")
    p.add_argument("-l", "--loglevel", default="INFO", help="log level (default %(default)s)")
    _common(p)
    p.set_defaults(handler=_cmd_worker)

    p = subparsers.add_parser("createuser", help="create a user account")
    p.add_argument("username")
    p.add_argument("--email")
    p.add_argument("--password", help="(else PORECAST_NEW_USER_PASSWORD or a prompt)")
    p.add_argument("--admin", action="store_true", help="site administrator")
    _common(p)
    p.set_defaults(handler=_cmd_createuser)

    p = subparsers.add_parser("db", help="database maintenance")
    db_sub = p.add_subparsers(dest="db_command", required=True)
    up = db_sub.add_parser("upgrade", help="apply migrations (Alembic)")
    up.add_argument("revision", nargs="?", default="head")
    _common(up)
    up.set_defaults(handler=_cmd_db)
