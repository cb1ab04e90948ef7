"""Engine and session factories.

SQLite (one machine): every connection gets ``foreign_keys=ON``, WAL journal and
a busy timeout. pysqlite's own transaction handling is switched off and SQLAlchemy
emits ``BEGIN`` itself (the SQLAlchemy documentation's recipe for SAVEPOINT and
transactional DDL on pysqlite); a session opened with ``write=True`` begins with
``BEGIN IMMEDIATE`` so read-then-write transactions wait for the write lock up
front instead of failing when another writer committed in between.

PostgreSQL (many machines): ``postgresql+psycopg://`` URLs, default READ
COMMITTED; conditional updates (``WHERE revision = :expected``) give
compare-and-swap semantics there.
"""

from __future__ import annotations

from typing import Any

from sqlalchemy import Engine, create_engine, event
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session, sessionmaker

SQLITE_BUSY_TIMEOUT_MS = 10_000
WRITE_OPTION = "porecast_write"


def _install_sqlite_listeners(engine: Engine) -> None:
    @event.listens_for(engine, "connect")
    def _on_connect(dbapi_connection: Any, _record: Any) -> None:
        dbapi_connection.isolation_level = None  # SQLAlchemy emits BEGIN itself
        cursor = dbapi_connection.cursor()
        cursor.execute("PRAGMA foreign_keys=ON")
        cursor.execute(f"PRAGMA busy_timeout={SQLITE_BUSY_TIMEOUT_MS}")
        if engine.url.database not in (None, "", ":memory:"):
            cursor.execute("PRAGMA journal_mode=WAL")
            cursor.execute("PRAGMA synchronous=NORMAL")
        cursor.close()

    @event.listens_for(engine, "begin")
    def _on_begin(conn: Any) -> None:
        immediate = conn.get_execution_options().get(WRITE_OPTION, False)
        conn.exec_driver_sql("BEGIN IMMEDIATE" if immediate else "BEGIN")


def make_engine(url: str, **kwargs: Any) -> Engine:
    """Create an engine for ``url`` with the per-backend settings above."""
    parsed = make_url(url)
    if parsed.get_backend_name() == "sqlite":
        connect_args = kwargs.pop("connect_args", {})
        connect_args.setdefault("check_same_thread", False)
        engine = create_engine(url, connect_args=connect_args, **kwargs)
        _install_sqlite_listeners(engine)
        return engine
    kwargs.setdefault("pool_pre_ping", True)
    return create_engine(url, **kwargs)


def make_session_factory(bind: Any, **kwargs: Any) -> sessionmaker[Session]:
    """A session factory; ``expire_on_commit=False`` keeps loaded rows usable."""
    kwargs.setdefault("expire_on_commit", False)
    return sessionmaker(bind=bind, **kwargs)


def open_session(factory: sessionmaker[Session], *, write: bool = False) -> Session:
    """Open a session; ``write=True`` takes the SQLite write lock at BEGIN."""
    session = factory()
    if write and session.get_bind().dialect.name == "sqlite":
        session.connection(execution_options={WRITE_OPTION: True})
    return session
