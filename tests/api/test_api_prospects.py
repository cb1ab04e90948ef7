"""Prospect outlines: validation and area."""

from __future__ import annotations

import math

import pytest

from porecast.services.errors import InvalidInput
from porecast.services.prospects import validate_outline


def _create(team, outline, name="Lead"):
    return team["geologist"].post(f"/api/projects/{team.project_id}/prospects",
                                  json={"name": name, "outline": outline})


def test_rectangle_area_by_shoelace(team):
    # 1000 m x 2000 m rectangle: 2.0e6 m2 (elementary geometry)
    r = _create(team, [[0, 0], [1000, 0], [1000, 2000], [0, 2000], [0, 0]])
    assert r.status_code == 201, r.text
    assert r.json()["area_m2"] == pytest.approx(2.0e6)
    assert len(r.json()["outline"]) == 4  # closing vertex dropped


def test_triangle_area(team):
    # right triangle with legs 300 m and 400 m: 6.0e4 m2
    r = _create(team, [[10, 10], [310, 10], [10, 410]])
    assert r.json()["area_m2"] == pytest.approx(6.0e4)


@pytest.mark.parametrize(
    "outline",
    [
        [[0, 0], [1, 1]],  # too few vertices
        [[0, 0], [10, 10], [10, 0], [0, 10]],  # bow tie crosses itself
        [[0, 0], [5, 0], [10, 0]],  # collinear: zero area
        [[0, 0], [10, 0], [10, 10], [5, 0], [0, 10]],  # touches its own edge
    ],
)
def test_bad_outlines_are_422(team, outline):
    assert _create(team, outline).status_code == 422


def test_non_finite_vertex_refused():
    with pytest.raises(InvalidInput, match="not finite"):
        validate_outline([[0.0, 0.0], [1.0, math.nan], [1.0, 1.0]])


def test_viewer_reads_outlines_but_cannot_draw(team):
    r = _create(team, [[0, 0], [10, 0], [10, 10]])
    assert team["viewer"].get(f"/api/prospects/{r.json()['id']}").status_code == 200
    r = team["viewer"].post(f"/api/projects/{team.project_id}/prospects",
                            json={"name": "x", "outline": [[0, 0], [10, 0], [10, 10]]})
    assert r.status_code == 403
