"""``porecast demo``: an invented basin, three scenarios and six users in one command.

``porecast demo`` generates the demo data from a seed (:mod:`porecast.demo.synthetic`),
creates a SQLite database in the demo folder, the users (one per project role,
with generated passwords), the project with its maps, cube, wells, prospects and
three scenarios (through the same services as the web application), scores the
scenarios against the hidden truth, prints the address, the logins and the score
table, and starts ``porecast serve``.

Re-running on a finished demo folder reuses it: nothing is regenerated, the
stored logins and scores are printed again and the server starts. A folder that
exists, is not empty and holds no finished demo is refused, so the command never
writes into someone's data. The demo is built in a hidden sibling folder and
renamed into place only when complete, so an interrupted run leaves no
half-made demo behind.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import sys
import time
import uuid
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, TextIO

from . import __version__

DEFAULT_DATA_DIR = "porecast-demo"
MANIFEST = "demo.json"
LOGINS = "demo-logins.json"
SCORES = Path("demo") / "scores.json"
DEMO_ONLY = (
    "These accounts and passwords are for the local demo only: anyone who can read the demo "
    "folder can read them. Never use them, or this folder, for real work."
)
CAUTION = (
    "Scenario predictions are screening estimates for exploration decisions and carry large "
    "uncertainty. Pressure and temperature outputs are not for well design, drilling or well "
    "control."
)

#: Steps of a fresh demo, in order (for the progress bar).
STAGES = (
    "generate data",
    "write files",
    "migrate database",
    "users",
    "project and members",
    "maps, cube and wells uploaded",
    "prospects",
    "scenarios forked, filled and marked ready",
    "scoring burial_aware",
    "scoring stationary",
    "scoring hot",
    "results written",
)


def _settings(data_dir: Path) -> Any:
    from .settings import load_settings

    # Always SQLite inside the demo folder, whatever PORECAST_DATABASE_URL says.
    return load_settings(data_dir=data_dir, database_url=None)


def _write_json(path: Path, doc: Any, *, private: bool = False) -> None:
    from .io import atomic_path

    with atomic_path(path) as tmp:
        if private:
            os.chmod(tmp, 0o600)
        Path(tmp).write_text(json.dumps(doc, indent=1) + "\n", encoding="utf-8")


def _relative(root: Path, value: Any) -> Any:
    if isinstance(value, Path):
        return value.relative_to(root).as_posix()
    if isinstance(value, dict):
        return {k: _relative(root, v) for k, v in value.items()}
    return value


def build_demo(staging: Path, seed: int, progress: Any = None) -> dict[str, Any]:
    """Build a complete demo in ``staging`` (a new, empty folder); returns the manifest.

    Parameters
    ----------
    staging : Path
        Folder that becomes the data folder (database, file store, demo inputs).
    seed : int
        Seed of the synthetic data.
    progress : callable, optional
        ``progress(stage)`` after each of :data:`STAGES`.
    """
    from .cli_service import db_upgrade
    from .demo import project, scoring, synthetic
    from .io import GridData, write_npz

    def step(stage: str) -> None:
        if progress is not None:
            progress(stage)

    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    data = synthetic.generate(seed)
    step("generate data")
    files = synthetic.write_files(data, staging / "demo")
    step("write files")
    timings["data_s"] = time.perf_counter() - t0
    settings = _settings(staging)
    t1 = time.perf_counter()
    db_upgrade(settings)
    step("migrate database")
    logins = project.generate_logins()
    created = project.create_demo_project(settings, data, files, logins, progress=step)
    timings["database_s"] = time.perf_counter() - t1
    t2 = time.perf_counter()
    scores = scoring.score_scenarios(data, progress=step)
    timings["scoring_s"] = time.perf_counter() - t2
    results = staging / "demo" / "results"
    results.mkdir(parents=True, exist_ok=True)
    for s in scores:
        write_npz(results / f"{s.key}_most_likely.npz",
                  GridData(data.maps.grid, {"most_likely": s.most_likely.astype(float)}))
    doc = scoring.scores_document(scores, data)
    doc["scenario_ids"] = created.scenario_ids
    _write_json(staging / SCORES, doc)
    _write_json(staging / LOGINS, {
        "note": DEMO_ONLY,
        "logins": [login._asdict() for login in logins],
    }, private=True)
    step("results written")
    timings["total_s"] = time.perf_counter() - t0
    manifest = {
        "kind": "porecast.demo",
        "porecast_version": __version__,
        "seed": seed,
        "created_at": datetime.now(UTC).isoformat(timespec="seconds"),
        "project": {"id": created.project_id, "name": project.PROJECT_NAME},
        "users": [{"username": login.username, "role": login.role} for login in logins],
        "scenario_ids": created.scenario_ids,
        "grid_ids": created.grid_ids,
        "well_ids": created.well_ids,
        "prospect_ids": created.prospect_ids,
        "files": _relative(staging, files._asdict()),
        "scores": SCORES.as_posix(),
        "score_table": scoring.score_table(scores),
        "timings_s": {k: round(v, 2) for k, v in timings.items()},
    }
    _write_json(staging / MANIFEST, manifest)
    return manifest


def prepare_demo(data_dir: str | Path, *, seed: int | None = None,
                 progress: Any = None) -> tuple[dict[str, Any], bool]:
    """A finished demo in ``data_dir``: reused when there, built otherwise.

    Returns the manifest and whether it was reused.

    Raises
    ------
    ValueError
        When ``data_dir`` exists, is not empty and holds no finished demo, or holds
        one made with another seed than ``seed``.
    """
    root = Path(data_dir)
    marker = root / MANIFEST
    if marker.is_file():
        manifest = json.loads(marker.read_text(encoding="utf-8"))
        if manifest.get("kind") != "porecast.demo":
            raise ValueError(f"{marker} is not a Porecast demo manifest")
        if seed is not None and int(manifest["seed"]) != int(seed):
            raise ValueError(
                f"{root} holds the demo made with seed {manifest['seed']}; use another "
                f"--data-dir for seed {seed}, or remove {root} to rebuild it")
        return manifest, True
    if root.exists() and (not root.is_dir() or any(root.iterdir())):
        raise ValueError(
            f"{root} exists and is not a Porecast demo folder (no {MANIFEST}); the demo will "
            "not write into it. Choose another --data-dir, or remove the folder if it is a "
            "leftover of an interrupted demo")
    root.parent.mkdir(parents=True, exist_ok=True)
    staging = root.parent / f".{root.name}.partial-{uuid.uuid4().hex[:8]}"
    staging.mkdir()
    try:
        from .demo.synthetic import DEFAULT_SEED

        manifest = build_demo(staging, DEFAULT_SEED if seed is None else int(seed), progress)
        if root.exists():
            root.rmdir()  # empty (checked above)
        os.rename(staging, root)
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    return manifest, False


def print_summary(root: Path, manifest: dict[str, Any], url: str, reused: bool,
                  out: TextIO | None = None) -> None:
    """The address, the logins and the score table of a demo (on ``out``, default stdout)."""
    out = sys.stdout if out is None else out
    logins = json.loads((root / LOGINS).read_text(encoding="utf-8"))["logins"]
    say = out.write
    state = "reusing the demo in" if reused else "demo ready in"
    say(f"\nPorecast demo ({manifest['project']['name']}, seed {manifest['seed']}): {state} "
        f"{root}\n")
    say(f"\nOpen {url} and log in as one of ({root / LOGINS}):\n\n")
    width = max(len(x["username"]) for x in logins)
    say(f"  {'user':<{width}}  {'role':<15} password\n")
    for x in logins:
        say(f"  {x['username']:<{width}}  {x['role']:<15} {x['password']}\n")
    say(f"\n{DEMO_ONLY}\n")
    say("\nScenarios scored against the hidden truth (12000 map nodes):\n\n")
    for line in manifest["score_table"].splitlines():
        say(f"  {line}\n")
    say(f"\nScores: {root / manifest['scores']}; inputs: {root / 'demo'}; the hidden truth: "
        f"{root / 'demo' / 'truth'} (not in the project).\n")
    if not reused:
        t = manifest.get("timings_s", {})
        say(f"Built in {t.get('total_s', float('nan')):.1f} s (data {t.get('data_s', 0):.1f} s, "
            f"database {t.get('database_s', 0):.1f} s, scoring {t.get('scoring_s', 0):.1f} s).\n")
    say(f"\n{CAUTION}\n\n")
    out.flush()


def run_demo(
    data_dir: str | Path = DEFAULT_DATA_DIR,
    *,
    seed: int | None = None,
    host: str = "127.0.0.1",
    port: int = 8000,
    serve: bool = True,
    progress_bar: bool = True,
    out: TextIO | None = None,
) -> int:
    """Prepare (or reuse) the demo in ``data_dir``, print its summary, then serve it."""
    from .cli import ProgressBar

    root = Path(data_dir)
    bar = ProgressBar("demo", enabled=progress_bar)
    done = [0]

    def progress(stage: str) -> None:
        done[0] += 1
        bar(done[0], len(STAGES), stage)

    try:
        manifest, reused = prepare_demo(root, seed=seed, progress=progress)
    finally:
        bar.close()
    url = f"http://{host}:{port}/"
    print_summary(root, manifest, url, reused, out)
    if serve:
        from .cli_service import serve as serve_app

        serve_app(host, port, settings=_settings(root))
    return 0


def _cmd_demo(args: argparse.Namespace) -> int:
    return run_demo(args.data_dir, seed=args.seed, host=args.host, port=args.port,
                    serve=not args.no_serve)


def add_demo_commands(subparsers: Any) -> None:
    """Register ``demo`` on the main parser's sub-parsers (handler convention of the CLI)."""
    p = subparsers.add_parser(
        "demo", help="set up and serve an invented demo basin with users and scenarios",
        description="Generate an invented demo basin (maps, cube, wells, prospects), create "
        "its database, one user per role, a project and three scenarios, print the logins "
        "and how each scenario scores against the hidden truth, then serve it. Re-running "
        "on a finished demo folder reuses it.")
    p.add_argument("--data-dir", default=DEFAULT_DATA_DIR,
                   help="demo folder (default %(default)s); must be new, empty or a demo")
    p.add_argument("--host", default="127.0.0.1", help="bind address (default %(default)s)")
    p.add_argument("--port", type=int, default=8000, help="port (default %(default)s)")
    p.add_argument("--no-serve", action="store_true", help="set up and print, do not serve")
    p.add_argument("--seed", type=int, default=None,
                   help="seed of the synthetic data (default 20261201)")
    p.set_defaults(handler=_cmd_demo)
