"""Run bookkeeping in the database: units of work, claims, progress, completion, recovery.

The database, not the broker, is the record of what a run has done. A run is
split into units of work (rows of ``run_tasks``): ``main`` (a whole simulate,
map classification, calibration, summary or sensitivity analysis; for a cube,
the training and the tile plan), ``tile-NNNNN`` (a trace range of a cube) and
``join`` (merging the tiles). A broker message only says "work on unit (run,
key)"; every message can arrive twice (late acknowledgement re-delivers a task
whose worker died, and the recovery sweep below re-sends units it believes
lost), so handling is idempotent:

* **Claim with a delivery counter.** A worker starting a unit increments
  ``deliveries`` and commits before any work. A unit already finished is a
  no-op; a unit held by a live process is left alone (the duplicate is dropped);
  a unit held by a dead process is taken over. A unit that would start for the
  ``max_deliveries + 1``-th time fails its run instead, so a task that keeps
  killing its worker ends FAILED rather than looping.
* **Liveness.** The holder's host and pid are stored with a heartbeat: on the
  same host a dead pid means lost at once; on another host a heartbeat older
  than the lease means lost.
* **Results.** A step writes into its own staging folder and renames the files
  into the run folder when complete; only then is the unit marked done, in a
  transaction that checks the claim is still the current one (so exactly one
  delivery records success, and one set of files exists).
* **Joining tiles: an application-level counter**, not a Celery chord. The
  transaction that marks a tile done (under the run row lock) counts the tiles
  not yet done; the one that sees zero flips the ``join`` unit from waiting to
  queued and sends it after commit. A chord would keep the join's trigger in
  the result backend (with the SQLite result backend Celery emulates it with a
  ``chord_unlock`` task polling once a second), would not know about tiles
  re-delivered after a crash, and would duplicate state the database has to keep
  anyway for progress and for restarts.
* **Every write locks the run row first** (``SELECT ... FOR UPDATE`` on
  PostgreSQL; SQLite write sessions begin with ``BEGIN IMMEDIATE``), so tile
  counts, monotonic progress and status changes are serialised per run.

Messages are sent only after the transaction that makes their unit runnable has
committed; a unit whose message could not be sent keeps ``sent_at`` empty and is
sent by the next sweep.
"""

from __future__ import annotations

import os
import socket
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any, NamedTuple, Protocol

import psutil
from sqlalchemy import func, select, update
from sqlalchemy.orm import Session, sessionmaker

from porecast.db.models import Run, RunEvent, RunTask, Scenario, ScenarioRevision, User
from porecast.db.session import open_session

from . import activity

#: Progress of a running run is counted in thousandths of the whole run.
PROGRESS_TOTAL = 1000
#: Celery task name of each kind of unit.
TASK_NAMES = {"main": "porecast.run.main", "tile": "porecast.run.tile",
              "join": "porecast.run.join"}
FINISHED = ("succeeded", "failed", "cancelled")
ACTIVE_UNITS = ("waiting", "queued", "running")


class Dispatch(Protocol):
    """Sends unit messages to the broker (implemented in ``porecast.worker``)."""

    def send(self, task_name: str, run_id: int, key: str) -> str:
        """Send one message; returns its task id."""

    def revoke(self, task_ids: list[str]) -> None:
        """Ask workers to drop messages not yet started (best effort)."""


class Send(NamedTuple):
    """A message to send once the transaction that made the unit runnable has committed."""

    run_id: int
    key: str
    task_name: str


class RunStopped(Exception):
    """The run was cancelled or failed elsewhere, or another delivery took the unit over."""


@dataclass(frozen=True)
class Claim:
    """Outcome of :func:`claim`: ``run`` means this delivery does the work."""

    outcome: str  # "run" | "done" | "busy" | "exhausted" | "missing"
    run_id: int
    key: str
    unit_id: int = 0
    kind: str = ""
    delivery: int = 0
    detail: str = ""


@contextmanager
def transaction(factory: sessionmaker[Session]) -> Iterator[Session]:
    """A write session committed on success, rolled back on any exception."""
    db = open_session(factory, write=True)
    try:
        yield db
        db.commit()
    except BaseException:
        db.rollback()
        raise
    finally:
        db.close()


