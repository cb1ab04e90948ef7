"""Scenarios: conditional saves (ETag / If-Match), disciplines, revisions, forks, readiness."""

from __future__ import annotations

import copy

import pytest

from porecast.db.models import Activity, Scenario
from porecast.services import scenarios as scenario_service
from porecast.services.errors import NotRunnable, PermissionDenied


def _section(client, sid, section):
    r = client.get(f"/api/scenarios/{sid}/sections/{section}")
    assert r.status_code == 200, r.text
    return r.headers["ETag"], r.json()["data"]


def _put(client, sid, section, data, etag):
    headers = {} if etag is None else {"If-Match": etag}
    return client.put(f"/api/scenarios/{sid}/sections/{section}", json={"data": data},
                      headers=headers)


def test_lost_update_second_writer_gets_412_and_first_change_stays(team, scenario):
    sid = scenario["id"]
    a, b = team["basin_modeller"], team["owner"]
    etag, data = _section(a, sid, "burial")
    mine, theirs = copy.deepcopy(data), copy.deepcopy(data)
    mine["surface_temperature_c"] = 7.0
    theirs["surface_temperature_c"] = 9.0
    assert _put(a, sid, "burial", mine, etag).status_code == 200
    r = _put(b, sid, "burial", theirs, etag)
    assert r.status_code == 412
    assert r.json()["current_etag"] != etag
    _, stored = _section(b, sid, "burial")
    assert stored["surface_temperature_c"] == 7.0
    revs = b.get(f"/api/scenarios/{sid}/revisions").json()
    assert [x["number"] for x in revs] == [2, 1]


def test_disjoint_sections_from_same_starting_point_both_land(team, scenario):
    sid = scenario["id"]
    doc = team["owner"].get(f"/api/scenarios/{sid}/document").json()
    burial_etag, geology_etag = doc["section_etags"]["burial"], doc["section_etags"]["geology"]
    burial, geology = doc["document"]["burial"], doc["document"]["geology"]
    burial["surface_temperature_c"] = 5.5
    geology["cement_onset_c"] = 75.0
    assert _put(team["basin_modeller"], sid, "burial", burial, burial_etag).status_code == 200
    assert _put(team["geologist"], sid, "geology", geology, geology_etag).status_code == 200
    now = team["owner"].get(f"/api/scenarios/{sid}/document").json()["document"]
    assert now["burial"]["surface_temperature_c"] == 5.5
    assert now["geology"]["cement_onset_c"] == 75.0


def test_if_match_required_and_star_or_weak_refused(team, scenario):
    sid = scenario["id"]
    etag, data = _section(team["owner"], sid, "burial")
    data["surface_temperature_c"] = 8.0
    assert _put(team["owner"], sid, "burial", data, None).status_code == 428
    assert _put(team["owner"], sid, "burial", data, "*").status_code == 428
    assert _put(team["owner"], sid, "burial", data, "W/" + etag).status_code == 412
    assert _put(team["owner"], sid, "burial", data, f'"x", {etag}').status_code == 200


def test_invalid_section_is_422_with_field_path_and_nothing_saved(team, scenario):
    sid = scenario["id"]
    etag, data = _section(team["owner"], sid, "burial")
    data["surface_temperature_c"] = 99.0
    r = _put(team["owner"], sid, "burial", data, etag)
    assert r.status_code == 422, r.text
    assert r.json()["errors"][0]["loc"] == "burial.surface_temperature_c"
    etag_after, stored = _section(team["owner"], sid, "burial")
    assert etag_after == etag and stored["surface_temperature_c"] != 99.0


def test_cross_section_check_runs_on_section_save(team, scenario):
    # geology's surface porosity may not exceed rockphysics.critical_porosity
    sid = scenario["id"]
    etag, data = _section(team["geophysicist"], sid, "rockphysics")
    data["critical_porosity"] = 0.21
    data["constant_cement_porosity"] = 0.2
    r = _put(team["geophysicist"], sid, "rockphysics", data, etag)
    assert r.status_code == 422, r.text
    assert "critical" in r.json()["detail"]


