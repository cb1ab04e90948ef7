"""Fixtures of the browser suite: Debian's Chromium driven by Playwright against a real
``porecast serve`` subprocess on a free loopback port, with an invented project.

The suite skips (with the reason) when ``PORECAST_TEST_CHROMIUM`` is unset or names no
executable, and fails instead under ``PORECAST_REQUIRE_SERVICES=1`` (CI). Every test
saves a screenshot under ``tests/artifacts/screenshots/``; timings are printed at the
end of the run and written to ``tests/artifacts/browser-timings.json``.
"""

from __future__ import annotations

import json
import os
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

sys.path.insert(0, str(Path(__file__).parent))

import world as world_module  # noqa: E402
from browser_helpers import ARTIFACTS, TIMINGS, record_timing, shot  # noqa: E402,F401

CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def need_service(available: bool, reason: str) -> None:
    """Skip when a service is missing; fail instead under PORECAST_REQUIRE_SERVICES=1.

    Same rule as ``tests/conftest.py`` (which this folder cannot import by name).
    """
    if available:
        return
    if os.environ.get("PORECAST_REQUIRE_SERVICES") == "1":
        pytest.fail(f"required service missing in CI: {reason}")
    pytest.skip(reason)


def pytest_collection_modifyitems(items: list[pytest.Item]) -> None:
    for item in items:
        if "tests/browser" in str(item.fspath):
            item.add_marker(pytest.mark.browser)


@pytest.fixture(scope="session")
def chromium_path() -> str:
    path = os.environ.get("PORECAST_TEST_CHROMIUM", "")
    need_service(bool(path), "PORECAST_TEST_CHROMIUM is not set (path to Chromium, e.g. "
                 "/usr/bin/chromium)")
    need_service(os.path.isfile(path) and os.access(path, os.X_OK),
                 f"PORECAST_TEST_CHROMIUM={path} is not an executable file")
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        need_service(False, "Playwright for Python is not installed")
    return path


@pytest.fixture(scope="session")
def server(chromium_path: str, tmp_path_factory: pytest.TempPathFactory
           ) -> Iterator[world_module.Server]:
    srv = world_module.start_server(tmp_path_factory.mktemp("browser") / "data")
    try:
        yield srv
    finally:
        srv.stop()


@pytest.fixture(scope="session")
def world(server: world_module.Server) -> world_module.World:
    return world_module.build_world(server.base_url)


@pytest.fixture(scope="session")
def browser(chromium_path: str) -> Iterator[Any]:
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        # Playwright gives every launch a fresh, temporary user data directory.
        b = pw.chromium.launch(executable_path=chromium_path, args=CHROMIUM_ARGS, headless=True)
        try:
            yield b
        finally:
            b.close()


class Session:
    """One browser context (its own cookies and cache) signed in as one user."""

    def __init__(self, browser: Any, base_url: str, username: str | None):
        self.context = browser.new_context(base_url=base_url, accept_downloads=True,
                                           viewport={"width": 1440, "height": 960})
        self.page = self.context.new_page()
        self.page.set_default_timeout(20_000)
        self.errors: list[str] = []
        # the page's address and the script's stack, so a failure says where it came from
        self.page.on("pageerror", lambda e: self.errors.append(
            f"{e} [on {self.page.url}] {getattr(e, 'stack', '') or ''}"))
        self.base_url = base_url
        if username:
            self.sign_in(username)

    def sign_in(self, username: str, password: str = world_module.PASSWORD) -> None:
        page = self.page
        page.goto("/index.html")
        page.fill("#username", username)
        page.fill("#password", password)
        page.click("button[type=submit]")
        page.wait_for_url("**/projects.html")

    def close(self) -> None:
        self.context.close()


@pytest.fixture
def sessions(browser: Any, server: world_module.Server, request: pytest.FixtureRequest
             ) -> Iterator[Any]:
    """Factory of signed-in browser sessions; screenshots and JS errors checked at the end."""
    made: list[Session] = []

    def make(username: str | None) -> Session:
        s = Session(browser, server.base_url, username)
        made.append(s)
        return s

    yield make
    errors = [e for s in made for e in s.errors]
    for s in made:
        s.close()
    assert errors == [], f"JavaScript errors on the page: {errors}"


