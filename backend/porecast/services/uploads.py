"""Receiving uploaded files: size limits enforced while streaming to disk.

The declared ``Content-Length`` is checked before a single byte is read; bodies
without one (chunked transfer) are counted while they are written and abandoned
as soon as they pass the limit. The upload is written to a private temporary
folder under the data directory, under the client's base name (so parser
messages name the file the user knows), and removed by :func:`discard`.
"""

from __future__ import annotations

import re
import shutil
import uuid
from collections.abc import AsyncIterator
from pathlib import Path

from .errors import InvalidInput, TooLarge

_SAFE = re.compile(r"[^A-Za-z0-9._\- ]+")


def safe_filename(filename: str | None) -> str:
    """The client's base name reduced to harmless characters (for messages and temp files)."""
    base = (filename or "").replace("\\", "/").rsplit("/", 1)[-1].strip()
    base = _SAFE.sub("_", base).lstrip(".")[:200]
    if not base:
        raise InvalidInput("the upload needs a file name", [{"loc": "filename", "msg": "missing"}])
    return base


def _limit_message(limit: int) -> str:
    return f"the upload is larger than the limit of {limit / 1024 / 1024:g} MiB"


async def receive_upload(
    chunks: AsyncIterator[bytes],
    *,
    filename: str,
    declared_length: int | None,
    limit: int,
    tmp_dir: Path,
) -> Path:
    """Write an upload body to a temporary file and return its path.

    Raises ``TooLarge`` (before reading anything when the declared length is over
    the limit) and ``InvalidInput`` for an empty body. On any error nothing is
    left on disk.
    """
    if declared_length is not None and declared_length > limit:
        raise TooLarge(_limit_message(limit))
    folder = tmp_dir / uuid.uuid4().hex
    folder.mkdir(parents=True)
    path = folder / safe_filename(filename)
    received = 0
    try:
        with open(path, "wb") as out:
            async for chunk in chunks:
                received += len(chunk)
                if received > limit:
                    raise TooLarge(_limit_message(limit))
                out.write(chunk)
        if received == 0:
            raise InvalidInput(f"{path.name} is empty", [{"loc": "body", "msg": "empty file"}])
    except BaseException:
        discard(path)
        raise
    return path


def discard(path: Path) -> None:
    """Remove a temporary upload and its private folder."""
    shutil.rmtree(path.parent, ignore_errors=True)
