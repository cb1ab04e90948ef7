"""Authorisation matrix: every route of the OpenAPI schema x every role x outsider x anonymous.

``RULES`` names, for each route, who may call it. A route in the schema without
an entry fails ``test_every_route_has_a_rule``, so a new route cannot ship
without an authorisation decision. For each route every actor sends a valid
request inside its own SAVEPOINT (rolled back afterwards, so a DELETE by one
actor does not hide the object from the next) and the status must be:

* anonymous: 401 (except the public login route);
* a user who is not a member of the object's project: 404 (existence not leaked);
* a member whose role is not allowed: 403;
* an allowed caller: a success (2xx).
"""

from __future__ import annotations

import shutil
import sys
from pathlib import Path
from typing import Any

import pytest
from api_helpers import PASSWORD, ROLES, csv_map_bytes, las_bytes

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "worker"))
import run_data  # noqa: E402  (tests/worker: invented run inputs)

MEMBER_ROLES = set(ROLES)
READERS = {"owner", "basin_modeller", "geologist", "geophysicist", "reviewer"}
CONTRIBUTORS = {"owner", "basin_modeller", "geologist", "geophysicist"}
EVERYONE = MEMBER_ROLES | {"outsider", "admin"}
ACTORS = ("anonymous", "outsider", "admin", *ROLES)

#: (method, path) -> (who may call it, whether non-members get 404 rather than 403)
RULES: dict[tuple[str, str], tuple[set[str], bool]] = {
    ("POST", "/api/auth/login"): ({"anonymous"} | EVERYONE, False),  # public
    ("POST", "/api/auth/logout"): (EVERYONE, False),
    ("GET", "/api/auth/me"): (EVERYONE, False),
    ("POST", "/api/auth/password"): (EVERYONE, False),
    ("GET", "/api/auth/tokens"): (EVERYONE, False),
    ("POST", "/api/auth/tokens"): (EVERYONE, False),
    ("DELETE", "/api/auth/tokens/{token_id}"): ({"owner"}, True),  # own tokens only
    ("GET", "/api/users"): ({"admin"}, False),
    ("POST", "/api/users"): ({"admin"}, False),
    ("GET", "/api/projects"): (EVERYONE, False),
    ("POST", "/api/projects"): (EVERYONE, False),
    ("GET", "/api/projects/{project_id}"): (MEMBER_ROLES, True),
    ("PATCH", "/api/projects/{project_id}"): ({"owner"}, True),
    ("DELETE", "/api/projects/{project_id}"): ({"owner"}, True),
    ("GET", "/api/projects/{project_id}/members"): (MEMBER_ROLES, True),
    ("POST", "/api/projects/{project_id}/members"): ({"owner"}, True),
    ("PATCH", "/api/projects/{project_id}/members/{user_id}"): ({"owner"}, True),
    ("DELETE", "/api/projects/{project_id}/members/{user_id}"): ({"owner"}, True),
    ("GET", "/api/projects/{project_id}/activity"): (MEMBER_ROLES, True),
    ("GET", "/api/scenario-template"): (EVERYONE, False),
    ("GET", "/api/projects/{project_id}/scenarios"): (MEMBER_ROLES, True),
    ("POST", "/api/projects/{project_id}/scenarios"): (CONTRIBUTORS, True),
    ("GET", "/api/scenarios/{scenario_id}"): (MEMBER_ROLES, True),
    ("PATCH", "/api/scenarios/{scenario_id}"): (CONTRIBUTORS, True),
    ("DELETE", "/api/scenarios/{scenario_id}"): ({"owner"}, True),
    ("GET", "/api/scenarios/{scenario_id}/document"): (READERS, True),
    ("GET", "/api/scenarios/{scenario_id}/sections/{section}"): (READERS, True),
    ("PUT", "/api/scenarios/{scenario_id}/sections/{section}"): (
        {"owner", "basin_modeller"}, True),
    ("PATCH", "/api/scenarios/{scenario_id}/sections/{section}"): (
        {"owner", "basin_modeller"}, True),
    ("PUT", "/api/scenarios/{scenario_id}/sections/{section}/ready"): (
        {"owner", "basin_modeller"}, True),
    ("GET", "/api/scenarios/{scenario_id}/readiness"): (MEMBER_ROLES, True),
    ("POST", "/api/scenarios/{scenario_id}/fork"): (CONTRIBUTORS, True),
    ("GET", "/api/scenarios/{scenario_id}/revisions"): (READERS, True),
    ("GET", "/api/scenarios/{scenario_id}/revisions/{number}"): (READERS, True),
    ("POST", "/api/scenarios/{scenario_id}/revisions/{number}/revert"): (CONTRIBUTORS, True),
    ("GET", "/api/scenarios/{scenario_id}/compare"): (READERS, True),
    ("GET", "/api/projects/{project_id}/comments"): (READERS, True),
    ("POST", "/api/projects/{project_id}/comments"): (READERS, True),
    ("GET", "/api/comments/{comment_id}"): (READERS, True),
    ("PATCH", "/api/comments/{comment_id}"): ({"owner"}, True),  # the author only
    ("PUT", "/api/comments/{comment_id}/resolved"): (READERS, True),
    ("GET", "/api/projects/{project_id}/wells"): (READERS, True),
    ("POST", "/api/projects/{project_id}/wells"): (CONTRIBUTORS, True),
    ("GET", "/api/wells/{well_id}"): (READERS, True),
    ("DELETE", "/api/wells/{well_id}"): (CONTRIBUTORS, True),
    ("GET", "/api/wells/{well_id}/curves/{curve}"): (READERS, True),
    ("GET", "/api/projects/{project_id}/grids"): (READERS, True),
    ("POST", "/api/projects/{project_id}/grids"): (CONTRIBUTORS, True),
    ("GET", "/api/grids/{grid_id}"): (READERS, True),
    ("DELETE", "/api/grids/{grid_id}"): (CONTRIBUTORS, True),
    ("GET", "/api/grids/{grid_id}/view"): (READERS, True),
    ("GET", "/api/projects/{project_id}/prospects"): (MEMBER_ROLES, True),
    ("POST", "/api/projects/{project_id}/prospects"): (CONTRIBUTORS, True),
    ("GET", "/api/prospects/{prospect_id}"): (MEMBER_ROLES, True),
    ("PATCH", "/api/prospects/{prospect_id}"): (CONTRIBUTORS, True),
    ("DELETE", "/api/prospects/{prospect_id}"): (CONTRIBUTORS, True),
    ("POST", "/api/scenarios/{scenario_id}/runs"): (CONTRIBUTORS, True),
    ("GET", "/api/projects/{project_id}/runs"): (MEMBER_ROLES, True),
    ("GET", "/api/runs/{run_id}"): (MEMBER_ROLES, True),
    ("GET", "/api/runs/{run_id}/events"): (MEMBER_ROLES, True),
    ("POST", "/api/runs/{run_id}/cancel"): (CONTRIBUTORS, True),
    ("GET", "/api/runs/{run_id}/log"): (MEMBER_ROLES, True),
    ("GET", "/api/runs/{run_id}/artefacts/{name}"): (READERS, True),
    ("GET", "/api/runs/{run_id}/map"): (READERS, True),
    ("GET", "/api/runs/{run_id}/section"): (READERS, True),
    ("GET", "/api/projects/{project_id}/risk-summary"): (MEMBER_ROLES, True),
    ("POST", "/api/scenarios/{scenario_id}/preview"): (READERS, True),
    ("POST", "/api/scenarios/{scenario_id}/validate"): (READERS, True),
    ("POST", "/api/distributions/density"): (EVERYONE, False),
}

