"""A `porecast serve` subprocess and a small invented project made through its API.

Shared by the browser tests and ``benchmarks/workspace.py``. Everything is
invented: users per role, one project, a scenario from the bundled template,
two LAS wells, small CSV maps (seismic attributes and covariates) on a 50 m grid,
two prospect outlines and a small time-migrated survey: intercept and gradient
SEG-Y cubes over the structural high, with the covariate maps of their traces.
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import httpx
import numpy as np

PASSWORD = "invented passphrase for tests"
ROLES = ("owner", "basin_modeller", "geologist", "geophysicist", "reviewer", "viewer")


def free_port() -> int:
    """A free TCP port on the loopback interface."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@dataclass
class Server:
    """A running ``porecast serve`` on 127.0.0.1."""

    process: subprocess.Popen
    base_url: str
    data_dir: Path
    log_path: Path

    def stop(self) -> None:
        if self.process.poll() is None:
            self.process.terminate()
            try:
                self.process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait(timeout=5)


def start_server(data_dir: Path, *, timeout_s: float = 60.0) -> Server:
    """Create an administrator with ``porecast createuser``, then start ``porecast serve``."""
    data_dir.mkdir(parents=True, exist_ok=True)
    env = dict(os.environ)
    env.update({
        "PORECAST_DATA_DIR": str(data_dir),
        "PORECAST_ENVIRONMENT": "test",
        # TEST ONLY: cheap password hashing so that the many logins stay fast.
        "PORECAST_PASSWORD_HASH_PROFILE": "test-fast",
        "PORECAST_LOGIN_FAILURE_DELAY_SECONDS": "0",
    })
    env.pop("PORECAST_DATABASE_URL", None)
    cli = [sys.executable, "-m", "porecast.cli"]
    subprocess.run([*cli, "db", "upgrade"], env=env, check=True, capture_output=True, timeout=120)
    subprocess.run([*cli, "createuser", "admin", "--admin", "--password", PASSWORD], env=env,
                   check=True, capture_output=True, timeout=120)
    port = free_port()
    log_path = data_dir / "server.log"
    log = open(log_path, "wb")  # noqa: SIM115 - closed with the process
    proc = subprocess.Popen([*cli, "serve", "--host", "127.0.0.1", "--port", str(port),
                             "--no-upgrade"], env=env, stdout=log, stderr=subprocess.STDOUT)
    server = Server(proc, f"http://127.0.0.1:{port}", data_dir, log_path)
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError(f"porecast serve exited: {log_path.read_text()[-2000:]}")
        try:
            if httpx.get(f"{server.base_url}/api/auth/me", timeout=1.0).status_code == 401:
                return server
        except httpx.HTTPError:
            pass
        time.sleep(0.2)
    server.stop()
    raise RuntimeError(f"porecast serve did not answer within {timeout_s} s")


def login(base_url: str, username: str) -> httpx.Client:
    """An HTTP client signed in as ``username`` (session cookie plus CSRF header)."""
    client = httpx.Client(base_url=base_url, timeout=30.0)
    r = client.post("/api/auth/login", json={"username": username, "password": PASSWORD})
    r.raise_for_status()
    client.headers["X-CSRF-Token"] = r.json()["csrf_token"]
    return client


def _check(r: httpx.Response) -> Any:
    if r.status_code >= 400:
        raise RuntimeError(f"{r.request.method} {r.request.url}: {r.status_code} {r.text}")
    return r.json() if r.content else None