# --------------------------------------------------------------------------- helpers


def log(db: Session, run_id: int, message: str, *, now: datetime, level: str = "info") -> None:
    """Append a line to the run's log."""
    db.add(RunEvent(run_id=run_id, at=now, level=level, message=message[:4000]))


def lock_run(db: Session, run_id: int) -> Run | None:
    """Load a run with its row locked for the rest of the transaction."""
    return db.scalars(
        select(Run).where(Run.id == run_id).with_for_update()
        .execution_options(populate_existing=True)
    ).one_or_none()


def unit(db: Session, run_id: int, key: str) -> RunTask | None:
    """One unit of work, reloaded from the database."""
    return db.scalars(
        select(RunTask).where(RunTask.run_id == run_id, RunTask.key == key)
        .execution_options(populate_existing=True)
    ).one_or_none()


def units(db: Session, run_id: int, kind: str | None = None) -> list[RunTask]:
    """Units of a run in key order."""
    query = select(RunTask).where(RunTask.run_id == run_id)
    if kind is not None:
        query = query.where(RunTask.kind == kind)
    return list(db.scalars(query.order_by(RunTask.key)
                           .execution_options(populate_existing=True)))


def process_alive(pid: int) -> bool:
    """Whether a process of this host exists and is not a zombie."""
    try:
        return psutil.Process(pid).status() != psutil.STATUS_ZOMBIE
    except psutil.NoSuchProcess:
        return False
    except psutil.AccessDenied:  # exists, owned by someone else
        return True


def holder_alive(task: RunTask, *, now: datetime, lease_s: float, host: str | None = None) -> bool:
    """Whether the process holding a running unit is still working on it."""
    if task.heartbeat_at is None or now - task.heartbeat_at > timedelta(seconds=lease_s):
        return False
    if task.pid is not None and task.host == (host or socket.gethostname()):
        if task.pid == os.getpid():
            return False  # this process: its earlier attempt has ended (one task at a time)
        return process_alive(task.pid)
    return True


def eta_seconds(run: Run, now: datetime) -> float | None:
    """Remaining time by linear extrapolation of the progress so far (None at the start)."""
    if run.started_at is None or run.progress_current < 5:
        return None
    elapsed = (now - run.started_at).total_seconds()
    if elapsed <= 0:
        return None
    rate = run.progress_current / elapsed
    return max(0.0, (PROGRESS_TOTAL - run.progress_current) / rate)


def _describe(db: Session, run: Run) -> str:
    scenario = db.get(Scenario, run.scenario_id)
    rev = db.get(ScenarioRevision, run.scenario_revision_id)
    name = scenario.name if scenario else f"scenario {run.scenario_id}"
    number = rev.number if rev else "?"
    return f"{run.kind} run {run.id} of {name!r} (revision {number}, seed {run.seed})"


def finish_run(
    db: Session,
    run: Run,
    status: str,
    *,
    now: datetime,
    error: str | None = None,
    result: dict[str, Any] | None = None,
    actor: User | None = None,
) -> list[str]:
    """Give a run its final status, stop its remaining units, write the activity entry.

    Returns the task ids of units that were still queued or running (to revoke).
    """
    pending = []
    for task in units(db, run.id):
        if task.status in ACTIVE_UNITS:
            if task.task_id and task.status in ("queued", "running"):
                pending.append(task.task_id)
            task.status = "cancelled"
            task.finished_at = now
    run.status = status
    run.finished_at = now
    run.eta_seconds = 0.0 if status == "succeeded" else None
    if status == "succeeded":
        run.progress_current = run.progress_total = PROGRESS_TOTAL
        run.stage = "done"
        run.result = result
    else:
        run.stage = status
    if error is not None:
        run.error = error[:4000]
    log(db, run.id, f"run {status}" + (f": {error}" if error else ""), now=now,
        level="error" if status == "failed" else "info")
    if actor is None and run.created_by_id is not None:
        actor = db.get(User, run.created_by_id)
    took = ""
    if run.started_at is not None:
        took = f" after {(now - run.started_at).total_seconds():.0f} s"
    text = f"{_describe(db, run)} {status}{took}"
    if status == "failed" and error:
        text += f": {error}"
    activity.record(db, run.project_id, actor, f"run.{status}", "run", run.id, text, now=now,
                    data={"kind": run.kind, "scenario_id": run.scenario_id, "seed": run.seed,
                          "status": status})
    return pending


