"""Helpers shared by the demo tests (imported by name, like tests/api/api_helpers.py)."""

from __future__ import annotations

import contextlib
import io


def run_cli(args: list[str]) -> tuple[int, str]:
    """``porecast ARGS`` in-process; returns the exit status and what it printed."""
    from porecast.cli import main

    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        status = main(args)
    return status, buf.getvalue()