OUTLINE = [[0.0, 0.0], [1000.0, 0.0], [1000.0, 800.0], [0.0, 800.0]]


@pytest.fixture(scope="session")
def run_outputs(tmp_path_factory) -> dict[str, Any]:
    """Real outputs of a map and a cube classification, computed once and copied per test."""
    from threadpoolctl import threadpool_limits

    from porecast.services import classification as cls
    from porecast.services import run_execution as ex

    root = tmp_path_factory.mktemp("run-outputs")
    doc = run_data.document()
    with threadpool_limits(1):
        maps = run_data.write_maps(root / "maps-in")
        (root / "map").mkdir()
        ex.classify_map_outputs(doc, doc["seed"], {a: maps[a] for a in ("intercept", "gradient")},
                                {c: maps[c] for c in run_data.VARYING}, [], root / "map",
                                realisations=100)
        cubes = run_data.write_cubes(root / "cube-in")
        _, _, model = ex.train_model(doc, doc["seed"], realisations=100)
        covs = ex.read_covariate_arrays(model, {c: cubes[c] for c in run_data.VARYING})
        (root / "cube").mkdir()
        cls.classify_cube(model, {a: cubes[a] for a in model.attributes}, covs, root / "cube")
    info = {"facies": list(model.facies), "hydrocarbon": list(model.hydrocarbon)}
    return {"map": (root / "map", {"input": "map", **info}),
            "cube": (root / "cube", {"input": "cube", **info})}


