"""Sensitivity runs through the API: validation, a run to completion, failure and cancel.

As in ``test_api_runs.py`` the run's step is executed as a plain function
(``run_steps.execute``) inside the test's transaction. The run is small (30
realisations per facies and node on a 16 x 20 map), but it is the whole chain:
2 x inputs + 1 forward models, PDFs, classifications and prospect risks.
"""

from __future__ import annotations

import json
import re
import sys
from pathlib import Path
from typing import Any

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "worker"))

import run_data  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402

from porecast.physics import forward  # noqa: E402
from porecast.physics.scenario import validate_scenario  # noqa: E402
from porecast.services import run_steps  # noqa: E402
from porecast.services import runs as run_service  # noqa: E402
from porecast.services import sensitivity as sens  # noqa: E402
from porecast.worker.app import make_celery  # noqa: E402
from porecast.worker.dispatch import CeleryDispatch  # noqa: E402

OCTET = {"Content-Type": "application/octet-stream"}
SECTIONS = ("burial", "geology", "rockphysics")
REALISATIONS = 30


@pytest.fixture(autouse=True)
def _one_blas_thread():
    # the machine is shared: multi-threaded BLAS makes training much slower
    with threadpool_limits(1):
        yield


@pytest.fixture
def ready(team, scenario):
    owner = team["owner"]
    sid = scenario["id"]
    for section in SECTIONS:
        etag = owner.get(f"/api/scenarios/{sid}/sections/{section}").headers["ETag"]
        r = owner.put(f"/api/scenarios/{sid}/sections/{section}/ready", json={"ready": True},
                      headers={"If-Match": etag})
        assert r.status_code == 200, r.text
    return scenario


def _upload(client, pid: int, path: Path) -> int:
    r = client.post(f"/api/projects/{pid}/grids", params={"filename": path.name},
                    content=path.read_bytes(), headers=OCTET)
    assert r.status_code == 201, r.text
    return r.json()["id"]


@pytest.fixture
def maps(team, tmp_path):
    paths = run_data.write_maps(tmp_path / "maps")
    return {name: _upload(team["geophysicist"], team.project_id, p) for name, p in paths.items()}


def _prospect(team, name: str, outline: list[list[float]]) -> dict[str, Any]:
    r = team["geologist"].post(f"/api/projects/{team.project_id}/prospects",
                               json={"name": name, "outline": outline})
    assert r.status_code == 201, r.text
    return r.json()


def _params(maps: dict[str, int], **extra: Any) -> dict[str, Any]:
    return {"attribute_grids": {a: maps[a] for a in ("intercept", "gradient")},
            "covariate_grids": {c: maps[c] for c in run_data.VARYING},
            "realisations": REALISATIONS, **extra}


def _start(client, sid: int, params: dict[str, Any], kind: str = "sensitivity"):
    return client.post(f"/api/scenarios/{sid}/runs", json={"kind": kind, "params": params})


def _execute(app, run_id: int, **kw: Any) -> dict[str, Any]:
    s = app.state.settings
    kw.setdefault("progress_interval_s", 0.0)
    kw.setdefault("clock", app.state.clock)
    env = run_steps.StepEnv(factory=app.state.session_factory,
                            dispatch=CeleryDispatch(make_celery(s)), data_dir=s.data_dir,
                            files_dir=s.files_dir, **kw)
    return run_steps.execute(env, run_id, "main")


# --------------------------------------------------------------------------- validation


@pytest.mark.parametrize("extra, loc, words", [
    ({"low_quantile": 0.0}, "params.low_quantile", "between 0 and 1"),
    ({"high_quantile": 1.2}, "params.high_quantile", "0 < low_quantile < high_quantile < 1"),
    ({"low_quantile": 0.6, "high_quantile": 0.4}, "params.high_quantile",
     "greater than low_quantile (0.6)"),
    ({"low_quantile": 0.5, "high_quantile": 0.5}, "params.high_quantile",
     "0 < low_quantile < high_quantile < 1"),
    ({"fix_others": "maximum"}, "params.fix_others", "'mean' or 'median'"),
    ({"realisations": 3}, "params.realisations", "greater than or equal to 10"),
    ({"correlation_length_m": -5}, "params.correlation_length_m", "greater than or equal to 0"),
    ({"max_mahalanobis": 3.0}, "params.max_mahalanobis", "Extra inputs"),
    ({"prospect_ids": [987654]}, "params.prospect_ids.0", "not in this project"),
])
def test_sensitivity_parameters_are_checked_with_the_field_and_its_range(
        team, ready, maps, extra, loc, words):
    _prospect(team, "High A", run_data.high_outline())
    r = _start(team["owner"], ready["id"], _params(maps, **extra))
    assert r.status_code == 422, r.text
    errors = r.json()["errors"]
    assert errors[0]["loc"] == loc, errors
    assert words in errors[0]["msg"], errors


