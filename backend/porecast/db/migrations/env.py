"""Alembic environment: runs migrations on a connection given by the caller or a URL.

``porecast.db.migrate.upgrade`` passes either an open connection
(``config.attributes["connection"]``) or the URL (``sqlalchemy.url``); the
engine is built with ``porecast.db.session.make_engine`` so SQLite gets the same
pragmas as the application.
"""

from __future__ import annotations

from alembic import context

from porecast.db.models import Base
from porecast.db.session import make_engine

config = context.config
target_metadata = Base.metadata


def _run(connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=target_metadata,
        render_as_batch=connection.dialect.name == "sqlite",
        compare_type=True,
    )
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_offline() -> None:
    context.configure(
        url=config.get_main_option("sqlalchemy.url"),
        target_metadata=target_metadata,
        literal_binds=True,
    )
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_online() -> None:
    connection = config.attributes.get("connection")
    if connection is not None:
        _run(connection)
        return
    url = config.get_main_option("sqlalchemy.url")
    if not url:
        raise RuntimeError("no database URL: pass one to porecast.db.migrate.upgrade")
    engine = make_engine(url)
    try:
        with engine.connect() as conn:
            _run(conn)
            conn.commit()
    finally:
        engine.dispose()


if context.is_offline_mode():
    run_migrations_offline()
else:
    run_migrations_online()
