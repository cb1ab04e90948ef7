"""Scenario workspace speed: preview latency over HTTP and, with Chromium, in the browser.

Starts a real ``porecast serve`` on a free loopback port with a temporary data folder
and the invented project of the browser tests, then prints

* the preview endpoint's round trip per workspace view (median and 90th percentile
  of ``--n`` requests, and the server's own compute time per part), for the bundled
  example scenario at 200 realisations;
* with ``PORECAST_TEST_CHROMIUM`` (or ``--chromium``) set: the workspace's interactive
  time after navigation (forms usable; cold and warm browser cache), the time until
  the first preview is drawn, and the refresh time of the preview after an edit
  (request plus redraw) in each view.

With ``--demo`` the same figures are taken on the demo project (``porecast demo``
built into a temporary folder, its first scenario, signed in as the demo owner).

Goals: interactive within 1500 ms, preview refresh within 300 ms. Figures only, no
pass/fail. Usage:
``python benchmarks/workspace.py [--n 20] [--chromium /usr/bin/chromium] [--demo]``
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import NamedTuple

import httpx

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests" / "browser"))

import world as world_module  # noqa: E402

VIEWS = {
    "burial & temperature": ["history"],
    "porosity & cement": ["history", "porosity"],
    "depth trends": ["depth_trend"],
    "cross-plot & sweep": ["crossplot", "sweep"],
}
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def _stats(values: list[float]) -> str:
    values = sorted(values)
    p90 = values[min(len(values) - 1, int(round(0.9 * (len(values) - 1))))]
    return f"median {statistics.median(values):7.1f} ms   p90 {p90:7.1f} ms"


class Target(NamedTuple):
    """The scenario to time and who opens it."""

    base_url: str
    scenario_id: int
    username: str
    password: str


def login(t: Target) -> httpx.Client:
    client = httpx.Client(base_url=t.base_url, timeout=30.0)
    r = client.post("/api/auth/login", json={"username": t.username, "password": t.password})
    r.raise_for_status()
    client.headers["X-CSRF-Token"] = r.json()["csrf_token"]
    return client


def demo_target(data_dir: Path) -> tuple[world_module.Server, Target]:
    """Build the demo into ``data_dir``, serve it, and pick its first scenario and owner."""
    subprocess.run([sys.executable, "-m", "porecast.cli", "demo", "--data-dir", str(data_dir),
                    "--no-serve"], check=True, capture_output=True, timeout=600)
    logins = json.loads((data_dir / "demo-logins.json").read_text())["logins"]
    owner = next(x for x in logins if x["role"] == "owner")
    server = world_module.start_server(data_dir)
    t = Target(server.base_url, 0, owner["username"], owner["password"])
    client = login(t)
    project = client.get("/api/projects").json()[0]
    scenario = client.get(f"/api/projects/{project['id']}/scenarios").json()[0]
    print(f"demo project {project['name']!r}, scenario {scenario['name']!r}, as {t.username}")
    return server, t._replace(scenario_id=scenario["id"])


def http_latency(w: Target, n: int) -> None:
    client = login(w)
    doc = client.get(f"/api/scenarios/{w.scenario_id}/document").json()["document"]
    loc = {"present_depth_m": 2075.0, "net_uplift_m": 600.0, "gradient_c_per_km": 35.0,
           "overpressure_mpa": 0.0}
    print(f"preview round trip over HTTP ({n} requests per view, unsaved document, "
          "200 realisations)")
    for name, parts in VIEWS.items():
        times, server = [], {}
        for k in range(n + 1):
            doc["burial"]["surface_temperature_c"] = 4.0 + 0.1 * k
            t0 = time.perf_counter()
            r = client.post(f"/api/scenarios/{w.scenario_id}/preview",
                            json={"document": doc, "locations": [loc], "parts": parts,
                                  "realisations": 200})
            dt = (time.perf_counter() - t0) * 1e3
            if r.status_code != 200:
                raise SystemExit(f"preview {parts} refused ({r.status_code}): {r.text[:600]}")
            if k:  # the first request of a view warms caches
                times.append(dt)
                for part, ms in r.json()["timing_ms"].items():
                    server.setdefault(part, []).append(ms)
        compute = ", ".join(f"{p} {statistics.median(v):.1f} ms" for p, v in server.items())
        print(f"  {name:<22} {_stats(times)}   server compute: {compute}   "
              f"{len(r.content) / 1024:.0f} KiB")


def browser_timing(w: Target, chromium: str, edits: int) -> None:
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=chromium, args=ARGS, headless=True)
        ctx = browser.new_context(viewport={"width": 1440, "height": 960})
        page = ctx.new_page()
        page.goto(f"{w.base_url}/index.html")
        page.fill("#username", w.username)
        page.fill("#password", w.password)
        page.click("button[type=submit]")
        page.wait_for_url("**/projects.html")
        print("workspace in Chromium (ms after navigation start)")
        for label in ("cold cache", "warm cache"):
            page.goto(f"{w.base_url}/scenario.html?id={w.scenario_id}")
            page.wait_for_selector("#preview[data-preview-seq]")
            m = page.evaluate("window.porecastMetrics")
            first = m["preview"][0]
            print(f"  {label:<11} forms interactive {m['interactiveMs']:7.0f}   "
                  f"first preview drawn {m['interactiveMs'] + first['totalMs']:7.0f}")
        print(f"preview refresh after an edit ({edits} edits per view: request + redraw)")
        for tab in ("burial", "porosity", "depth", "crossplot"):
            page.click(f"#pv-tab-{tab}")
            page.wait_for_timeout(300)
            totals = []
            for k in range(edits):
                before = int(page.get_attribute("#preview", "data-preview-seq"))
                page.fill("[data-input-path='burial.surface_temperature_c']", str(5 + k))
                page.wait_for_function(
                    f"Number(document.querySelector('#preview').dataset.previewSeq) > {before}")
                totals.append(page.evaluate("window.porecastMetrics.preview.at(-1).totalMs"))
            print(f"  {tab:<11} {_stats(totals)}")
        browser.close()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=20, help="requests per view")
    parser.add_argument("--edits", type=int, default=6, help="browser edits per view")
    parser.add_argument("--chromium", default=os.environ.get("PORECAST_TEST_CHROMIUM"))
    parser.add_argument("--demo", action="store_true", help="time the demo project")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        if args.demo:
            server, w = demo_target(Path(tmp) / "demo")
        else:
            server = world_module.start_server(Path(tmp) / "data")
        try:
            if not args.demo:
                world = world_module.build_world(server.base_url)
                w = Target(server.base_url, world.scenario_id, "owner1", world_module.PASSWORD)
            http_latency(w, args.n)
            if args.chromium:
                browser_timing(w, args.chromium, args.edits)
            else:
                print("browser timing skipped: give --chromium or PORECAST_TEST_CHROMIUM")
        finally:
            server.stop()


if __name__ == "__main__":
    main()
