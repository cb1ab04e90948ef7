"""Time a round trip of small Celery tasks through the brokers that need no server.

Run from the repository root::

    python3 deploy/measure_broker.py                   # 50 tasks, 3 repeats, 1 s polling
    python3 deploy/measure_broker.py --poll 0.1        # both transports polling every 0.1 s

For each candidate (kombu's SQLAlchemy transport on a SQLite file, and its
``filesystem://`` transport), the script starts one real ``celery worker``
process (prefork pool, two processes, prefetch multiplier 1, late
acknowledgement: the settings Porecast's worker uses), waits until the worker
answers, then sends N tasks that each return a small value and waits for all
results through a ``db+sqlite`` result backend. It prints the wall time of the
round trip of all N tasks (send -> executed -> result read back) per repeat and
the median. Nothing here is imported by the application; the figures are the
ones quoted in ``porecast/worker/app.py``.

Idle polling: the filesystem transport takes ``polling_interval`` as a
transport option. kombu's SQLAlchemy transport hands every option it does not
know to ``create_engine``, which refuses ``polling_interval``, so the
application could only change its 1 s default by patching the transport class;
``--poll`` does that here (in the measuring processes only) for a like-for-like
comparison.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from celery import Celery


def transport_options(broker: str, folder: Path, poll_s: float) -> dict:
    """Broker options of a candidate (the filesystem folders Porecast uses)."""
    if not broker.startswith("filesystem"):
        return {}
    folders = {name: folder / name for name in ("queue", "processed", "control")}
    for p in folders.values():
        p.mkdir(parents=True, exist_ok=True)
    return {"polling_interval": poll_s, "data_folder_in": str(folders["queue"]),
            "data_folder_out": str(folders["queue"]), "store_processed": True,
            "processed_folder": str(folders["processed"]),
            "control_folder": str(folders["control"])}


def make_app(broker: str, backend: str, folder: Path, poll_s: float) -> Celery:
    """A Celery app with one trivial task."""
    if broker.startswith("sqla"):
        from kombu.transport import sqlalchemy as sqla

        sqla.Transport.polling_interval = poll_s
    app = Celery("measure", broker=broker, backend=backend)
    app.conf.update(
        broker_transport_options=transport_options(broker, folder, poll_s),
        task_acks_late=True,
        task_reject_on_worker_lost=True,
        worker_prefetch_multiplier=1,
        broker_connection_retry_on_startup=True,
    )

    @app.task(name="measure.echo")
    def echo(i: int) -> int:
        return i + 1

    return app


if "MEASURE_BROKER" in os.environ:
    # the worker subprocess imports this module (``-A measure_broker:worker_app``)
    worker_app = make_app(os.environ["MEASURE_BROKER"], os.environ["MEASURE_BACKEND"],
                          Path(os.environ["MEASURE_FOLDER"]), float(os.environ["MEASURE_POLL"]))


def measure(name: str, broker: str, backend: str, folder: Path, n_tasks: int, repeats: int,
            poll_s: float) -> list[float]:
    """Round-trip times (s) of ``n_tasks`` tasks, ``repeats`` times."""
    app = make_app(broker, backend, folder, poll_s)
    env = dict(os.environ, MEASURE_BROKER=broker, MEASURE_BACKEND=backend,
               MEASURE_FOLDER=str(folder), MEASURE_POLL=str(poll_s))
    with open(folder / "worker.log", "w") as log:
        worker = subprocess.Popen(
            [sys.executable, "-m", "celery", "-A", "measure_broker:worker_app", "worker",
             "-P", "prefork", "-c", "2", "-n", f"measure-{name}@%h", "--without-gossip",
             "--without-mingle", "--without-heartbeat", "-l", "WARNING"],
            cwd=Path(__file__).resolve().parent, env=env, stdout=log, stderr=subprocess.STDOUT)
        try:
            app.send_task("measure.echo", args=(0,)).get(timeout=60, interval=0.05)  # warm-up
            times = []
            for _ in range(repeats):
                t0 = time.perf_counter()
                results = [app.send_task("measure.echo", args=(i,)) for i in range(n_tasks)]
                values = [r.get(timeout=300, interval=0.02) for r in results]
                times.append(time.perf_counter() - t0)
                if values != [i + 1 for i in range(n_tasks)]:
                    raise RuntimeError(f"{name}: wrong results")
            return times
        finally:
            worker.terminate()
            try:
                worker.wait(20)
            except subprocess.TimeoutExpired:
                worker.kill()
                worker.wait()


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--tasks", type=int, default=50)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--poll", type=float, default=1.0, help="idle polling interval, s")
    args = parser.parse_args()
    root = Path(tempfile.mkdtemp(prefix="porecast-broker-"))
    try:
        print(f"{args.tasks} tasks per round trip, {args.repeats} repeats, {os.cpu_count()} "
              f"CPUs, idle polling every {args.poll:g} s")
        for name in ("sqlite", "filesystem"):
            folder = root / name
            folder.mkdir()
            broker = "filesystem://" if name == "filesystem" else \
                f"sqla+sqlite:///{folder / 'broker.sqlite'}"
            backend = f"db+sqlite:///{folder / 'results.sqlite'}"
            times = measure(name, broker, backend, folder, args.tasks, args.repeats, args.poll)
            med = statistics.median(times)
            print(f"{name:<11} " + "  ".join(f"{t:6.2f} s" for t in times)
                  + f"   median {med:.2f} s ({med / args.tasks * 1000:.0f} ms per task)")
    finally:
        shutil.rmtree(root, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