# --------------------------------------------------------------------------- claims


def claim(
    db: Session,
    run_id: int,
    key: str,
    *,
    worker: str,
    task_id: str | None,
    now: datetime,
    max_deliveries: int,
    lease_s: float,
    host: str | None = None,
    pid: int | None = None,
) -> Claim:
    """Start (or refuse to start) one delivery of a unit; see the module docstring."""
    host = host or socket.gethostname()
    pid = pid if pid is not None else os.getpid()
    run = lock_run(db, run_id)
    task = unit(db, run_id, key) if run is not None else None
    if run is None or task is None:
        return Claim("missing", run_id, key, detail="the run or its step no longer exists")
    uid, kind = task.id, task.kind
    if run.status in FINISHED or task.status in FINISHED:
        if task.status in ACTIVE_UNITS:
            task.status, task.finished_at = "cancelled", now
        return Claim("done", run_id, key, detail=f"already {task.status}", unit_id=uid, kind=kind)
    if task.status == "waiting":
        return Claim("busy", run_id, key, detail="waits for its tiles", unit_id=uid, kind=kind)
    taking_over = task.status == "running"
    if taking_over and holder_alive(task, now=now, lease_s=lease_s, host=host):
        return Claim("busy", run_id, key, detail=f"held by {task.worker} (pid {task.pid})",
                     unit_id=uid, kind=kind)
    delivery = task.deliveries + 1
    if delivery > max_deliveries:
        message = (f"step {key} was started {task.deliveries} times and its worker was lost "
                   f"each time (killed, out of memory or crashed; last: {task.worker}); "
                   "it is not tried again")
        task.status, task.error, task.finished_at = "failed", message, now
        finish_run(db, run, "failed", now=now, error=message)
        return Claim("exhausted", run_id, key, detail=message, unit_id=uid, kind=kind)
    previous = task.worker
    task.status = "running"
    task.deliveries = delivery
    task.worker, task.host, task.pid, task.task_id = worker[:255], host[:255], pid, task_id
    task.started_at = task.heartbeat_at = now
    task.finished_at, task.error = None, None
    if run.status == "queued":
        run.status = "running"
        run.started_at = run.started_at or now
        run.progress_total = PROGRESS_TOTAL
        run.stage = "starting"
    note = f"; took over from {previous}, which was lost" if taking_over else ""
    log(db, run.id, f"{key} started on {worker} (delivery {delivery} of at most "
        f"{max_deliveries}){note}", now=now)
    return Claim("run", run_id, key, delivery=delivery, unit_id=uid, kind=kind)


def _owned(db: Session, c: Claim) -> tuple[Run, RunTask]:
    run = lock_run(db, c.run_id)
    task = unit(db, c.run_id, c.key) if run is not None else None
    if run is None or task is None:
        raise RunStopped("the run was deleted")
    if run.status != "running":
        raise RunStopped(f"the run is {run.status}")
    if task.status != "running" or task.deliveries != c.delivery:
        raise RunStopped(f"step {c.key} was taken over by another delivery")
    return run, task


def still_owned(db: Session, c: Claim) -> None:
    """Raise :class:`RunStopped` unless this delivery still holds a running unit."""
    _owned(db, c)


def heartbeat(db: Session, c: Claim, *, now: datetime) -> str | None:
    """Refresh the holder's heartbeat; returns why the unit should stop, or None."""
    result: Any = db.execute(
        update(RunTask)
        .where(RunTask.id == c.unit_id, RunTask.status == "running",
               RunTask.deliveries == c.delivery)
        .values(heartbeat_at=now)
    )
    if not result.rowcount:
        return f"step {c.key} is no longer held by this delivery"
    status = db.scalar(select(Run.status).where(Run.id == c.run_id))
    return None if status == "running" else f"the run is {status}"


