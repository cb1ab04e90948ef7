"""Atomic file output: write to a temporary file, rename on success.

Every writer in :mod:`porecast.io` (and the CLI and worker that reuse it) writes
through :func:`atomic_path`, so a crash, an exception or a refused input never
leaves a half-written result under the final name.
"""

from __future__ import annotations

import os
import secrets
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

__all__ = ["atomic_path"]


def _create_temp(final: Path) -> Path:
    """Create an empty, exclusive temporary file next to ``final``.

    The name keeps the final suffix (``np.save`` appends ``.npy`` to names
    that lack it) and starts with a dot so directory listings hide it. The
    file is created with mode 0o666 filtered by the process umask, so the
    renamed result has the same permissions as an ordinary new file.
    """
    for _ in range(100):
        tmp = final.with_name(f".{final.stem}.{secrets.token_hex(6)}.tmp{final.suffix}")
        try:
            fd = os.open(tmp, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o666)
        except FileExistsError:
            continue
        os.close(fd)
        return tmp
    raise FileExistsError(f"could not create a temporary file next to {final}")


def _fsync_file(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_dir(directory: Path) -> None:
    try:
        fd = os.open(directory, os.O_RDONLY)
    except OSError:  # some platforms cannot open directories
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


@contextmanager
def atomic_path(final_path: str | os.PathLike[str], *, fsync: bool = True) -> Iterator[Path]:
    """Yield a temporary path that replaces ``final_path`` when the block succeeds.

    The temporary file is created (empty) in the directory of ``final_path``,
    so the closing :func:`os.replace` is a same-filesystem rename and is atomic
    on POSIX and Windows. If the block raises anything (including
    ``KeyboardInterrupt``) the temporary file is removed and the exception
    propagates; ``final_path`` is then untouched.

    Parameters
    ----------
    final_path : str or path-like
        Where the finished file should appear. Its directory must exist.
    fsync : bool, default True
        Flush the temporary file and the directory to disk around the rename,
        so the result survives a power cut as well as a crash.

    Yields
    ------
    pathlib.Path
        The temporary file to write; open it by name (``"wb"``, ``"w+"``...).

    Raises
    ------
    FileNotFoundError
        If the directory of ``final_path`` does not exist.

    Examples
    --------
    >>> with atomic_path("out/posterior.npy") as tmp:  # doctest: +SKIP
    ...     np.save(tmp, array)
    """
    final = Path(final_path)
    if not final.parent.is_dir():
        raise FileNotFoundError(
            f"output directory {final.parent} does not exist (for {final.name})"
        )
    if final.is_dir():
        raise IsADirectoryError(f"output path {final} is a directory")
    tmp = _create_temp(final)
    try:
        yield tmp
        if not tmp.exists():
            raise FileNotFoundError(
                f"temporary output {tmp} vanished before it could become {final}"
            )
        if fsync:
            _fsync_file(tmp)
        os.replace(tmp, final)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    if fsync:
        _fsync_dir(final.parent)
