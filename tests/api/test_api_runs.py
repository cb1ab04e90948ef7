"""Runs through the API, with their steps executed as plain functions.

Celery's testing guide: eager mode only imitates a worker, so the steps are
called directly (``run_steps.execute``) inside the test's transaction, while
messages go to the real filesystem broker of the test's data folder (their
number is checked); the wiring with real worker processes is in tests/worker.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import Any

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "worker"))

import run_data  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402

from porecast.db.models import Activity, Run, RunTask  # noqa: E402
from porecast.io import read_npz  # noqa: E402
from porecast.physics import risk  # noqa: E402
from porecast.services import classification as cls  # noqa: E402
from porecast.services import run_execution as ex  # noqa: E402
from porecast.services import run_jobs, run_steps, run_views  # noqa: E402
from porecast.services import runs as run_service  # noqa: E402
from porecast.services.errors import NotFound  # noqa: E402
from porecast.worker.app import broker_folder, make_celery  # noqa: E402
from porecast.worker.dispatch import CeleryDispatch  # noqa: E402

OCTET = {"Content-Type": "application/octet-stream"}
SECTIONS = ("burial", "geology", "rockphysics")
FAST = {"realisations": 100}


@pytest.fixture(autouse=True)
def _one_blas_thread():
    # the machine is shared: multi-threaded BLAS makes training ten times slower
    with threadpool_limits(1):
        yield


def make_ready(team, sid: int) -> None:
    owner = team["owner"]
    for section in SECTIONS:
        etag = owner.get(f"/api/scenarios/{sid}/sections/{section}").headers["ETag"]
        r = owner.put(f"/api/scenarios/{sid}/sections/{section}/ready", json={"ready": True},
                      headers={"If-Match": etag})
        assert r.status_code == 200, r.text


def upload(client, pid: int, path: Path) -> int:
    r = client.post(f"/api/projects/{pid}/grids", params={"filename": path.name},
                    content=path.read_bytes(), headers=OCTET)
    assert r.status_code == 201, r.text
    return r.json()["id"]


def start(client, sid: int, kind: str = "simulate", **body: Any):
    return client.post(f"/api/scenarios/{sid}/runs", json={"kind": kind, **body})


def env_of(app, **kw: Any) -> run_steps.StepEnv:
    s = app.state.settings
    kw.setdefault("progress_interval_s", 0.0)
    kw.setdefault("clock", app.state.clock)
    return run_steps.StepEnv(factory=app.state.session_factory,
                             dispatch=CeleryDispatch(make_celery(s)), data_dir=s.data_dir,
                             files_dir=s.files_dir, **kw)


def execute(app, run_id: int, key: str = "main", **kw: Any) -> dict[str, Any]:
    return run_steps.execute(env_of(app, **kw), run_id, key)


def queued_messages(app) -> list[Path]:
    return sorted((broker_folder(app.state.settings) / "queue").glob("*.porecast.msg"))


@pytest.fixture
def ready(team, scenario):
    make_ready(team, scenario["id"])
    return scenario


@pytest.fixture
def maps(team, tmp_path):
    paths = run_data.write_maps(tmp_path / "maps")
    return {name: upload(team["geophysicist"], team.project_id, p) for name, p in paths.items()}


def classify_params(maps: dict[str, int], **extra: Any) -> dict[str, Any]:
    return {"attribute_grids": {a: maps[a] for a in ("intercept", "gradient")},
            "covariate_grids": {c: maps[c] for c in run_data.VARYING}, **FAST, **extra}


# --------------------------------------------------------------------------- starting


def test_start_returns_202_with_revision_seed_hash_and_sends_one_message(team, ready, app):
    r = start(team["geologist"], ready["id"], params=FAST)
    assert r.status_code == 202, r.text
    run = r.json()
    assert run["status"] == "queued" and run["kind"] == "simulate"
    assert run["revision"] == ready["head_revision"]
    assert run["seed"] == run_data.document()["seed"]  # the revision's own seed by default
    assert len(run["input_hash"]) == 64 and int(run["input_hash"], 16) >= 0
    assert run["progress_current"] == 0 and run["progress_total"] == 1000
    assert len(queued_messages(app)) == 1
    body = json.loads(queued_messages(app)[0].read_text())
    assert body["headers"]["task"] == run_jobs.TASK_NAMES["main"]
    assert team["viewer"].get(f"/api/runs/{run['id']}").json()["status"] == "queued"


def test_runs_need_ready_sections_unless_an_owner_overrides(team, scenario, db):
    sid = scenario["id"]
    r = start(team["geologist"], sid)
    assert r.status_code == 409
    assert {e["loc"] for e in r.json()["errors"]} == set(SECTIONS)
    assert start(team["geologist"], sid, override_readiness=True).status_code == 403
    r = start(team["owner"], sid, override_readiness=True, params=FAST)
    assert r.status_code == 202 and r.json()["readiness_override"] is True
    verbs = [a.verb for a in db.query(Activity).filter_by(project_id=team.project_id)]
    assert "run.readiness_override" in verbs and "run.queued" in verbs


@pytest.mark.parametrize("body, loc", [
    ({"kind": "classify", "params": {"attribute_grids": {"intercept": 1}}}, "attribute_grids"),
    ({"kind": "simulate", "params": {"unknown": 1}}, "params.unknown"),
    ({"kind": "simulate", "params": {"realisations": 3}}, "params.realisations"),
    ({"kind": "calibrate", "params": {"well_id": 987654}}, "params.well_id"),
    ({"kind": "simulate", "revision": 99}, "revision"),
])
def test_invalid_run_requests_are_422(team, ready, body, loc):
    r = team["owner"].post(f"/api/scenarios/{ready['id']}/runs", json=body)
    assert r.status_code == 422, r.text
    assert any(loc in e["loc"] for e in r.json()["errors"]), r.json()


def test_classify_refuses_grids_of_another_project_and_missing_covariates(team, ready, maps,
                                                                          tmp_path):
    other = run_data.write_maps(tmp_path / "other")
    foreign = upload(team["outsider"], team.other_project_id, other["intercept"])
    params = classify_params(maps)
    params["attribute_grids"]["intercept"] = foreign
    r = start(team["owner"], ready["id"], "classify", params=params)
    assert r.status_code == 422 and "not in this project" in r.text
    params = classify_params(maps)
    del params["covariate_grids"]["net_uplift_m"]
    r = start(team["owner"], ready["id"], "classify", params=params)
    assert r.status_code == 422 and "net_uplift_m" in r.text


# --------------------------------------------------------------------------- simulate


def test_simulate_run_end_to_end_progress_files_log_and_activity(team, ready, app, db):
    run_id = start(team["owner"], ready["id"], params=FAST).json()["id"]
    states = []
    report = execute(app, run_id, on_state=states.append)
    assert report["outcome"] == "succeeded", report
    body = team["viewer"].get(f"/api/runs/{run_id}").json()
    assert body["status"] == "succeeded" and body["progress_current"] == 1000
    assert body["stage"] == "done" and body["started_at"] and body["finished_at"]
    currents = [s["current"] for s in states]
    assert currents == sorted(currents) and len(currents) > 3  # monotonic progress
    assert all(s["stage"] for s in states)
    names = {a["name"] for a in body["artefacts"]}
    assert names == {"samples.npz", "summary.json"}
    summary = json.loads(team["reviewer"].get(f"/api/runs/{run_id}/artefacts/summary.json")
                         .content)
    assert summary["seed"] == body["seed"] and summary["realisations"] == 100
    log = team["viewer"].get(f"/api/runs/{run_id}/log")
    assert log.headers["content-type"].startswith("text/plain")
    lines = log.text.splitlines()
    assert lines[0].startswith("20") and "queued by owner" in lines[0]
    assert any("main started" in x for x in lines) and lines[-1].endswith("run succeeded")
    entry = db.query(Activity).filter_by(verb="run.succeeded", object_id=run_id).one()
    assert "simulate run" in entry.summary
    assert team["viewer"].get(f"/api/runs/{run_id}/artefacts/summary.json").status_code == 403


def test_same_revision_and_seed_reproduce_bit_for_bit(team, ready, app, tmp_path):
    ids = [start(team["owner"], ready["id"], seed=77, params=FAST).json()["id"]
           for _ in range(2)]
    other = start(team["owner"], ready["id"], seed=78, params=FAST).json()["id"]
    for i in (*ids, other):
        assert execute(app, i)["outcome"] == "succeeded"
    runs = [team["owner"].get(f"/api/runs/{i}").json() for i in (*ids, other)]
    assert runs[0]["input_hash"] == runs[1]["input_hash"] != runs[2]["input_hash"]
    data = app.state.settings.data_dir
    a, b, c = (np.load(run_steps.run_dir(data, i) / "samples.npz") for i in (*ids, other))
    assert sorted(a.files) == sorted(b.files)
    for key in a.files:
        assert a[key].tobytes() == b[key].tobytes(), key  # bit for bit
    assert not np.array_equal(a["samples"], c["samples"])
    # and the same as a run of the science code outside the service
    direct = ex.simulate_outputs(run_data.document(), 77, tmp_path, realisations=100)
    with np.load(tmp_path / "samples.npz") as d:
        assert d["samples"].tobytes() == a["samples"].tobytes()
    assert direct["seed"] == 77


# --------------------------------------------------------------------------- classify maps


def test_classify_map_run_risk_numbers_map_view_and_risk_summary(team, ready, app, maps, db):
    pid = team.project_id
    outline = run_data.high_outline()
    prospect = team["geologist"].post(f"/api/projects/{pid}/prospects",
                                      json={"name": "High A", "outline": outline}).json()
    params = classify_params(maps, prospect_ids=[prospect["id"]], correlation_length_m=120.0)
    run_id = start(team["geophysicist"], ready["id"], "classify", params=params).json()["id"]
    assert execute(app, run_id)["outcome"] == "succeeded"
    body = team["viewer"].get(f"/api/runs/{run_id}").json()
    assert {a["name"] for a in body["artefacts"]} == {"classification.npz", "summary.json",
                                                      ex.TRAINING_FILE}
    row = body["result"]["prospects"][0]
    folder = run_steps.run_dir(app.state.settings.data_dir, run_id)
    data = read_npz(folder / "classification.npz")
    facies = body["result"]["facies"]
    post = np.stack([data.values[f"posterior_{cls.slug(f)}"] for f in facies], axis=-1)
    # independent recomputation with the science package (same seed and correlation)
    X, Y = risk.cell_centres(post.shape[:2], data.grid.x0, data.grid.y0, data.grid.dx,
                             data.grid.dy)
    ref = risk.prospect_risk(post, body["result"]["hydrocarbon"],
                             risk.polygon_mask(outline, X, Y), data.grid.dx * data.grid.dy,
                             seed=body["seed"], correlation_length_m=120.0,
                             spacing=(data.grid.dx, data.grid.dy))
    assert row["probability_hc"] == ref.probability_hc
    assert row["p50_area_km2"] == ref.p50_area_m2 / 1e6
    assert row["p90_area_km2"] <= row["p50_area_km2"] <= row["p10_area_km2"]
    # the gas-sand high is inside the outline: hydrocarbon is likely there
    assert row["probability_hc"] > 0.5

    view = team["reviewer"].get(f"/api/runs/{run_id}/map", params={"layer": "most_likely"})
    assert view.status_code == 200, view.text
    v = view.json()
    ny, nx = data.values["most_likely"].shape
    assert len(v["y"]) == ny and len(v["x"]) == nx
    assert v["x"][1] - v["x"][0] == run_data.DX and v["x"][0] == run_data.X0
    ml = data.values["most_likely"]
    assert v["z"] == [[int(x) if x >= 0 else None for x in r] for r in ml]
    assert [f["name"] for f in v["facies"]] == facies
    gas = team["reviewer"].get(f"/api/runs/{run_id}/map",
                               params={"layer": "posterior:gas sand"}).json()
    assert np.allclose(np.array(gas["z"], dtype=float), data.values["posterior_gas_sand"])
    for layer in ("entropy", "mahalanobis", "posterior:gas_sand"):
        assert team["owner"].get(f"/api/runs/{run_id}/map",
                                 params={"layer": layer}).status_code == 200
    bad = team["owner"].get(f"/api/runs/{run_id}/map", params={"layer": "posterior:basalt"})
    assert bad.status_code == 422
    assert team["viewer"].get(f"/api/runs/{run_id}/map").status_code == 403

    summary = team["viewer"].get(f"/api/projects/{pid}/risk-summary").json()
    (cell,) = [r for r in summary["rows"] if r["run_id"] == run_id]
    assert cell["probability_hc"] == row["probability_hc"]
    assert cell["p10_area_km2"] == row["p10_area_km2"]
    (scen,) = summary["scenarios"]
    assert scen["readiness"] == {"ready": True, "not_ready": []}
    assert scen["run"]["stale"] is False and scen["last_change"]["revision"] == 1


def test_map_view_thins_by_whole_strides(team, ready, app, maps, db):
    run_id = start(team["owner"], ready["id"], "classify", params=classify_params(maps)).json()
    assert execute(app, run_id["id"])["outcome"] == "succeeded"
    user = team.users["owner"]
    v = run_views.map_view(db, user, run_id["id"], layer="entropy",
                           data_dir=app.state.settings.data_dir, max_points=7)
    full = read_npz(run_steps.run_dir(app.state.settings.data_dir, run_id["id"])
                    / "classification.npz").values["entropy"]
    assert v["stride"] == [3, 3] and len(v["x"]) <= 7 and len(v["y"]) <= 7
    assert np.allclose(np.array(v["z"], dtype=float), full[::3, ::3])


def test_summarise_run_recomputes_the_classification_risk(team, ready, app, maps):
    pid = team.project_id
    prospect = team["geologist"].post(
        f"/api/projects/{pid}/prospects",
        json={"name": "High A", "outline": run_data.high_outline()}).json()
    params = classify_params(maps, prospect_ids=[prospect["id"]])
    cid = start(team["owner"], ready["id"], "classify", params=params).json()["id"]
    assert execute(app, cid)["outcome"] == "succeeded"
    sid = start(team["owner"], ready["id"], "summarise").json()["id"]
    assert execute(app, sid)["outcome"] == "succeeded"
    table = json.loads(team["owner"].get(f"/api/runs/{sid}/artefacts/risk_table.json").content)
    classified = team["owner"].get(f"/api/runs/{cid}").json()["result"]["prospects"][0]
    (row,) = table["rows"]
    assert row["run_id"] == cid and row["prospect"] == "High A"
    for key in ("probability_hc", "expected_area_km2", "p90_area_km2", "p50_area_km2",
                "p10_area_km2"):
        assert row[key] == classified[key], key
    csv_text = team["owner"].get(f"/api/runs/{sid}/artefacts/risk_table.csv").text
    assert csv_text.splitlines()[0].startswith("prospect,scenario,probability_hc")


def test_summarise_without_classification_is_409(team, ready):
    team["owner"].post(f"/api/projects/{team.project_id}/prospects",
                       json={"name": "L", "outline": run_data.high_outline()})
    assert start(team["owner"], ready["id"], "summarise").status_code == 409


# --------------------------------------------------------------------------- cubes


def test_cube_run_tiles_join_and_equal_a_single_process_classification(team, ready, app,
                                                                        tmp_path):
    paths = run_data.write_cubes(tmp_path / "cube")
    ids = {n: upload(team["owner"], team.project_id, p) for n, p in paths.items()}
    params = {"attribute_grids": {a: ids[a] for a in ("intercept", "gradient")},
              "covariate_grids": {c: ids[c] for c in run_data.VARYING}, "tile_traces": 10,
              **FAST}
    run_id = start(team["owner"], ready["id"], "classify", params=params).json()["id"]
    before = len(queued_messages(app))
    report = execute(app, run_id)
    assert report["outcome"] == "succeeded" and len(report["sent"]) == 5  # 48 traces / 10
    assert len(queued_messages(app)) == before + 5
    tiles = [t for t in app.state.session_factory().query(RunTask).filter_by(run_id=run_id)
             if t.kind == "tile"]
    assert [(t.trace_start, t.trace_stop) for t in tiles] == [(0, 10), (10, 20), (20, 30),
                                                            (30, 40), (40, 48)]
    reports = [execute(app, run_id, t.key) for t in tiles]
    assert [r["sent"] for r in reports] == [[], [], [], [], ["join"]]  # the last one triggers
    assert execute(app, run_id, tiles[0].key)["outcome"] == "done"  # re-delivery: no-op
    assert execute(app, run_id, "join")["outcome"] == "succeeded"
    body = team["owner"].get(f"/api/runs/{run_id}").json()
    assert body["status"] == "succeeded" and body["n_tiles"] == body["n_tiles_done"] == 5
    names = {a["name"] for a in body["artefacts"]}
    assert "most_likely.sgy" in names and "posterior_gas_sand.sgy" in names

    # reference: the whole cube in one process from the same training samples
    folder = run_steps.run_dir(app.state.settings.data_dir, run_id)
    model = ex.model_from_training(run_data.document(), body["seed"],
                                   folder / ex.TRAINING_FILE)
    covs = ex.read_covariate_arrays(model, {c: paths[c] for c in run_data.VARYING})
    ref = tmp_path / "ref"
    ref.mkdir()
    cls.classify_cube(model, {a: paths[a] for a in model.attributes}, covs, ref)
    import segyio

    for name in cls.cube_output_names(model):
        with segyio.open(folder / f"{name}.sgy", ignore_geometry=True) as a, \
                segyio.open(ref / f"{name}.sgy", ignore_geometry=True) as b:
            assert np.array_equal(segyio.tools.collect(a.trace[:]),
                                  segyio.tools.collect(b.trace[:]), equal_nan=True), name
            assert a.header[7][segyio.TraceField.INLINE_3D] == \
                b.header[7][segyio.TraceField.INLINE_3D]
    assert not (folder / run_steps.TILES).exists() and not (folder / run_steps.STAGING).exists()

    sec = team["reviewer"].get(f"/api/runs/{run_id}/section", params={"line": 2}).json()
    with segyio.open(folder / "most_likely.sgy") as f:
        expected = segyio.tools.cube(f)[2].T
    assert sec["line"] == 2 and sec["n_lines"] == 6 and len(sec["x"]) == 8
    assert sec["z"] == [[int(v) if v >= 0 else None for v in row] for row in expected]
    assert team["owner"].get(f"/api/runs/{run_id}/section",
                             params={"line": 6}).status_code == 422
    assert team["owner"].get(f"/api/runs/{run_id}/map").status_code == 409


# --------------------------------------------------------------------------- cancel


def test_cancel_a_queued_run_and_its_message_is_a_no_op(team, ready, app):
    run_id = start(team["owner"], ready["id"], params=FAST).json()["id"]
    assert team["viewer"].post(f"/api/runs/{run_id}/cancel").status_code == 403
    r = team["geologist"].post(f"/api/runs/{run_id}/cancel")
    assert r.status_code == 200 and r.json()["status"] == "cancelled"
    assert execute(app, run_id)["outcome"] == "done"
    assert team["owner"].get(f"/api/runs/{run_id}").json()["artefacts"] == []
    assert team["owner"].post(f"/api/runs/{run_id}/cancel").status_code == 409


def test_cancel_while_running_stops_at_the_next_chunk(team, ready, app, db):
    run_id = start(team["owner"], ready["id"], params={"realisations": 400}).json()["id"]
    seen = []

    def cancel_on_first_progress(meta):
        seen.append(meta["current"])
        if len(seen) == 1:  # the user presses cancel while the forward model runs
            with app.state.session_factory() as s:
                run_service.cancel_run(s, team.users["owner"], run_id, now=app.state.clock(),
                                       dispatch=CeleryDispatch(make_celery(app.state.settings)),
                                       data_dir=app.state.settings.data_dir)
                s.commit()

    report = execute(app, run_id, on_state=cancel_on_first_progress)
    assert report["outcome"] == "stopped" and len(seen) == 1
    body = team["owner"].get(f"/api/runs/{run_id}").json()
    assert body["status"] == "cancelled" and body["artefacts"] == []
    assert "main stopped: the run is cancelled" in team["owner"].get(
        f"/api/runs/{run_id}/log").text
    assert not run_steps.run_dir(app.state.settings.data_dir, run_id).joinpath(
        run_steps.STAGING).exists()


# --------------------------------------------------------------------------- reliability


def _dead_pid() -> int:
    import subprocess

    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid


def test_a_unit_whose_worker_keeps_dying_fails_after_max_deliveries(team, ready, app, db):
    run_id = start(team["owner"], ready["id"], params=FAST).json()["id"]
    factory = app.state.session_factory
    for n in range(1, 4):
        with run_jobs.transaction(factory) as s:
            c = run_jobs.claim(s, run_id, "main", worker="w@h", task_id=f"t{n}",
                               now=app.state.clock(), max_deliveries=3, lease_s=60,
                               pid=_dead_pid())
        assert c.outcome == "run" and c.delivery == n  # the process died right after
    report = execute(app, run_id, max_deliveries=3)
    assert report["outcome"] == "exhausted"
    body = team["owner"].get(f"/api/runs/{run_id}").json()
    assert body["status"] == "failed" and "started 3 times" in body["error"]
    assert db.query(Activity).filter_by(verb="run.failed", object_id=run_id).count() == 1


def test_a_live_holder_keeps_its_unit_and_a_duplicate_is_dropped(team, ready, app):
    run_id = start(team["owner"], ready["id"], params=FAST).json()["id"]
    import os

    with run_jobs.transaction(app.state.session_factory) as s:
        c = run_jobs.claim(s, run_id, "main", worker="w@h", task_id="t1", now=app.state.clock(),
                           max_deliveries=3, lease_s=60, pid=os.getppid())
    assert c.outcome == "run"
    assert execute(app, run_id)["outcome"] == "busy"


def test_recovery_requeues_orphans_sends_unsent_and_fails_exhausted(team, ready, app, db):
    clock = app.state.clock
    factory = app.state.session_factory
    orphan = start(team["owner"], ready["id"], params=FAST).json()["id"]
    exhausted = start(team["owner"], ready["id"], params=FAST).json()["id"]
    unsent = start(team["owner"], ready["id"], params=FAST).json()["id"]
    with run_jobs.transaction(factory) as s:
        run_jobs.claim(s, orphan, "main", worker="w@h", task_id="a", now=clock(),
                       max_deliveries=2, lease_s=60, pid=_dead_pid())
        for _ in range(2):
            run_jobs.claim(s, exhausted, "main", worker="w@h", task_id="b", now=clock(),
                           max_deliveries=2, lease_s=60, pid=_dead_pid())
        s.query(RunTask).filter_by(run_id=unsent).update({"sent_at": None})
    clock.advance(minutes=1)
    before = len(queued_messages(app))
    with run_jobs.transaction(factory) as s:
        sends = run_jobs.recover(s, now=clock(), lease_s=60, max_deliveries=2,
                                 resend_queued=False)
    assert sorted(x.run_id for x in sends) == sorted([orphan, unsent])
    with run_jobs.transaction(factory) as s:
        assert run_jobs.send_all(s, env_of(app).dispatch, sends, now=clock()) == 2
    assert len(queued_messages(app)) == before + 2
    assert db.get(Run, exhausted).status == "failed"
    assert "lost each time" in db.get(Run, exhausted).error
    assert execute(app, orphan)["outcome"] == "succeeded"  # taken over, delivery 2


def test_sse_stream_sends_progress_then_end(team, ready, app):
    run_id = start(team["owner"], ready["id"], params=FAST).json()["id"]
    r = team["viewer"].get(f"/api/runs/{run_id}/events", params={"timeout": 1,
                                                                  "interval": 0.2})
    assert r.headers["content-type"].startswith("text/event-stream")
    assert "event: progress" in r.text and "event: end" not in r.text  # still queued
    execute(app, run_id)
    text = team["viewer"].get(f"/api/runs/{run_id}/events").text
    events = [b for b in text.split("\n\n") if b.startswith("event:")]
    assert events[0].startswith("event: progress") and events[-1].startswith("event: end")
    assert json.loads(events[0].split("data: ", 1)[1])["status"] == "succeeded"


def test_artefact_names_are_checked(team, ready, app, db):
    run_id = start(team["owner"], ready["id"], params=FAST).json()["id"]
    execute(app, run_id)
    folder = run_steps.run_dir(app.state.settings.data_dir, run_id)
    (folder / ".hidden").write_text("x")
    for name in (".hidden", "nothing.npz", "%2e%2e%2fporecast.sqlite", "..%2F..%2Fx", "a%2Fb"):
        assert team["owner"].get(f"/api/runs/{run_id}/artefacts/{name}").status_code == 404
    for name in ("../../porecast.sqlite", "/etc/passwd", "summary.json/.."):
        with pytest.raises(NotFound):
            run_service.artefact_path(db, team.users["owner"], run_id, name,
                                      app.state.settings.data_dir)
    assert team["outsider"].get(f"/api/runs/{run_id}/artefacts/summary.json").status_code == 404


def test_list_runs_filters_and_pages(team, ready, app):
    ids = [start(team["owner"], ready["id"], params=FAST).json()["id"] for _ in range(3)]
    team["owner"].post(f"/api/runs/{ids[0]}/cancel")
    listed = team["viewer"].get(f"/api/projects/{team.project_id}/runs").json()
    assert [r["id"] for r in listed] == ids[::-1]
    assert [r["id"] for r in team["viewer"].get(
        f"/api/projects/{team.project_id}/runs", params={"status": "cancelled"}).json()] == [ids[0]]
    page = team["viewer"].get(f"/api/projects/{team.project_id}/runs",
                              params={"before_id": ids[2], "limit": 1}).json()
    assert [r["id"] for r in page] == [ids[1]]
    assert team["outsider"].get(f"/api/projects/{team.project_id}/runs").status_code == 404


def test_calibrate_run_blind_test_at_a_well(team, ready, app, tmp_path):
    las = run_data.write_las(tmp_path / "w.las")
    r = team["geologist"].post(f"/api/projects/{team.project_id}/wells",
                               params={"filename": "w.las"}, content=las.read_bytes(),
                               headers=OCTET)
    assert r.status_code == 201, r.text
    params = {"well_id": r.json()["id"], "covariates": {"net_uplift_m": 200.0},
              "block_m": 5.0, **FAST}
    run_id = start(team["owner"], ready["id"], "calibrate", params=params).json()["id"]
    assert execute(app, run_id)["outcome"] == "succeeded"
    body = team["owner"].get(f"/api/runs/{run_id}").json()
    res = body["result"]
    matrix = np.array(res["matrix"])
    assert matrix.sum() == res["n_samples"] > 0
    assert res["accuracy"] == pytest.approx(np.trace(matrix) / matrix.sum())
    csv_text = team["owner"].get(f"/api/runs/{run_id}/artefacts/well_facies.csv").text
    assert len(csv_text.splitlines()) == 401  # header + one row per log sample
