"""Health check of a worker: ``python -m porecast.worker.health [--name porecast@HOST]``.

Pings the worker through the broker's remote control (Redis, or the filesystem
broker of one machine) with the settings of the environment, and exits 0 when it
answers within the timeout, 1 otherwise. ``docker-compose.yml`` uses it as the
worker's health check.
"""

from __future__ import annotations

import argparse
import socket
import sys
from collections.abc import Sequence

from porecast.settings import load_settings

from .app import make_celery


def ping(name: str, timeout: float = 5.0) -> bool:
    """Whether the worker ``name`` answers a ping within ``timeout`` seconds."""
    app = make_celery(load_settings())
    replies = app.control.ping(destination=[name], timeout=timeout)
    return any(name in reply for reply in replies)


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--name", default=f"porecast@{socket.gethostname()}",
                        help="worker name as given to `porecast worker -n` (default %(default)s)")
    parser.add_argument("--timeout", type=float, default=5.0, help="seconds (default 5)")
    args = parser.parse_args(argv)
    ok = ping(args.name, args.timeout)
    print(f"{args.name}: {'ok' if ok else 'no answer'}")
    return 0 if ok else 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