def test_sensitivity_needs_a_prospect_unique_names_maps_and_every_covariate(
        team, ready, maps, tmp_path):
    sid = ready["id"]
    r = _start(team["owner"], sid, _params(maps))
    assert r.status_code == 422
    (err,) = r.json()["errors"]
    assert err["loc"] == "params.prospect_ids" and "at least one prospect" in err["msg"]

    a = _prospect(team, "Twin", run_data.high_outline())
    b = _prospect(team, "Twin", run_data.square(run_data.X0, run_data.Y0, 200.0))
    r = _start(team["owner"], sid, _params(maps))
    assert r.status_code == 422 and "two prospects are called 'Twin'" in r.text
    # choosing one of them is fine (queued, not run here)
    r = _start(team["owner"], sid, _params(maps, prospect_ids=[b["id"]]))
    assert r.status_code == 202, r.text
    assert r.json()["parameters"]["prospect_ids"] == [b["id"]]
    assert team["geologist"].patch(f"/api/prospects/{a['id']}",
                                   json={"name": "Twin west"}).status_code == 200
    # all of the project's prospects by default, resolved when the run is created
    r = _start(team["owner"], sid, _params(maps))
    assert r.status_code == 202, r.text
    assert r.json()["parameters"]["prospect_ids"] == [a["id"], b["id"]]
    assert r.json()["parameters"]["low_quantile"] == 0.1
    assert r.json()["parameters"]["high_quantile"] == 0.9

    params = _params(maps)
    del params["covariate_grids"]["net_uplift_m"]
    r = _start(team["owner"], sid, params)
    assert r.status_code == 422 and "net_uplift_m" in r.text

    cubes = run_data.write_cubes(tmp_path / "cube")
    ids = {n: _upload(team["owner"], team.project_id, p) for n, p in cubes.items()}
    params = _params(ids)
    r = _start(team["owner"], sid, params)
    assert r.status_code == 422, r.text
    (err,) = r.json()["errors"]
    assert err["loc"] == "params.attribute_grids"
    assert "are cubes" in err["msg"] and "give maps of the horizon" in err["msg"]

    # a viewer or reviewer cannot start one
    assert _start(team["viewer"], sid, _params(maps)).status_code == 403


# --------------------------------------------------------------------------- a run


