"""Uploads: wells (LAS) and grids (CSV/XYZ, .npy, SEG-Y); refusals leave nothing behind."""

from __future__ import annotations

import io

import numpy as np
import pytest
from api_helpers import csv_map_bytes, files_under, las_bytes, segy_bytes
from sqlalchemy import func, select

from porecast.db.models import Activity, Grid, Well


def _counts(db, settings):
    db.expire_all()
    rows = tuple(db.scalar(select(func.count()).select_from(t)) for t in (Well, Grid, Activity))
    return rows, files_under(settings.files_dir), files_under(settings.tmp_dir)


def _post(client, team, kind, filename, body, **params):
    return client.post(f"/api/projects/{team.project_id}/{kind}",
                       params={"filename": filename, **params}, content=body,
                       headers={"Content-Type": "application/octet-stream"})


def test_las_upload_stores_curves_and_serves_decimated_data(team, tmp_path, settings):
    r = _post(team["geologist"], team, "wells", "invented-1.las", las_bytes(tmp_path, n=3000))
    assert r.status_code == 201, r.text
    well = r.json()
    assert {c["name"] for c in well["curves"]} == {"vp", "vs", "density", "gr"}
    assert well["depth_min"] == pytest.approx(1500.0)
    assert (well["x"], well["y"]) == (431250.0, 6712900.0)
    stored = files_under(settings.files_dir / "wells")
    assert len(stored) == 1 and stored[0].suffix == ".npz"
    assert "invented" not in stored[0].name  # server-generated name, not the client's

    r = team["reviewer"].get(f"/api/wells/{well['id']}/curves/vp", params={"max_points": 200})
    assert r.status_code == 200, r.text
    data = r.json()
    assert data["n_total"] == 3000
    assert len(data["depth"]) <= 200
    assert data["depth"] == sorted(data["depth"])
    # min-max thinning keeps the extremes of the full log
    with np.load(stored[0]) as npz:
        full = npz["curve_vp"]
    assert max(data["values"]) == pytest.approx(full.max())
    assert min(data["values"]) == pytest.approx(full.min())


def test_oversized_upload_refused_by_content_length(team, db, settings):
    before = _counts(db, settings)
    body = b"0" * (settings.max_upload_bytes + 1)
    r = _post(team["owner"], team, "wells", "big.las", body)
    assert r.status_code == 413
    assert _counts(db, settings) == before


def test_oversized_chunked_upload_aborted_while_streaming(team, db, settings):
    before = _counts(db, settings)
    sent = []

    def chunks():
        for _ in range(40):  # 40 x 64 KiB = 2.5 MiB against a 1 MiB limit
            sent.append(1)
            yield b"~" * 65536

    r = team["owner"].post(f"/api/projects/{team.project_id}/grids",
                           params={"filename": "big.csv"}, content=chunks())
    assert r.status_code == 413
    assert _counts(db, settings) == before


def test_binary_file_named_las_is_422_with_byte_offset(team, db, settings):
    before = _counts(db, settings)
    body = b"~VERSION\n" + bytes(range(256)) * 4
    r = _post(team["owner"], team, "wells", "disguised.las", body)
    assert r.status_code == 422, r.text
    detail = r.json()["detail"]
    assert "disguised.las" in detail and "byte" in detail
    assert _counts(db, settings) == before


def test_csv_with_text_in_numeric_column_is_422_with_line(team, db, settings):
    before = _counts(db, settings)
    lines = csv_map_bytes().decode().splitlines()
    lines[5] = "1100,2025,deep"
    r = _post(team["owner"], team, "grids", "horizon.csv", ("\n".join(lines) + "\n").encode())
    assert r.status_code == 422, r.text
    detail = r.json()["detail"]
    assert "horizon.csv" in detail and "line 6" in detail
    assert _counts(db, settings) == before


def test_truncated_segy_is_422(team, db, settings, tmp_path):
    before = _counts(db, settings)
    body = segy_bytes(tmp_path)[:-100]
    r = _post(team["owner"], team, "grids", "cube.sgy", body)
    assert r.status_code == 422, r.text
    assert "cube.sgy" in r.json()["detail"]
    assert _counts(db, settings) == before


def test_unknown_grid_suffix_refused_before_reading(team, db, settings):
    before = _counts(db, settings)
    r = _post(team["owner"], team, "grids", "notes.docx", b"hello")
    assert r.status_code == 422
    assert _counts(db, settings) == before


def test_viewer_upload_refused_and_nothing_stored(team, db, settings, tmp_path):
    before = _counts(db, settings)
    r = _post(team["viewer"], team, "wells", "a.las", las_bytes(tmp_path))
    assert r.status_code == 403
    assert _counts(db, settings) == before


def test_csv_map_upload_and_view(team, settings):
    r = _post(team["basin_modeller"], team, "grids", "top.csv", csv_map_bytes(nx=6, ny=4),
              name="Top reservoir")
    assert r.status_code == 201, r.text
    grid = r.json()
    assert grid["kind"] == "map" and grid["geometry"]["shape"] == [4, 6]
    assert grid["geometry"]["dx"] == pytest.approx(25.0)
    assert grid["stats"]["depth_m"]["min"] == pytest.approx(2000.0)
    assert grid["stats"]["depth_m"]["max"] == pytest.approx(2000 + 3.5 * 5 + 2.0 * 3)
    r = team["reviewer"].get(f"/api/grids/{grid['id']}/view")
    assert r.status_code == 200, r.text
    view = r.json()
    assert view["x"] == [1000.0 + 25 * i for i in range(6)]
    assert view["z"][1][2] == pytest.approx(2000 + 3.5 * 2 + 2.0 * 1)


def test_npy_cube_and_segy_upload(team, tmp_path):
    cube = np.arange(2 * 3 * 5, dtype=np.float64).reshape(2, 3, 5)
    buf = io.BytesIO()
    np.save(buf, cube)
    r = _post(team["geophysicist"], team, "grids", "cube.npy", buf.getvalue())
    assert r.status_code == 201, r.text
    assert r.json()["kind"] == "cube"
    assert r.json()["stats"]["value"]["max"] == pytest.approx(29.0)
    r = team["reviewer"].get(f"/api/grids/{r.json()['id']}/view", params={"line": 1})
    assert r.status_code == 200, r.text
    z = np.array(r.json()["z"], dtype=float)
    assert z.shape == (5, 3)  # samples down, traces across
    np.testing.assert_allclose(z, cube[1].T)

    r = _post(team["geophysicist"], team, "grids", "survey.sgy", segy_bytes(tmp_path))
    assert r.status_code == 201, r.text
    assert r.json()["geometry"]["shape"] == [3, 4, 20]


def test_delete_well_removes_file_after_commit(team, tmp_path, settings):
    r = _post(team["owner"], team, "wells", "w.las", las_bytes(tmp_path))
    assert r.status_code == 201
    assert len(files_under(settings.files_dir / "wells")) == 1
    r = team["geologist"].delete(f"/api/wells/{r.json()['id']}")
    assert r.status_code == 204
    assert files_under(settings.files_dir / "wells") == []


def test_oversized_json_body_is_413(team, settings):
    big = {"name": "x", "description": "d" * (settings.max_json_bytes + 10)}
    r = team["owner"].post("/api/projects", json=big)
    assert r.status_code == 413