def _las(name: str, seed: int, location: tuple[float, float]) -> bytes:
    """An invented LAS 2.0 well: Vp, Vs, density, gamma ray and water saturation."""
    rng = np.random.default_rng(seed)
    depth = 1800.0 + 0.5 * np.arange(800)
    sand = (np.sin(depth / 9.0) > 0.3).astype(float)
    vp = 2900.0 + 0.5 * (depth - 1800.0) - 250.0 * sand + rng.normal(0.0, 30.0, depth.size)
    lines = [
        "~VERSION INFORMATION",
        " VERS.   2.0 : CWLS LOG ASCII STANDARD - VERSION 2.0",
        " WRAP.   NO  : ONE LINE PER DEPTH STEP",
        "~WELL INFORMATION",
        f" STRT.M  {depth[0]:.1f} : START DEPTH",
        f" STOP.M  {depth[-1]:.1f} : STOP DEPTH",
        " STEP.M  0.5 : STEP",
        " NULL.   -999.25 : NULL VALUE",
        f" WELL.   {name} : WELL",
        f" XCOORD.M {location[0]:.1f} : X",
        f" YCOORD.M {location[1]:.1f} : Y",
        "~CURVE INFORMATION",
        " DEPT.M      : DEPTH",
        " VP.M/S      : P VELOCITY",
        " VS.M/S      : S VELOCITY",
        " RHOB.G/CC   : DENSITY",
        " GR.GAPI     : GAMMA RAY",
        " SW.V/V      : WATER SATURATION",
        "~A",
    ]
    gr = 95.0 - 55.0 * sand + rng.normal(0.0, 4.0, depth.size)
    rho = 2.40 - 0.12 * sand + rng.normal(0.0, 0.01, depth.size)
    sw = np.where(sand > 0, 0.35, 1.0)
    for row in zip(depth, vp, vp / (1.75 + 0.2 * (1 - sand)), rho, gr, sw, strict=True):
        lines.append(" ".join(f"{v:.4f}" for v in row))
    return ("\n".join(lines) + "\n").encode()


COVARIATE_MAPS = ("present_depth_m", "net_uplift_m", "gradient_c_per_km")
GRID = {"x0": 431000.0, "y0": 6712000.0, "dx": 50.0, "dy": 50.0, "nx": 24, "ny": 18}