def pytest_terminal_summary(terminalreporter: Any) -> None:
    if not TIMINGS:
        return
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    (ARTIFACTS / "browser-timings.json").write_text(json.dumps(TIMINGS, indent=1))
    terminalreporter.section("browser timings (ms; goals: interactive 1500, preview 300)")
    for k, v in TIMINGS.items():
        terminalreporter.write_line(f"{k}: {v}")


@pytest.fixture(scope="session")
def classified_run(world: world_module.World) -> dict[str, Any]:
    """A finished map classification of the second scenario, started through the API."""
    import time

    client = world_module.login(world.base_url, "owner1")
    if "/api/scenarios/{scenario_id}/runs" not in client.get("/openapi.json").json()["paths"]:
        pytest.xfail("the run API (POST /api/scenarios/{id}/runs) is not in this build yet")
    g = world.grid_ids
    r = client.post(f"/api/scenarios/{world.second_scenario_id}/runs", json={
        "kind": "classify", "override_readiness": True,
        "params": {"attribute_grids": {"intercept": g["intercept"], "gradient": g["gradient"]},
                   "covariate_grids": {c: g[c] for c in ("present_depth_m", "net_uplift_m",
                                                         "gradient_c_per_km")},
                   "prospect_ids": world.prospect_ids}})
    assert r.status_code == 202, r.text
    run = r.json()
    deadline = time.monotonic() + 150
    while run["status"] in ("queued", "running") and time.monotonic() < deadline:
        time.sleep(0.5)
        run = client.get(f"/api/runs/{run['id']}").json()
    assert run["status"] == "succeeded", run
    return run


def _run_to_end(client: Any, scenario_id: int, body: dict[str, Any],
                timeout_s: float = 150.0) -> dict[str, Any]:
    """Start a run through the API and poll it until it has finished; it must succeed."""
    import time

    if "/api/scenarios/{scenario_id}/runs" not in client.get("/openapi.json").json()["paths"]:
        pytest.xfail("the run API (POST /api/scenarios/{id}/runs) is not in this build yet")
    r = client.post(f"/api/scenarios/{scenario_id}/runs", json=body)
    assert r.status_code == 202, r.text
    run = r.json()
    deadline = time.monotonic() + timeout_s
    while run["status"] in ("queued", "running") and time.monotonic() < deadline:
        time.sleep(0.5)
        run = client.get(f"/api/runs/{run['id']}").json()
    assert run["status"] == "succeeded", run
    return run


@pytest.fixture(scope="session")
def cube_run(world: world_module.World) -> dict[str, Any]:
    """A finished classification of the invented SEG-Y cubes (two tiles of traces)."""
    g = world.cube_grid_ids
    client = world_module.login(world.base_url, "owner1")
    try:
        return _run_to_end(client, world.scenario_id, {
            "kind": "classify", "override_readiness": True,
            "params": {"attribute_grids": {"intercept": g["intercept"], "gradient": g["gradient"]},
                       "covariate_grids": {c: g[c] for c in world_module.COVARIATE_MAPS},
                       "tile_traces": 48}})
    finally:
        client.close()


@pytest.fixture(scope="session")
def calibrate_run(world: world_module.World) -> dict[str, Any]:
    """A finished blind test at the first invented well, with the map covariates there."""
    client = world_module.login(world.base_url, "owner1")
    well = client.get(f"/api/wells/{world.well_ids[0]}").json()
    covs = world_module.covariates_at(well["x"], well["y"])
    try:
        return _run_to_end(client, world.scenario_id, {
            "kind": "calibrate", "override_readiness": True,
            "params": {"well_id": world.well_ids[0], "block_m": 10.0,
                       "covariates": {c: round(float(covs[c]), 1)
                                      for c in ("net_uplift_m", "gradient_c_per_km")}}})
    finally:
        client.close()