def report(
    db: Session,
    c: Claim,
    *,
    fraction: float,
    stage: str,
    span: tuple[float, float],
    now: datetime,
    tile: tuple[int, int] | None = None,
) -> tuple[int, float | None]:
    """Record progress (monotonic) and the stage; returns (progress_current, eta_seconds).

    ``span`` is the share of the whole run this unit covers (fractions); a tile
    passes ``tile=(done, total)`` traces and the run's progress in that span is
    the sum over all tiles. Raises :class:`RunStopped` when the run has stopped.
    """
    run, task = _owned(db, c)
    task.heartbeat_at = now
    if tile is not None:
        task.progress_done, task.progress_total = int(tile[0]), int(tile[1])
        db.flush()
        done, total = db.execute(
            select(func.sum(RunTask.progress_done), func.sum(RunTask.progress_total))
            .where(RunTask.run_id == run.id, RunTask.kind == "tile")
        ).one()
        fraction = (done or 0) / total if total else 0.0
        n_done = db.scalar(select(func.count()).select_from(RunTask).where(
            RunTask.run_id == run.id, RunTask.kind == "tile", RunTask.status == "succeeded"))
        n_all = db.scalar(select(func.count()).select_from(RunTask).where(
            RunTask.run_id == run.id, RunTask.kind == "tile"))
        stage = f"{stage} ({n_done} of {n_all} tiles done)"
    lo, hi = span
    current = int(PROGRESS_TOTAL * (lo + (hi - lo) * min(max(fraction, 0.0), 1.0)))
    if current > run.progress_current:
        run.progress_current = min(current, PROGRESS_TOTAL - 1)
    run.stage = stage[:120]
    run.eta_seconds = eta_seconds(run, now)
    return run.progress_current, run.eta_seconds


def complete(
    db: Session,
    c: Claim,
    *,
    now: datetime,
    unit_result: dict[str, Any] | None = None,
    run_result: dict[str, Any] | None = None,
    final: bool = False,
) -> list[Send]:
    """Mark this delivery's unit done (and the run, when ``final``); returns messages to send.

    The last tile to finish flips the join unit from waiting to queued (the
    counter of the module docstring) and returns its message.
    """
    run, task = _owned(db, c)
    task.status, task.finished_at, task.result = "succeeded", now, unit_result
    task.progress_done = task.progress_total
    log(db, run.id, f"{c.key} done", now=now)
    sends: list[Send] = []
    if final:
        finish_run(db, run, "succeeded", now=now, result=run_result)
    elif task.kind == "tile":
        db.flush()
        remaining = db.scalar(select(func.count()).select_from(RunTask).where(
            RunTask.run_id == run.id, RunTask.kind == "tile", RunTask.status != "succeeded"))
        if remaining == 0:
            join = unit(db, run.id, "join")
            if join is not None and join.status == "waiting":
                join.status = "queued"
                log(db, run.id, "all tiles done; join queued", now=now)
                sends.append(Send(run.id, "join", TASK_NAMES["join"]))
    return sends


def complete_plan(
    db: Session,
    c: Claim,
    tiles: Sequence[tuple[int, int]],
    *,
    now: datetime,
    unit_result: dict[str, Any],
) -> list[Send]:
    """Finish a cube's main unit: create its tile units and the waiting join unit."""
    run, task = _owned(db, c)
    task.status, task.finished_at, task.result = "succeeded", now, unit_result
    sends = []
    for i, (start, stop) in enumerate(tiles):
        key = f"tile-{i:05d}"
        db.add(RunTask(run_id=run.id, key=key, kind="tile", status="queued", trace_start=start,
                       trace_stop=stop, progress_done=0, progress_total=stop - start,
                       deliveries=0))
        sends.append(Send(run.id, key, TASK_NAMES["tile"]))
    db.add(RunTask(run_id=run.id, key="join", kind="join", status="waiting", progress_done=0,
                   progress_total=0, deliveries=0))
    log(db, run.id, f"main done; {len(tiles)} tiles queued", now=now)
    db.flush()
    return sends


