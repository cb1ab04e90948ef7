"""Real ``porecast worker`` processes over the one-machine broker and over Redis.

The same checks run against both brokers: a simulate run goes through and its
result reaches the result backend; a cube classification is split into tiles
that run on two pool processes and are joined into files equal to a
single-process classification; a running run stops when cancelled.
"""

from __future__ import annotations

import socket
import subprocess
import sys
import time
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest
import run_data
from worker_helpers import Deployment, redis_url, wait_for

from porecast.services import classification as cls
from porecast.services import grids
from porecast.services import run_execution as ex
from porecast.services import runs as run_service
from porecast.services.run_steps import STAGING, TILES, run_dir

pytestmark = pytest.mark.slow


@pytest.fixture(scope="module", params=["filesystem", pytest.param("redis",
                                                                   marks=pytest.mark.redis)])
def deployment(request, tmp_path_factory):
    broker = None if request.param == "filesystem" else redis_url()
    d = Deployment(tmp_path_factory.mktemp(request.param), broker_url=broker)
    try:
        d.worker_name = f"wiring-{request.param}"
        d.start_worker(d.worker_name, concurrency=2)
        yield d
    finally:
        d.stop_all()


def test_simulate_round_trip_and_result_backend(deployment):
    run_id = deployment.start_run(params={"realisations": 100})
    run = deployment.wait(run_id, timeout=60)
    assert run.status == "succeeded", run.error
    assert run.progress_current == run.progress_total == 1000
    files = sorted(p.name for p in run_dir(deployment.settings.data_dir, run_id).iterdir())
    assert files == ["samples.npz", "summary.json"]
    report = deployment.celery.AsyncResult(run.task_id).get(timeout=30, interval=0.1)
    assert report["outcome"] == "succeeded" and report["worker"].startswith("wiring-")


def test_health_check_pings_the_worker_through_the_broker(deployment):
    name = f"{deployment.worker_name}@{socket.gethostname()}"  # what %h expands to
    check = [sys.executable, "-m", "porecast.worker.health", "--timeout", "5"]
    ok = subprocess.run([*check, "--name", name], env=deployment.env, capture_output=True,
                        text=True, timeout=60)
    assert ok.returncode == 0, ok.stdout + ok.stderr
    missing = subprocess.run([*check, "--name", "nobody@nowhere", "--timeout", "1"],
                             env=deployment.env, capture_output=True, text=True, timeout=60)
    assert missing.returncode == 1 and "no answer" in missing.stdout


def test_cube_tiles_run_in_parallel_and_join_to_the_single_process_result(deployment,
                                                                         tmp_path: Path):
    with deployment.writer() as db:
        user = deployment.user(db)
        paths = run_data.write_cubes(tmp_path / "in", shape=(6, 8, 12), segy=False)
        ids = {}
        for name, path in paths.items():
            staged = deployment.settings.tmp_dir / path.name
            staged.parent.mkdir(parents=True, exist_ok=True)
            staged.write_bytes(path.read_bytes())
            ids[name] = grids.import_grid(db, user, deployment.project_id, staged, name=name,
                                          files_dir=deployment.settings.files_dir,
                                          now=datetime.now(UTC)).id
        db.commit()
    params = {"attribute_grids": {a: ids[a] for a in ("intercept", "gradient")},
              "covariate_grids": {c: ids[c] for c in run_data.VARYING}, "tile_traces": 12,
              "realisations": 100}
    run_id = deployment.start_run("classify", params)
    run = deployment.wait(run_id, timeout=120)
    assert run.status == "succeeded", run.error
    tiles = [u for u in deployment.units(run_id) if u.kind == "tile"]
    assert len(tiles) == 4 and all(u.status == "succeeded" for u in tiles)
    assert all(u.deliveries == 1 for u in tiles)
    assert len({u.pid for u in tiles}) == 2  # both pool processes took tiles
    folder = run_dir(deployment.settings.data_dir, run_id)
    model = ex.model_from_training(run_data.document(), run.seed, folder / ex.TRAINING_FILE)
    covs = ex.read_covariate_arrays(model, {c: paths[c] for c in run_data.VARYING})
    ref = tmp_path / "ref"
    ref.mkdir()
    cls.classify_cube(model, {a: paths[a] for a in model.attributes}, covs, ref)
    for name in cls.cube_output_names(model):
        joined = np.load(folder / f"{name}.npy")
        single = np.load(ref / f"{name}.npy")
        assert joined.shape == (6, 8, 12)
        assert np.array_equal(joined, single, equal_nan=True), name
    assert not (folder / TILES).exists() and not (folder / STAGING).exists()


def test_cancel_stops_a_running_step(deployment):
    run_id = deployment.start_run(params={"realisations": 40000})
    deployment.wait(run_id, ("running",), timeout=60, check=lambda r: r.progress_current > 0)
    with deployment.writer() as db:
        run_service.cancel_run(db, deployment.user(db), run_id, now=datetime.now(UTC),
                               dispatch=deployment.dispatch,
                               data_dir=deployment.settings.data_dir)
        db.commit()
    t0 = time.monotonic()
    wait_for(lambda: "main stopped" in deployment.log_text(run_id), 30, "the step to stop")
    stopped_after = time.monotonic() - t0
    run = deployment.run(run_id)
    assert run.status == "cancelled"
    assert [u.status for u in deployment.units(run_id)] == ["cancelled"]
    assert not (run_dir(deployment.settings.data_dir, run_id) / "samples.npz").exists()
    assert stopped_after < 30
