"""Threaded comments: anchors, replies, edit own, resolve/reopen, filters and counts."""

from __future__ import annotations


def _comment(client, team, **body):
    return client.post(f"/api/projects/{team.project_id}/comments", json=body)


def test_thread_on_a_field_with_replies_and_counts(team, scenario):
    sid = scenario["id"]
    r = _comment(team["reviewer"], team, body="Is 4 degC right?", scenario_id=sid,
                 field_path="burial.surface_temperature_c")
    assert r.status_code == 201, r.text
    root = r.json()
    assert root["section"] == "burial" and root["thread_id"] == root["id"]
    r = _comment(team["basin_modeller"], team, body="Yes, deep water.", parent_id=root["id"])
    assert r.status_code == 201, r.text
    reply = r.json()
    assert reply["thread_id"] == root["id"] and reply["field_path"] == root["field_path"]
    _comment(team["geologist"], team, body="Coatings?", scenario_id=sid, section="geology")

    meta = team["viewer"].get(f"/api/scenarios/{sid}").json()
    counts = {s["section"]: s["unresolved_comments"] for s in meta["sections"]}
    assert counts == {"burial": 1, "geology": 1, "rockphysics": 0}

    r = team["owner"].put(f"/api/comments/{root['id']}/resolved", json={"resolved": True})
    assert r.status_code == 200 and r.json()["resolved_at"] is not None
    meta = team["viewer"].get(f"/api/scenarios/{sid}").json()
    assert {s["section"]: s["unresolved_comments"] for s in meta["sections"]}["burial"] == 0

    open_ = team["reviewer"].get(f"/api/projects/{team.project_id}/comments",
                                 params={"unresolved": True}).json()
    assert [c["body"] for c in open_] == ["Coatings?"]
    closed = team["reviewer"].get(f"/api/projects/{team.project_id}/comments",
                                  params={"unresolved": False}).json()
    assert {c["id"] for c in closed} == {root["id"], reply["id"]}

    r = team["owner"].put(f"/api/comments/{root['id']}/resolved", json={"resolved": False})
    assert r.json()["resolved_at"] is None
    r = team["owner"].put(f"/api/comments/{reply['id']}/resolved", json={"resolved": True})
    assert r.status_code == 422  # replies are resolved with their thread


def test_edit_own_comment_only(team, scenario):
    r = _comment(team["reviewer"], team, body="typo", scenario_id=scenario["id"])
    cid = r.json()["id"]
    assert team["owner"].patch(f"/api/comments/{cid}", json={"body": "x"}).status_code == 403
    r = team["reviewer"].patch(f"/api/comments/{cid}", json={"body": "fixed"})
    assert r.status_code == 200 and r.json()["body"] == "fixed" and r.json()["edited_at"]


def test_map_location_comment_with_grid(team):
    r = _comment(team["geophysicist"], team, body="Bright spot here", x=1050.0, y=2025.0)
    assert r.status_code == 201, r.text
    assert (r.json()["x"], r.json()["y"]) == (1050.0, 2025.0)
    assert _comment(team["geophysicist"], team, body="?", x=1.0).status_code == 422
    assert _comment(team["geophysicist"], team, body="?", x=1.0, y=2.0,
                    grid_id=999999).status_code == 422


def test_anchor_validation(team, scenario):
    sid = scenario["id"]
    assert _comment(team["reviewer"], team, body="floating").status_code == 422
    r = _comment(team["reviewer"], team, body="?", scenario_id=sid,
                 field_path="burial.no_such_field")
    assert r.status_code == 422 and r.json()["errors"][0]["loc"] == "field_path"
    r = _comment(team["reviewer"], team, body="?", scenario_id=sid, section="geology",
                 field_path="burial.surface_temperature_c")
    assert r.status_code == 422
    theirs = team["outsider"].post(f"/api/projects/{team.other_project_id}/scenarios",
                                   json={"name": "Theirs"}).json()
    assert _comment(team["reviewer"], team, body="?",
                    scenario_id=theirs["id"]).status_code == 422


def test_viewer_cannot_comment_or_read_comments(team, scenario):
    assert _comment(team["viewer"], team, body="hi", scenario_id=scenario["id"]).status_code == 403
    r = team["viewer"].get(f"/api/projects/{team.project_id}/comments")
    assert r.status_code == 403