def fail(db: Session, c: Claim, message: str, *, now: datetime) -> bool:
    """Fail the unit and its run, if this delivery still holds it; returns whether it did."""
    try:
        run, task = _owned(db, c)
    except RunStopped:
        return False
    task.status, task.error, task.finished_at = "failed", message[:4000], now
    finish_run(db, run, "failed", now=now, error=message)
    return True


def release(db: Session, c: Claim, reason: str, *, now: datetime) -> None:
    """After :class:`RunStopped`: note in the log why this delivery stopped."""
    task = unit(db, c.run_id, c.key)
    if task is not None and task.status == "running" and task.deliveries == c.delivery:
        task.status, task.finished_at = "cancelled", now
    if db.get(Run, c.run_id) is not None:
        log(db, c.run_id, f"{c.key} stopped: {reason}", now=now)


# --------------------------------------------------------------------------- recovery


def recover(
    db: Session,
    *,
    now: datetime,
    lease_s: float,
    max_deliveries: int,
    resend_queued: bool,
    unsent_after_s: float = 30.0,
    host: str | None = None,
    reason: str = "recovery",
) -> list[Send]:
    """Find units lost with their worker or their message; returns messages to send.

    * a running unit whose holder is dead (same host: pid gone; else heartbeat
      older than the lease) is queued again, or fails its run when it has had
      ``max_deliveries`` deliveries;
    * a queued unit whose message was never sent (``sent_at`` empty for longer
      than ``unsent_after_s``) is sent; with ``resend_queued`` every queued unit
      is sent again (after a restart a broker without persistence may have lost
      it; a duplicate is a no-op);
    * a queued or running run with no unit left to execute is failed with the reason.
    """
    sends: list[Send] = []
    run_ids = list(db.scalars(select(Run.id).where(Run.status.in_(("queued", "running")))
                              .order_by(Run.id)))
    for run_id in run_ids:
        run = lock_run(db, run_id)
        if run is None or run.status in FINISHED:
            continue
        active = [t for t in units(db, run_id) if t.status in ACTIVE_UNITS]
        if not active:
            finish_run(db, run, "failed", now=now,
                       error=f"no step of this run was left to execute ({reason})")
            continue
        for task in active:
            if task.status == "running":
                if holder_alive(task, now=now, lease_s=lease_s, host=host):
                    continue
                if task.deliveries >= max_deliveries:
                    message = (f"step {task.key} was started {task.deliveries} times and its "
                               f"worker was lost each time (last: {task.worker}); it is not "
                               "tried again")
                    task.status, task.error, task.finished_at = "failed", message, now
                    finish_run(db, run, "failed", now=now, error=message)
                    break
                task.status = "queued"
                log(db, run_id, f"{task.key} was left running by {task.worker} (pid {task.pid} "
                    f"on {task.host}), which is gone; sent again ({reason})", now=now,
                    level="warning")
                sends.append(Send(run_id, task.key, TASK_NAMES[task.kind]))
            elif task.status == "queued":
                never_sent = task.sent_at is None and \
                    now - run.created_at > timedelta(seconds=unsent_after_s)
                if never_sent or resend_queued:
                    log(db, run_id, f"{task.key} sent again ({reason})", now=now)
                    sends.append(Send(run_id, task.key, TASK_NAMES[task.kind]))
    return sends


def send_all(db: Session, dispatch: Dispatch, sends: Sequence[Send], *, now: datetime) -> int:
    """Send messages (after the commit that made their units runnable); returns how many went.

    A message that cannot be sent leaves ``sent_at`` empty and a line in the run
    log; the next sweep sends it. The bookkeeping is written to ``db`` (the
    caller commits).
    """
    sent = 0
    for s in sends:
        try:
            task_id = dispatch.send(s.task_name, s.run_id, s.key)
        except Exception as exc:  # noqa: BLE001 - any broker failure is reported the same way
            log(db, s.run_id, f"{s.key}: the broker could not be reached ({exc}); it is sent "
                "again when a worker or the server next starts", now=now, level="warning")
            continue
        sent += 1
        db.execute(update(RunTask).where(RunTask.run_id == s.run_id, RunTask.key == s.key)
                   .values(task_id=task_id, sent_at=now))
        if s.key == "main":
            db.execute(update(Run).where(Run.id == s.run_id).values(task_id=task_id))
    return sent