@pytest.mark.parametrize(
    ("role", "section", "expected"),
    [
        ("basin_modeller", "burial", 200),
        ("geologist", "geology", 200),
        ("geophysicist", "rockphysics", 200),
        ("owner", "geology", 200),
        ("geologist", "burial", 403),
        ("geophysicist", "geology", 403),
        ("basin_modeller", "rockphysics", 403),
        ("reviewer", "burial", 403),
        ("viewer", "burial", 403),
        ("outsider", "burial", 404),
    ],
)
def test_section_edited_only_by_its_discipline(team, scenario, role, section, expected):
    sid = scenario["id"]
    etag, data = _section(team["owner"], sid, section)
    key = {"burial": "surface_temperature_c", "geology": "cement_onset_c",
           "rockphysics": "coordination_number"}[section]
    data[key] = {"burial": 6.5, "geology": 72.0, "rockphysics": 8.5}[section]
    r = _put(team[role], sid, section, data, etag)
    assert r.status_code == expected, r.text


def test_merge_patch_and_revision_diff(team, scenario):
    sid = scenario["id"]
    etag, _ = _section(team["geologist"], sid, "geology")
    r = team["geologist"].patch(f"/api/scenarios/{sid}/sections/geology",
                                json={"patch": {"cement_onset_c": 80.0}, "message": "warmer"},
                                headers={"If-Match": etag})
    assert r.status_code == 200, r.text
    rev = team["reviewer"].get(f"/api/scenarios/{sid}/revisions/2").json()
    assert rev["author"] == "geologist" and rev["section"] == "geology"
    assert rev["message"] == "warmer"
    assert {"path": "geology.cement_onset_c", "op": "change", "old": 70.0, "new": 80.0} in [
        {k: d[k] for k in ("path", "op", "old", "new")} for d in rev["diff"]
    ]


def test_revert_is_a_new_revision(team, scenario):
    sid = scenario["id"]
    etag, data = _section(team["owner"], sid, "burial")
    original = data["surface_temperature_c"]
    data["surface_temperature_c"] = original + 2
    assert _put(team["owner"], sid, "burial", data, etag).status_code == 200
    head = team["owner"].get(f"/api/scenarios/{sid}").headers["ETag"]
    r = team["owner"].post(f"/api/scenarios/{sid}/revisions/1/revert", json={},
                           headers={"If-Match": head})
    assert r.status_code == 200, r.text
    assert r.json()["head_revision"] == 3
    _, now = _section(team["owner"], sid, "burial")
    assert now["surface_temperature_c"] == original
    rev3 = team["owner"].get(f"/api/scenarios/{sid}/revisions/3").json()
    assert rev3["kind"] == "revert"


def test_section_revert_needs_section_role(team, scenario):
    sid = scenario["id"]
    etag, data = _section(team["owner"], sid, "burial")
    data["surface_temperature_c"] += 1
    _put(team["owner"], sid, "burial", data, etag)
    etag2, _ = _section(team["owner"], sid, "burial")
    r = team["geologist"].post(f"/api/scenarios/{sid}/revisions/1/revert",
                               json={"section": "burial"}, headers={"If-Match": etag2})
    assert r.status_code == 403
    r = team["basin_modeller"].post(f"/api/scenarios/{sid}/revisions/1/revert",
                                    json={"section": "burial"}, headers={"If-Match": etag2})
    assert r.status_code == 200, r.text


def test_fork_and_compare_field_by_field(team, scenario):
    sid = scenario["id"]
    r = team["geologist"].post(f"/api/scenarios/{sid}/fork", json={"name": "Cold case"})
    assert r.status_code == 201, r.text
    fork = r.json()
    assert fork["forked_from_scenario_id"] == sid and fork["head_revision"] == 1
    etag, data = _section(team["basin_modeller"], fork["id"], "burial")
    data["surface_temperature_c"] = 2.0
    assert _put(team["basin_modeller"], fork["id"], "burial", data, etag).status_code == 200
    r = team["reviewer"].get(f"/api/scenarios/{sid}/compare",
                             params={"other_scenario_id": fork["id"]})
    assert r.status_code == 200, r.text
    paths = {d["path"]: d for d in r.json()["differences"]}
    assert set(paths) == {"name", "burial.surface_temperature_c"}
    assert paths["burial.surface_temperature_c"]["new"] == 2.0
    assert paths["name"] == {"path": "name", "op": "change", "old": "Base case",
                             "new": "Cold case"}