def _normalised(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Map coordinates (m) as fractions of the map grid's extent (0 at x0/y0, 1 at the far node)."""
    g = GRID
    return ((x - g["x0"]) / (g["dx"] * (g["nx"] - 1)), (y - g["y0"]) / (g["dy"] * (g["ny"] - 1)))


def _high(xx: np.ndarray, yy: np.ndarray) -> np.ndarray:
    """The structural high: 1 at its crest, falling off to 0 (normalised coordinates)."""
    return np.exp(-((xx - 0.45) ** 2 + (yy - 0.5) ** 2) / 0.05)


def _covariates(xx: np.ndarray, yy: np.ndarray) -> dict[str, np.ndarray]:
    """Present depth of the target (m), net uplift (m) and geothermal gradient (degC/km)."""
    return {"present_depth_m": 2300.0 - 450.0 * _high(xx, yy), "net_uplift_m": 200.0 + 700.0 * xx,
            "gradient_c_per_km": 32.0 + 6.0 * yy}


def covariates_at(x: Any, y: Any) -> dict[str, Any]:
    """The invented covariates at map coordinates x, y (m): the maps' formulas, anywhere."""
    return _covariates(*_normalised(np.asarray(x, dtype=float), np.asarray(y, dtype=float)))


def _maps() -> dict[str, np.ndarray]:
    """Smooth invented maps: a structural high, uplift rising east, attributes to match."""
    g = GRID
    xx, yy = np.meshgrid(np.linspace(0, 1, g["nx"]), np.linspace(0, 1, g["ny"]))
    high = _high(xx, yy)
    covs = _covariates(xx, yy)
    depth, uplift, gradient = (covs[c] for c in COVARIATE_MAPS)
    rng = np.random.default_rng(11)
    intercept = 0.04 - 0.09 * high + rng.normal(0, 0.01, xx.shape)
    grad = -0.18 - 0.12 * high + rng.normal(0, 0.02, xx.shape)
    return {"present_depth_m": depth, "net_uplift_m": uplift, "gradient_c_per_km": gradient,
            "intercept": intercept, "gradient": grad}


def _csv_on(grid: dict[str, Any], name: str, values: np.ndarray) -> bytes:
    rows = [f"x,y,{name}"]
    for j in range(grid["ny"]):
        for i in range(grid["nx"]):
            rows.append(f"{grid['x0'] + grid['dx'] * i:.1f},{grid['y0'] + grid['dy'] * j:.1f},"
                        f"{values[j, i]:.6f}")
    return ("\n".join(rows) + "\n").encode()


def _map_csv(name: str, values: np.ndarray) -> bytes:
    return _csv_on(GRID, name, values)


#: The survey: inlines run east (one per 50 m northing), crosslines north (one per 50 m
#: easting), 4 ms samples from 1800 ms two-way time, over the crest of the structural high.
CUBE = {"x0": 431300.0, "y0": 6712200.0, "dx": 50.0, "dy": 50.0, "nx": 12, "ny": 8,
        "first_inline": 1001, "first_crossline": 2001, "t0_ms": 1800.0, "dt_ms": 4.0,
        "n_samples": 50}
#: Facies of the scenario template, by index: the reservoir layer is gas sand above the
#: gas-water contact and brine sand below it, in shale.
SHALE, BRINE_SAND, GAS_SAND = 0, 1, 3
CONTACT_MS = 1890.0


def cube_facies() -> np.ndarray:
    """Facies index per (inline, crossline, sample): a sand layer draped over the high."""
    c = CUBE
    x = c["x0"] + c["dx"] * np.arange(c["nx"])
    y = c["y0"] + c["dy"] * np.arange(c["ny"])
    xx, yy = _normalised(*np.meshgrid(x, y))
    top = 1900.0 - 40.0 * _high(xx, yy)  # ms, shallower on the crest
    t = c["t0_ms"] + c["dt_ms"] * np.arange(c["n_samples"])
    in_layer = (t >= top[..., None]) & (t < top[..., None] + 24.0)
    sand = np.where(t < CONTACT_MS, GAS_SAND, BRINE_SAND)
    return np.where(in_layer, sand, SHALE)


def cube_covariates() -> dict[str, np.ndarray]:
    """The covariate maps of the cube's traces, shape (inlines, crosslines)."""
    c = CUBE
    x = c["x0"] + c["dx"] * np.arange(c["nx"])
    y = c["y0"] + c["dy"] * np.arange(c["ny"])
    return covariates_at(*np.meshgrid(x, y))


def _cube_attributes(seed: int = 17) -> dict[str, np.ndarray]:
    """Intercept and gradient per sample, drawn from the scenario template's own forward
    model at each trace's covariates for the sample's facies (so they look like what
    the classifier is trained on)."""
    from porecast.physics import forward
    from porecast.physics.scenario import COVARIATES, default_scenario, validate_scenario

    codes = cube_facies()
    covs = cube_covariates()
    n_il, n_xl, ns = codes.shape
    nodes = np.stack([covs[k].ravel() if k in covs else np.zeros(n_il * n_xl)
                      for k in COVARIATES], axis=-1)
    res = forward.simulate(validate_scenario(default_scenario()), realisations=ns,
                           node_values=nodes)
    rng = np.random.default_rng(seed)
    pick = rng.integers(0, ns, (n_il * n_xl, ns))
    node = np.arange(n_il * n_xl)[:, None]
    flat = codes.reshape(n_il * n_xl, ns)
    return {name: res.samples[node, flat, pick, a].reshape(codes.shape)
            for a, name in enumerate(res.attributes)}


def _segy(values: np.ndarray) -> bytes:
    """A post-stack SEG-Y file (IEEE floats) of a cube on :data:`CUBE`, written by segyio."""
    import segyio

    c = CUBE
    n_il, n_xl, ns = values.shape
    spec = segyio.spec()
    spec.iline, spec.xline = 189, 193
    spec.format = 5
    spec.sorting = segyio.TraceSortingFormat.INLINE_SORTING
    spec.ilines = list(range(c["first_inline"], c["first_inline"] + n_il))
    spec.xlines = list(range(c["first_crossline"], c["first_crossline"] + n_xl))
    spec.samples = list(c["t0_ms"] + c["dt_ms"] * np.arange(ns))
    folder = tempfile.mkdtemp(prefix="porecast-cube-")
    try:
        path = os.path.join(folder, "cube.sgy")
        with segyio.create(path, spec) as f:
            f.bin.update({segyio.BinField.Interval: int(c["dt_ms"] * 1000),
                          segyio.BinField.Samples: ns, segyio.BinField.MeasurementSystem: 1})
            k = 0
            for j, il in enumerate(spec.ilines):
                for i, xl in enumerate(spec.xlines):
                    f.header[k] = {
                        segyio.TraceField.INLINE_3D: il, segyio.TraceField.CROSSLINE_3D: xl,
                        segyio.TraceField.CDP_X: int(c["x0"] + c["dx"] * i),
                        segyio.TraceField.CDP_Y: int(c["y0"] + c["dy"] * j),
                        segyio.TraceField.SourceGroupScalar: 1,
                        segyio.TraceField.CoordinateUnits: 1,
                        segyio.TraceField.TRACE_SAMPLE_INTERVAL: int(c["dt_ms"] * 1000),
                        segyio.TraceField.TRACE_SAMPLE_COUNT: ns,
                        segyio.TraceField.DelayRecordingTime: int(c["t0_ms"]),
                    }
                    f.trace[k] = values[j, i].astype(np.float32)
                    k += 1
        with open(path, "rb") as fh:
            return fh.read()
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def _upload_cube_survey(owner: httpx.Client, pid: int) -> dict[str, int]:
    """Upload the two attribute cubes and the covariate maps of their traces; grid ids."""
    octet = {"Content-Type": "application/octet-stream"}
    ids = {}
    for name, values in _cube_attributes().items():
        ids[name] = _check(owner.post(f"/api/projects/{pid}/grids", params={
            "filename": f"{name}_cube.sgy", "name": f"{name} cube"},
            content=_segy(values), headers=octet))["id"]
    for name, values in cube_covariates().items():
        ids[name] = _check(owner.post(f"/api/projects/{pid}/grids", params={
            "filename": f"{name}_cube_traces.csv", "name": f"{name} at the cube traces"},
            content=_csv_on(CUBE, name, values), headers=octet))["id"]
    return ids


@dataclass
class World:
    """The invented project: ids of what the tests use."""

    base_url: str
    project_id: int
    scenario_id: int
    second_scenario_id: int
    grid_ids: dict[str, int] = field(default_factory=dict)
    well_ids: list[int] = field(default_factory=list)
    prospect_ids: list[int] = field(default_factory=list)
    cube_grid_ids: dict[str, int] = field(default_factory=dict)
    """Attribute cubes (intercept, gradient) and the covariate maps of their traces."""


def build_world(base_url: str) -> World:
    """Users per role, a project with data and two scenarios, made through the API."""
    admin = login(base_url, "admin")
    for role in ROLES:
        _check(admin.post("/api/users", json={"username": f"{role}1", "password": PASSWORD}))
    admin.close()
    owner = login(base_url, "owner1")
    project = _check(owner.post("/api/projects", json={
        "name": "Invented shelf licence", "description": "Browser-test project (invented data)"}))
    pid = project["id"]
    for role in ROLES[1:]:
        _check(owner.post(f"/api/projects/{pid}/members",
                          json={"username": f"{role}1", "role": role}))
    scenario = _check(owner.post(f"/api/projects/{pid}/scenarios",
                                 json={"name": "Burial-aware base case"}))
    grids = {}
    octet = {"Content-Type": "application/octet-stream"}
    for name, values in _maps().items():
        g = _check(owner.post(f"/api/projects/{pid}/grids", params={"filename": f"{name}.csv",
                                                                     "name": name},
                              content=_map_csv(name, values), headers=octet))
        grids[name] = g["id"]
    cube_ids = _upload_cube_survey(owner, pid)
    wells = []
    for k, (name, loc) in enumerate([("Invented-1", (431400.0, 6712450.0)),
                                     ("Invented-2", (431950.0, 6712600.0))]):
        w = _check(owner.post(f"/api/projects/{pid}/wells", params={"filename": f"{name}.las",
                                                                     "name": name},
                              content=_las(name, 30 + k, loc), headers=octet))
        wells.append(w["id"])
    x0, y0 = GRID["x0"], GRID["y0"]
    outlines = {
        "Lead North": [[x0 + 300, y0 + 350], [x0 + 650, y0 + 330], [x0 + 700, y0 + 600],
                       [x0 + 380, y0 + 640]],
        "Lead East": [[x0 + 850, y0 + 200], [x0 + 1100, y0 + 220], [x0 + 1080, y0 + 480],
                      [x0 + 870, y0 + 450]],
    }
    prospects = [_check(owner.post(f"/api/projects/{pid}/prospects",
                                   json={"name": n, "outline": o}))["id"]
                 for n, o in outlines.items()]
    fork = _check(owner.post(f"/api/scenarios/{scenario['id']}/fork",
                             json={"name": "Hotter thermal hypothesis"}))
    doc = _check(owner.get(f"/api/scenarios/{fork['id']}/sections/burial"))
    burial = doc["data"]
    burial["surface_temperature_c"] = 8.0
    _check(owner.put(f"/api/scenarios/{fork['id']}/sections/burial",
                     json={"data": burial, "message": "warmer sea floor"},
                     headers={"If-Match": doc["etag"]}))
    owner.close()
    return World(base_url, pid, scenario["id"], fork["id"], grids, wells, prospects, cube_ids)


@dataclass
class MapProject:
    """A second invented project: the world's attribute and covariate maps and prospect
    outlines, one scenario with every section marked ready, owner1 owner and viewer1 viewer.
    Tests that add many runs use it, so the shared project's activity feed stays as the
    other tests expect it."""

    project_id: int
    scenario_id: int
    grid_ids: dict[str, int] = field(default_factory=dict)
    prospect_ids: list[int] = field(default_factory=list)


def build_map_project(world: World, name: str) -> MapProject:
    """Make a :class:`MapProject` through the API (the maps are the world's, rebuilt)."""
    owner = login(world.base_url, "owner1")
    try:
        pid = _check(owner.post("/api/projects", json={
            "name": name, "description": "Browser-test project (invented data)"}))["id"]
        _check(owner.post(f"/api/projects/{pid}/members",
                          json={"username": "viewer1", "role": "viewer"}))
        sid = _check(owner.post(f"/api/projects/{pid}/scenarios",
                                json={"name": "Burial-aware base case"}))["id"]
        octet = {"Content-Type": "application/octet-stream"}
        grids = {n: _check(owner.post(f"/api/projects/{pid}/grids",
                                      params={"filename": f"{n}.csv", "name": n},
                                      content=_map_csv(n, v), headers=octet))["id"]
                 for n, v in _maps().items()}
        prospects = []
        for p in _check(owner.get(f"/api/projects/{world.project_id}/prospects")):
            prospects.append(_check(owner.post(f"/api/projects/{pid}/prospects", json={
                "name": p["name"], "outline": p["outline"]}))["id"])
        for section in ("burial", "geology", "rockphysics"):
            etag = owner.get(f"/api/scenarios/{sid}/sections/{section}").headers["ETag"]
            _check(owner.put(f"/api/scenarios/{sid}/sections/{section}/ready",
                             json={"ready": True}, headers={"If-Match": etag}))
    finally:
        owner.close()
    return MapProject(pid, sid, grids, sorted(prospects))
