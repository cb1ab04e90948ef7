"""The many-machine set-up without containers: PostgreSQL, Redis, serve and two workers.

Everything runs as separate processes on loopback, as ``docker-compose.yml``
describes it: ``porecast serve --no-worker`` and two ``porecast worker``
processes with distinct names, sharing the database (a PostgreSQL database of
this test's own, dropped afterwards), the Redis broker and the result folder. A
cube classification is split into tiles; the tiles must have run on both
workers, and the joined SEG-Y files must equal a single-process classification.
"""

from __future__ import annotations

import os
import time
from datetime import UTC, datetime
from pathlib import Path

import httpx
import numpy as np
import pytest
import run_data
import segyio
from sqlalchemy import text
from sqlalchemy.engine import make_url
from worker_helpers import Deployment, free_port, need_service, redis_url, wait_for

from porecast.db.models import RunTask
from porecast.db.session import make_engine
from porecast.services import auth
from porecast.services import classification as cls
from porecast.services import run_execution as ex
from porecast.services.run_steps import run_dir

pytestmark = [pytest.mark.slow, pytest.mark.postgres, pytest.mark.redis]
DATABASE = "porecast_topology"


@pytest.fixture
def topology_database() -> str:
    """A PostgreSQL database of this test's own (dropped afterwards)."""
    url = os.environ.get("PORECAST_TEST_DATABASE_URL")
    need_service(bool(url), "PORECAST_TEST_DATABASE_URL is not set (PostgreSQL tests)")
    admin = make_engine(url, isolation_level="AUTOCOMMIT")
    try:
        with admin.connect() as conn:
            conn.execute(text(f"DROP DATABASE IF EXISTS {DATABASE} WITH (FORCE)"))
            conn.execute(text(f"CREATE DATABASE {DATABASE}"))
    except Exception as exc:  # noqa: BLE001 - any connection failure means "no server"
        admin.dispose()
        need_service(False, f"PostgreSQL at {url} is not reachable: {exc}")
    try:
        yield make_url(url).set(database=DATABASE).render_as_string(hide_password=False)
    finally:
        with admin.connect() as conn:
            conn.execute(text(f"DROP DATABASE IF EXISTS {DATABASE} WITH (FORCE)"))
        admin.dispose()


def test_serve_and_two_workers_share_a_tiled_cube_classification(topology_database, tmp_path):
    d = Deployment(tmp_path / "site", broker_url=redis_url(), database_url=topology_database)
    try:
        with d.writer() as db:
            _, token = auth.create_token(db, d.user(db), "tests", now=datetime.now(UTC))
            db.commit()
        port = free_port()
        d.spawn(["serve", "--no-worker", "--host", "127.0.0.1", "--port", str(port)], "serve")
        workers = [d.start_worker(name, wait=False) for name in ("w1", "w2")]
        for w in workers:
            d.wait_ready(w)
        base = f"http://127.0.0.1:{port}"

        def up() -> bool:
            try:
                return httpx.get(f"{base}/api/auth/me", timeout=1).status_code == 401
            except httpx.HTTPError:
                return False

        wait_for(up, 60, "porecast serve to answer")
        paths = run_data.write_cubes(tmp_path / "in", shape=(6, 8, 12), segy=True)
        headers = {"Authorization": f"Bearer {token}"}
        with httpx.Client(base_url=base, headers=headers, timeout=30) as http:
            ids = {}
            for name, path in paths.items():
                r = http.post(f"/api/projects/{d.project_id}/grids",
                              params={"filename": path.name}, content=path.read_bytes(),
                              headers={"Content-Type": "application/octet-stream"})
                assert r.status_code == 201, r.text
                ids[name] = r.json()["id"]
            params = {"attribute_grids": {a: ids[a] for a in ("intercept", "gradient")},
                      "covariate_grids": {c: ids[c] for c in run_data.VARYING},
                      "tile_traces": 8, "realisations": 100}
            r = http.post(f"/api/scenarios/{d.scenario_id}/runs",
                          json={"kind": "classify", "params": params})
            assert r.status_code == 202, r.text
            run_id = r.json()["id"]
            seen: list[int] = []

            def finished() -> dict | None:
                body = http.get(f"/api/runs/{run_id}").json()
                seen.append(body["progress_current"])
                return body if body["status"] in ("succeeded", "failed", "cancelled") else None

            deadline = time.monotonic() + 120
            body = None
            while body is None and time.monotonic() < deadline:
                body = finished()
                time.sleep(0.3)
            assert body is not None, "the run did not finish in 120 s"
            assert body["status"] == "succeeded", body["error"]
            assert seen == sorted(seen)  # monotonic as seen by a polling client
            section = http.get(f"/api/runs/{run_id}/section", params={"line": 3})
            assert section.status_code == 200 and section.json()["n_lines"] == 6
        with d.factory() as db:
            tiles = [u for u in db.query(RunTask).filter_by(run_id=run_id) if u.kind == "tile"]
        assert len(tiles) == 6
        names = {u.worker.split("@")[0] for u in tiles}
        assert names == {"w1", "w2"}, names  # the tiles ran on both workers
        assert {u.result["worker"] for u in tiles} == {u.worker for u in tiles}

        folder = run_dir(d.settings.data_dir, run_id)
        model = ex.model_from_training(run_data.document(), body["seed"],
                                       folder / ex.TRAINING_FILE)
        covs = ex.read_covariate_arrays(model, {c: paths[c] for c in run_data.VARYING})
        ref = Path(tmp_path / "single")
        ref.mkdir()
        cls.classify_cube(model, {a: paths[a] for a in model.attributes}, covs, ref)
        for name in cls.cube_output_names(model):
            with segyio.open(folder / f"{name}.sgy") as a, segyio.open(ref / f"{name}.sgy") as b:
                assert np.array_equal(segyio.tools.cube(a), segyio.tools.cube(b),
                                      equal_nan=True), name
    finally:
        d.stop_all()