def test_compare_with_scenario_of_other_project_is_404(team, scenario):
    r = team["outsider"].post(f"/api/projects/{team.other_project_id}/scenarios",
                              json={"name": "Theirs"})
    assert r.status_code == 201
    r = team["owner"].get(f"/api/scenarios/{scenario['id']}/compare",
                          params={"other_scenario_id": r.json()["id"]})
    assert r.status_code == 404


def test_metadata_patch_needs_scenario_etag(team, scenario):
    sid = scenario["id"]
    r = team["geologist"].patch(f"/api/scenarios/{sid}", json={"seed": 42})
    assert r.status_code == 428
    r = team["geologist"].patch(f"/api/scenarios/{sid}", json={"seed": 42},
                                headers={"If-Match": scenario["etag"]})
    assert r.status_code == 200, r.text
    assert r.json()["head_revision"] == 2
    r = team["geologist"].patch(f"/api/scenarios/{sid}", json={"seed": 43},
                                headers={"If-Match": scenario["etag"]})
    assert r.status_code == 412
    doc = team["owner"].get(f"/api/scenarios/{sid}/document").json()["document"]
    assert doc["seed"] == 42


def _mark(client, sid, section, ready=True):
    etag = client.get(f"/api/scenarios/{sid}/sections/{section}").headers["ETag"]
    return client.put(f"/api/scenarios/{sid}/sections/{section}/ready", json={"ready": ready},
                      headers={"If-Match": etag})


def test_ready_marks_are_per_discipline_and_cleared_by_a_change(team, scenario):
    sid = scenario["id"]
    assert _mark(team["geologist"], sid, "burial").status_code == 403
    for role, section in (("basin_modeller", "burial"), ("geologist", "geology"),
                          ("geophysicist", "rockphysics")):
        assert _mark(team[role], sid, section).status_code == 200
    assert team["viewer"].get(f"/api/scenarios/{sid}/readiness").json()["runnable"] is True
    etag, data = _section(team["geologist"], sid, "geology")
    data["cement_onset_c"] = 71.0
    assert _put(team["geologist"], sid, "geology", data, etag).status_code == 200
    ready = team["viewer"].get(f"/api/scenarios/{sid}/readiness").json()
    assert ready == {"scenario_id": sid, "runnable": False, "not_ready": ["geology"]}


def test_assert_runnable_refuses_then_owner_override_is_recorded(team, scenario, db):
    sid = scenario["id"]
    _mark(team["basin_modeller"], sid, "burial")
    db.expire_all()
    sc = db.get(Scenario, sid)
    now = team["owner"].app.state.clock()
    with pytest.raises(NotRunnable) as err:
        scenario_service.assert_runnable(db, sc, team.users["geologist"], False, now=now)
    assert err.value.not_ready == ["geology", "rockphysics"]
    with pytest.raises(PermissionDenied):
        scenario_service.assert_runnable(db, sc, team.users["geologist"], True, now=now)
    with pytest.raises(PermissionDenied):
        scenario_service.assert_runnable(db, sc, team.users["reviewer"], False, now=now)
    result = scenario_service.assert_runnable(db, sc, team.users["owner"], True, now=now)
    assert result.overridden and result.not_ready == ["geology", "rockphysics"]
    db.flush()
    verbs = [a.verb for a in db.query(Activity).filter_by(project_id=team.project_id)]
    assert "run.readiness_override" in verbs


def test_viewer_reads_metadata_but_not_sections(team, scenario):
    sid = scenario["id"]
    assert team["viewer"].get(f"/api/scenarios/{sid}").status_code == 200
    assert team["viewer"].get(f"/api/scenarios/{sid}/sections/burial").status_code == 403
    assert team["viewer"].get(f"/api/scenarios/{sid}/revisions").status_code == 403


def test_activity_feed_records_saves(team, scenario):
    sid = scenario["id"]
    etag, data = _section(team["owner"], sid, "burial")
    data["surface_temperature_c"] += 1.5
    r = _put(team["basin_modeller"], sid, "burial", data, etag)
    assert r.status_code == 200, r.text
    feed = team["viewer"].get(f"/api/projects/{team.project_id}/activity").json()
    assert feed[0]["verb"] == "scenario.section_saved" and feed[0]["actor"] == "basin_modeller"
    assert feed[1]["verb"] == "scenario.created"