def _run_world(team, scenario, app, db, run_outputs) -> dict[str, Any]:
    """A queued run, and a finished map and cube classification with their files."""
    from porecast.db.models import Run, ScenarioRevision
    from porecast.services.run_steps import run_dir

    owner, sid = team["owner"], scenario["id"]
    for section in ("burial", "geology", "rockphysics"):
        etag = owner.get(f"/api/scenarios/{sid}/sections/{section}").headers["ETag"]
        owner.put(f"/api/scenarios/{sid}/sections/{section}/ready", json={"ready": True},
                  headers={"If-Match": etag})
    queued = owner.post(f"/api/scenarios/{sid}/runs", json={"kind": "simulate"})
    assert queued.status_code == 202, queued.text
    rev = db.query(ScenarioRevision).filter_by(scenario_id=sid).order_by(
        ScenarioRevision.number.desc()).first()
    now = app.state.clock()
    ids = {"queued_run_id": queued.json()["id"]}
    for kind, (folder, result) in run_outputs.items():
        run = Run(project_id=team.project_id, scenario_id=sid, scenario_revision_id=rev.id,
                  kind="classify", status="succeeded", progress_current=1000,
                  progress_total=1000, seed=1, input_hash="0" * 64, parameters={},
                  readiness_override=False, created_by_id=team.users["owner"].id,
                  created_at=now, started_at=now, finished_at=now, stage="done",
                  result=result)
        db.add(run)
        db.flush()
        shutil.copytree(folder, run_dir(app.state.settings.data_dir, run.id))
        ids[f"{kind}_run_id"] = run.id
    db.commit()
    return ids


def _with_run_id(path: str, ids: dict[str, Any]) -> dict[str, Any]:
    """The run a run route is tried on: cube for sections, queued for cancel, else the map."""
    if "{run_id}" not in path:
        return ids
    which = "cube" if path.endswith("/section") else "queued" if path.endswith("/cancel") \
        else "map"
    return {**ids, "run_id": ids[f"{which}_run_id"]}


@pytest.fixture
def world(team, scenario, tmp_path, app, db, run_outputs) -> dict[str, Any]:
    """One object of every kind in the team project, made by the owner."""
    owner, pid = team["owner"], team.project_id
    octet = {"Content-Type": "application/octet-stream"}
    well = owner.post(f"/api/projects/{pid}/wells", params={"filename": "w.las"},
                      content=las_bytes(tmp_path), headers=octet)
    grid = owner.post(f"/api/projects/{pid}/grids", params={"filename": "m.csv"},
                      content=csv_map_bytes(), headers=octet)
    comment = owner.post(f"/api/projects/{pid}/comments",
                         json={"body": "check", "scenario_id": scenario["id"],
                               "section": "burial"})
    prospect = owner.post(f"/api/projects/{pid}/prospects",
                          json={"name": "Lead A", "outline": OUTLINE})
    tokens = owner.get("/api/auth/tokens")
    for r in (well, grid, comment, prospect, tokens):
        assert r.status_code in (200, 201), r.text
    ids = {
        "project_id": pid, "scenario_id": scenario["id"], "well_id": well.json()["id"],
        "grid_id": grid.json()["id"], "comment_id": comment.json()["id"],
        "prospect_id": prospect.json()["id"], "token_id": tokens.json()[0]["id"],
        "user_id": team.users["viewer"].id, "number": 1, "section": "burial", "curve": "vp",
        "name": "summary.json",
    }
    ids.update(_run_world(team, scenario, app, db, run_outputs))
    return ids


