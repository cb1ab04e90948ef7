"""Workers that die: SIGKILL mid-run, a task that always kills its worker, a server restart."""

from __future__ import annotations

import json
from datetime import UTC, datetime

import httpx
import numpy as np
import pytest
import run_data
from worker_helpers import free_port, kill_tree, redis_url, wait_for

from porecast.db.models import Activity
from porecast.physics import forward
from porecast.services import auth
from porecast.services import run_execution as ex
from porecast.services.run_steps import STAGING, run_dir

pytestmark = pytest.mark.slow
#: Realisations per facies per node of the runs that are killed: a few seconds of work
#: (most of it compressing samples.npz).
LONG = 2500


def _succeeded_entries(d, run_id: int) -> int:
    with d.factory() as db:
        return db.query(Activity).filter_by(verb="run.succeeded", object_id=run_id).count()


@pytest.mark.parametrize("broker", ["filesystem", pytest.param("redis",
                                                                marks=pytest.mark.redis)])
def test_worker_killed_mid_run_the_run_still_succeeds_once(make_deployment, broker, tmp_path):
    d = make_deployment(broker_url=None if broker == "filesystem" else redis_url())
    victim = d.start_worker("victim")
    run_id = d.start_run(params={"realisations": LONG})
    d.wait(run_id, ("running",), timeout=60, check=lambda r: r.progress_current > 0)
    kill_tree(victim)  # SIGKILL of the worker and its pool process, mid-run
    assert d.run(run_id).status == "running"
    d.start_worker("rescuer")  # its start-up sweep finds the unit held by a dead process
    run = d.wait(run_id, timeout=120)
    assert run.status == "succeeded", run.error
    (main,) = d.units(run_id)
    assert main.deliveries == 2 and main.worker.startswith("rescuer")
    assert "was left running by victim" in d.log_text(run_id)
    assert _succeeded_entries(d, run_id) == 1
    folder = run_dir(d.settings.data_dir, run_id)
    assert sorted(p.name for p in folder.iterdir()) == ["samples.npz", "summary.json"]
    assert not (folder / STAGING).exists()
    # one set of results, the same numbers as an uninterrupted computation
    sc, _ = ex.scenario_for_run(run_data.document(), run.seed)
    ref = forward.simulate(sc, realisations=LONG)
    with np.load(folder / "samples.npz") as got:
        assert got["samples"].tobytes() == ref.samples.tobytes()


def test_a_task_that_always_kills_its_worker_fails_after_n_deliveries(make_deployment):
    d = make_deployment(jobs={"max_deliveries": 3})
    worker = d.start_worker("crashy", env={"PORECAST_WORKER_IMPORTS": '["crashing_tasks"]'})
    run_id = d.start_run(params={"realisations": 100})
    run = d.wait(run_id, timeout=90)
    assert run.status == "failed"
    assert "started 3 times" in run.error and "lost each time" in run.error
    (main,) = d.units(run_id)
    assert main.deliveries == 3 and main.status == "failed"
    assert d.log_text(run_id).count("main started") == 3
    assert worker.poll() is None  # the worker itself survives; only pool processes died
    with d.factory() as db:
        assert db.query(Activity).filter_by(verb="run.failed", object_id=run_id).count() == 1


def test_server_restart_resumes_a_run_left_running_and_resends_a_queued_one(make_deployment):
    d = make_deployment()
    with d.writer() as db:
        _, token = auth.create_token(db, d.user(db), "tests", now=datetime.now(UTC))
        db.commit()
    port = free_port()
    base = f"http://127.0.0.1:{port}"
    headers = {"Authorization": f"Bearer {token}"}
    serve_env = {"PORECAST_WORKER_CONCURRENCY": "1"}
    argv = ["serve", "--host", "127.0.0.1", "--port", str(port)]

    def up() -> bool:
        try:
            return httpx.get(f"{base}/api/auth/me", timeout=1).status_code == 401
        except httpx.HTTPError:
            return False

    first = d.spawn(argv, "serve-1", serve_env)
    wait_for(up, 60, "porecast serve to answer")
    wait_for(lambda: b" ready." in d.logs[first.pid].read_bytes(), 60, "its local worker")
    with httpx.Client(base_url=base, headers=headers, timeout=10) as http:
        body = {"kind": "simulate", "params": {"realisations": LONG}}
        ids = [http.post(f"/api/scenarios/{d.scenario_id}/runs", json=body).json()["id"]
               for _ in range(2)]
    d.wait(ids[0], ("running",), timeout=60, check=lambda r: r.progress_current > 0)
    assert d.run(ids[1]).status == "queued"
    kill_tree(first)  # the server, its worker and the worker's pool process, all SIGKILL
    second = d.spawn(argv, "serve-2", serve_env)
    wait_for(up, 60, "porecast serve to answer again")
    for run_id in ids:
        run = d.wait(run_id, timeout=120)
        assert run.status == "succeeded", run.error
    assert "sent again (server restart)" in d.log_text(ids[0])
    assert "sent again (server restart)" in d.log_text(ids[1])
    (main,) = d.units(ids[0])
    assert main.deliveries == 2
    with httpx.Client(base_url=base, headers=headers, timeout=10) as http:
        listed = http.get(f"/api/projects/{d.project_id}/runs").json()
        assert [r["status"] for r in listed] == ["succeeded", "succeeded"]
        summary = json.loads(http.get(f"/api/runs/{ids[0]}/artefacts/summary.json").content)
        assert summary["realisations"] == LONG
    assert second.poll() is None
