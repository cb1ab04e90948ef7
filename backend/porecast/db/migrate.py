"""Programmatic Alembic: ``upgrade`` to head with the scripts shipped in the package."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory

MIGRATIONS_DIR = Path(__file__).resolve().parent / "migrations"


def alembic_config(url: str | None = None, connection: Any = None) -> Config:
    """An Alembic ``Config`` pointing at the package's migrations."""
    cfg = Config(str(MIGRATIONS_DIR / "alembic.ini"))
    cfg.set_main_option("script_location", str(MIGRATIONS_DIR))
    if url is not None:
        # ConfigParser interpolation: a literal % in a password must be doubled.
        cfg.set_main_option("sqlalchemy.url", url.replace("%", "%%"))
    if connection is not None:
        cfg.attributes["connection"] = connection
    return cfg


def upgrade(url: str | None = None, *, connection: Any = None, revision: str = "head") -> None:
    """Apply migrations up to ``revision`` on ``url`` or an open ``connection``."""
    if url is None and connection is None:
        raise ValueError("give a database url or an open connection")
    command.upgrade(alembic_config(url, connection), revision)


def head_revision() -> str:
    """The newest revision id shipped with the package."""
    heads = ScriptDirectory.from_config(alembic_config()).get_heads()
    if len(heads) != 1:
        raise RuntimeError(f"migrations have {len(heads)} heads; merge them")
    return heads[0]


def current_revision(connection: Any) -> str | None:
    """The revision a database is at (None when never migrated)."""
    return MigrationContext.configure(connection).get_current_revision()
