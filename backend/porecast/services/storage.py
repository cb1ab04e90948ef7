"""Files on disk tied to the database transaction that references them.

Uploads are stored under server-generated names (``uuid4().hex`` + suffix) in
``<data_dir>/files/<kind>/``, a folder that is never served. A file written for
a row is removed again if the transaction rolls back, and a file whose row is
deleted is removed only after the deletion commits, so the file store and the
database agree after any refused or failed request.
"""

from __future__ import annotations

import contextlib
import os
import uuid
from pathlib import Path

from sqlalchemy import event
from sqlalchemy.orm import Session

_NEW = "porecast_new_files"
_DOOMED = "porecast_doomed_files"


def new_file_name(suffix: str) -> str:
    """A fresh server-side file name (the client's file name is never used on disk)."""
    return uuid.uuid4().hex + suffix


def stored_path(files_dir: Path, kind: str, file_name: str) -> Path:
    """Where a stored file of ``kind`` ("wells", "grids") lives."""
    if "/" in file_name or "\\" in file_name or file_name.startswith("."):
        raise ValueError(f"bad stored file name {file_name!r}")
    return files_dir / kind / file_name


def remove_on_rollback(db: Session, path: Path) -> None:
    """Delete ``path`` if the session's transaction rolls back."""
    db.info.setdefault(_NEW, []).append(path)


def remove_after_commit(db: Session, path: Path) -> None:
    """Delete ``path`` once the session's transaction has committed."""
    db.info.setdefault(_DOOMED, []).append(path)


def _unlink(path: Path) -> None:
    with contextlib.suppress(FileNotFoundError):
        os.unlink(path)


@event.listens_for(Session, "after_commit")
def _after_commit(session: Session) -> None:
    for path in session.info.pop(_DOOMED, []):
        _unlink(path)
    session.info.pop(_NEW, None)


@event.listens_for(Session, "after_rollback")
def _after_rollback(session: Session) -> None:
    for path in session.info.pop(_NEW, []):
        _unlink(path)
    session.info.pop(_DOOMED, None)