def _request(method: str, path: str, ids: dict[str, Any], team, tmp_path) -> dict[str, Any]:
    """URL and valid body/headers for one route."""
    ids = _with_run_id(path, ids)
    url = path.format(**{k: ids[k] for k in ids if "{" + k + "}" in path})
    owner = team["owner"]
    sid = ids["scenario_id"]
    kw: dict[str, Any] = {}
    if path.endswith("/sections/{section}/ready"):
        kw["json"] = {"ready": True}
    elif path.endswith("/sections/{section}"):
        r = owner.get(f"/api/scenarios/{sid}/sections/burial")
        data = r.json()["data"]
        data["surface_temperature_c"] += 0.5
        kw["json"] = {"data": data} if method == "PUT" else {
            "patch": {"surface_temperature_c": data["surface_temperature_c"]}}
    body_for = {
        ("POST", "/api/auth/login"): {"username": "owner", "password": PASSWORD},
        ("POST", "/api/auth/password"): {"current_password": PASSWORD,
                                         "new_password": "another long passphrase"},
        ("POST", "/api/auth/tokens"): {"name": "script"},
        ("POST", "/api/users"): {"username": "newcomer", "password": "long enough password"},
        ("POST", "/api/projects"): {"name": "New"},
        ("PATCH", "/api/projects/{project_id}"): {"description": "changed"},
        ("POST", "/api/projects/{project_id}/members"): {"username": "admin", "role": "viewer"},
        ("PATCH", "/api/projects/{project_id}/members/{user_id}"): {"role": "reviewer"},
        ("POST", "/api/projects/{project_id}/scenarios"): {"name": "Another"},
        ("PATCH", "/api/scenarios/{scenario_id}"): {"description": "changed"},
        ("POST", "/api/scenarios/{scenario_id}/fork"): {"name": "Fork"},
        ("POST", "/api/scenarios/{scenario_id}/revisions/{number}/revert"): {},
        ("POST", "/api/projects/{project_id}/comments"): {
            "body": "a reply", "parent_id": ids["comment_id"]},
        ("PATCH", "/api/comments/{comment_id}"): {"body": "edited"},
        ("PUT", "/api/comments/{comment_id}/resolved"): {"resolved": True},
        ("POST", "/api/projects/{project_id}/prospects"): {"name": "Lead B",
                                                           "outline": OUTLINE},
        ("PATCH", "/api/prospects/{prospect_id}"): {"name": "Lead A2"},
        ("POST", "/api/scenarios/{scenario_id}/runs"): {"kind": "simulate",
                                                        "params": {"realisations": 10}},
        ("POST", "/api/scenarios/{scenario_id}/preview"): {"parts": ["history"],
                                                           "realisations": 20},
        ("POST", "/api/scenarios/{scenario_id}/validate"): {},
        ("POST", "/api/distributions/density"): {
            "items": [{"key": "k", "dist": {"kind": "normal", "mean": 1.0, "sd": 0.1}}]},
    }
    if (method, path) in body_for:
        kw["json"] = body_for[(method, path)]
    if path.startswith("/api/projects/{project_id}/wells") and method == "POST":
        kw.update(params={"filename": "w2.las"}, content=las_bytes(tmp_path, name="Invented-2"),
                  headers={"Content-Type": "application/octet-stream"})
    if path.startswith("/api/projects/{project_id}/grids") and method == "POST":
        kw.update(params={"filename": "m2.csv"}, content=csv_map_bytes(),
                  headers={"Content-Type": "application/octet-stream"})
    if method in ("PUT", "PATCH", "DELETE", "POST") and path.startswith("/api/scenarios/"):
        if "/sections/" in path:
            etag = owner.get(f"/api/scenarios/{sid}/sections/burial").headers["ETag"]
        else:
            etag = owner.get(f"/api/scenarios/{sid}").headers["ETag"]
        kw.setdefault("headers", {})["If-Match"] = etag
    return {"method": method, "url": url, **kw}


def _schema_routes(app) -> set[tuple[str, str]]:
    spec = app.openapi()
    return {(m.upper(), p) for p, ops in spec["paths"].items() for m in ops}


def test_every_route_has_a_rule(app):
    routes = _schema_routes(app)
    assert routes - set(RULES) == set(), "routes without an authorisation rule"
    assert set(RULES) - routes == set(), "rules for routes that no longer exist"


@pytest.mark.parametrize("route", sorted(RULES), ids=lambda r: f"{r[0]} {r[1]}")
def test_route_authorisation(route, app, team, world, connection, tmp_path):
    method, path = route
    allowed, hides = RULES[route]
    outcomes: dict[str, int] = {}
    for actor in ACTORS:
        savepoint = connection.begin_nested()
        try:
            req = _request(method, path, world, team, tmp_path)
            client = team[actor] if actor != "anonymous" else team["anonymous"]
            outcomes[actor] = client.request(**req).status_code
        finally:
            savepoint.rollback()
    expected: dict[str, Any] = {}
    for actor in ACTORS:
        if actor in allowed:
            expected[actor] = "2xx"
        elif actor == "anonymous":
            expected[actor] = 401
        elif hides and actor not in MEMBER_ROLES:
            expected[actor] = 404
        elif hides and route[1].startswith("/api/auth/tokens/"):
            expected[actor] = 404
        else:
            expected[actor] = 403
    got = {a: ("2xx" if 200 <= s < 300 else s) for a, s in outcomes.items()}
    assert got == expected