def test_sensitivity_run_to_completion_progress_files_and_the_classify_base(
        team, ready, maps, app):
    high = _prospect(team, "High A", run_data.high_outline())
    flank = _prospect(team, "Flank", run_data.square(run_data.X0 + 50.0,
                                                     run_data.Y0 + 50.0, 250.0))
    sid = ready["id"]
    r = _start(team["geophysicist"], sid, _params(maps, correlation_length_m=120.0))
    assert r.status_code == 202, r.text
    run_id = r.json()["id"]
    states: list[dict[str, Any]] = []

    def on_state(meta: dict[str, Any]) -> None:
        states.append(meta)
        app.state.clock.advance(seconds=1)  # the test's clock stands still otherwise

    report = _execute(app, run_id, on_state=on_state)
    assert report["outcome"] == "succeeded", report

    sc = validate_scenario(run_data.document())
    n_inputs = len(forward.uncertain_inputs(sc))
    total = 2 * n_inputs + 1
    # Progress: evaluations done of the total, monotonic, with an ETA once under way.
    stages = [s["stage"] for s in states]
    counts = [int(m.group(1)) for st in stages
              if (m := re.fullmatch(rf"tornado \((\d+) of {total} evaluations\)", st))]
    assert counts[0] == 0 and counts[-1] == total
    assert counts == sorted(counts) and len(set(counts)) == total + 1
    currents = [s["current"] for s in states]
    assert currents == sorted(currents)
    etas = [s["eta_seconds"] for s in states if s["stage"].startswith("tornado (")]
    assert etas[0] is None and all(e is not None and e > 0 for e in etas[2:-1])
    assert stages[-1] == "publish"

    body = team["viewer"].get(f"/api/runs/{run_id}").json()
    assert body["status"] == "succeeded" and body["kind"] == "sensitivity"
    assert body["progress_current"] == 1000 and body["stage"] == "done"
    assert {a["name"] for a in body["artefacts"]} == {"sensitivity.json", "tornado.html"}
    folder = run_steps.run_dir(app.state.settings.data_dir, run_id)
    assert not (folder / run_steps.STAGING).exists()
    # a viewer reads the summary on the run, not the files
    assert team["viewer"].get(f"/api/runs/{run_id}/artefacts/sensitivity.json"
                              ).status_code == 403
    doc = json.loads(team["reviewer"].get(
        f"/api/runs/{run_id}/artefacts/sensitivity.json").content)
    assert doc["kind"] == "porecast.sensitivity" and doc["seed"] == body["seed"]
    assert doc["realisations"] == REALISATIONS and doc["n_evaluations"] == total
    assert doc["low_quantile"] == 0.1 and doc["high_quantile"] == 0.9
    assert [p["name"] for p in doc["prospects"]] == ["High A", "Flank"]
    assert doc["facies"] == [f.name for f in sc.geology.facies]
    assert "not for well design" in doc["caution"]
    assert len(doc["inputs"]) == n_inputs
    for name in ("High A", "Flank"):
        assert set(doc["tornado"][name]) == set(sens.OUTCOMES)
        for outcome, unit in sens.OUTCOMES.items():
            t = doc["tornado"][name][outcome]
            assert t["unit"] == unit and len(t["swings"]) == n_inputs
            sizes = [abs(s["outcome_high"] - s["outcome_low"]) for s in t["swings"]]
            assert sizes == sorted(sizes, reverse=True)  # largest first
            assert all(s["base"] == t["base"] for s in t["swings"])
    # The gas-sand high carries hydrocarbon area, and its area swings with the inputs.
    area = doc["tornado"]["High A"]["expected_area_km2"]
    assert area["base"] > 0.05
    top = area["swings"][0]
    assert abs(top["outcome_high"] - top["outcome_low"]) > 0.0
    hc = [f.name for f in sc.geology.facies if f.hydrocarbon]
    assert set(doc["indices"]) == set(hc)
    for entry in doc["indices"].values():
        values = [e["value"] for e in entry["indices"].values()]
        assert values == sorted(values, reverse=True)
        for e in entry["indices"].values():
            assert e["ci_low"] <= e["value"] <= e["ci_high"] and e["standard_error"] >= 0

    # The base case is what a classify run of the same revision, seed and maps reports.
    cparams = {k: v for k, v in _params(maps, correlation_length_m=120.0).items()}
    cparams["prospect_ids"] = [high["id"], flank["id"]]
    cid = _start(team["owner"], sid, cparams, kind="classify").json()["id"]
    assert _execute(app, cid)["outcome"] == "succeeded"
    classified = {p["name"]: p for p in
                  team["owner"].get(f"/api/runs/{cid}").json()["result"]["prospects"]}
    for name in ("High A", "Flank"):
        for outcome in sens.OUTCOMES:
            assert doc["tornado"][name][outcome]["base"] == pytest.approx(
                classified[name][outcome], rel=1e-12)

    # The summary on the run row: base values and the largest swing per prospect.
    res = body["result"]
    assert res["n_evaluations"] == total and res["n_inputs"] == n_inputs
    (first, second) = res["prospects"]
    assert (first["id"], second["id"]) == (high["id"], flank["id"])
    got = first["outcomes"]["expected_area_km2"]
    assert got["base"] == area["base"] and got["unit"] == "km2"
    assert got["largest"] == {"path": top["path"], "outcome_low": top["outcome_low"],
                              "outcome_high": top["outcome_high"]}

    # The report: the same charts as a page that needs no network.
    html = team["reviewer"].get(f"/api/runs/{run_id}/artefacts/tornado.html").text
    assert "High A: expected hydrocarbon area (km²)" in html and "Flank" in html
    assert len(html) > 1_000_000  # plotly.js inlined
    assert not re.search(r"<script[^>]+src=", html)
    log = team["owner"].get(f"/api/runs/{run_id}/log").text
    assert "sensitivity of revision 1" in log and log.splitlines()[-1].endswith("run succeeded")


def test_a_prospect_off_the_map_fails_the_run_with_the_reason(team, ready, maps, app):
    _prospect(team, "Far away", run_data.square(0.0, 0.0, 300.0))
    run_id = _start(team["owner"], ready["id"], _params(maps)).json()["id"]
    report = _execute(app, run_id)
    assert report["outcome"] == "failed"
    body = team["viewer"].get(f"/api/runs/{run_id}").json()
    assert body["status"] == "failed" and body["artefacts"] == []
    assert body["error"].startswith("prospect Far away: ")
    assert "outline holds no cell centre" in body["error"]
    assert "run failed: prospect Far away" in team["owner"].get(f"/api/runs/{run_id}/log").text


def test_cancel_while_the_tornado_runs_stops_without_files(team, ready, maps, app):
    _prospect(team, "High A", run_data.high_outline())
    run_id = _start(team["owner"], ready["id"], _params(maps)).json()["id"]
    seen: list[str] = []

    def cancel_after_first_evaluation(meta: dict[str, Any]) -> None:
        seen.append(meta["stage"])
        if meta["stage"].startswith("tornado (1 of"):
            with app.state.session_factory() as s:
                run_service.cancel_run(s, team.users["owner"], run_id, now=app.state.clock(),
                                       dispatch=CeleryDispatch(make_celery(app.state.settings)),
                                       data_dir=app.state.settings.data_dir)
                s.commit()

    report = _execute(app, run_id, on_state=cancel_after_first_evaluation)
    assert report["outcome"] == "stopped", report
    assert seen[-1].startswith("tornado (1 of")  # stopped at the next evaluation
    body = team["owner"].get(f"/api/runs/{run_id}").json()
    assert body["status"] == "cancelled" and body["artefacts"] == []
    assert not run_steps.run_dir(app.state.settings.data_dir, run_id).joinpath(
        run_steps.STAGING).exists()
