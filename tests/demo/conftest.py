"""Fixtures of the demo tests: the default-seed demo data and one full ``porecast demo`` run.

Both are session-scoped (generation takes a few seconds, the whole command some
15 s), and the command runs with the TEST-ONLY fast password hashing so six
argon2id hashes at production cost do not dominate the run.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any, NamedTuple

import pytest
from demo_helpers import run_cli

from porecast.demo import synthetic


class DemoRun(NamedTuple):
    root: Path
    status: int
    stdout: str
    manifest: dict[str, Any]
    logins: list[dict[str, str]]
    scores: dict[str, Any]


@pytest.fixture(scope="session")
def demo_data() -> synthetic.DemoData:
    """The demo data of the default seed."""
    return synthetic.generate(synthetic.DEFAULT_SEED)


@pytest.fixture(scope="session")
def demo_files(demo_data: synthetic.DemoData,
               tmp_path_factory: pytest.TempPathFactory) -> synthetic.DemoFiles:
    """The demo data written to a temporary folder."""
    return synthetic.write_files(demo_data, tmp_path_factory.mktemp("demo-files"))


@pytest.fixture(scope="session")
def fast_hashing() -> Any:
    """TEST ONLY: the test environment with trivial argon2id cost, for the whole session."""
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv("PORECAST_ENVIRONMENT", "test")
        mp.setenv("PORECAST_PASSWORD_HASH_PROFILE", "test-fast")
        mp.delenv("PORECAST_DATABASE_URL", raising=False)
        mp.delenv("PORECAST_SETTINGS_FILE", raising=False)
        yield


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory: pytest.TempPathFactory, fast_hashing: Any) -> DemoRun:
    """One ``porecast demo --no-serve`` into a new folder."""
    root = tmp_path_factory.mktemp("demo-run") / "demo"
    status, out = run_cli(["demo", "--no-serve", "--data-dir", str(root)])
    manifest = json.loads((root / "demo.json").read_text()) if status == 0 else {}
    logins = json.loads((root / "demo-logins.json").read_text())["logins"] if status == 0 else []
    scores = json.loads((root / "demo" / "scores.json").read_text()) if status == 0 else {}
    return DemoRun(root, status, out, manifest, logins, scores)
