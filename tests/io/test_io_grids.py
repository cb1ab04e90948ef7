"""Map and cube grids: CSV/XYZ inference, .npy/.npz round trips, geometry checks."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from porecast.io.grids import (
    Grid,
    GridData,
    SampleAxis,
    check_same_geometry,
    dead_trace_mask,
    iter_chunks,
    no_data_mask,
    read_npy,
    read_npz,
    read_xyz,
    write_npy,
    write_npz,
    write_xyz,
)


def _lines(*rows):
    return "\n".join(rows) + "\n"


def test_csv_with_header_infers_grid_and_missing_node(tmp_path):
    # 4 x 3 nodes at 25 m spacing from (1000, 2000); node (x=1050, y=2025) missing; lines shuffled
    nodes = [(1000 + 25 * i, 2000 + 25 * j) for j in range(3) for i in range(4)]
    nodes.remove((1050, 2025))
    rng = np.random.default_rng(1)
    rows = [f"{x},{y},{x / 10 + y / 100:.3f},{j}" for x, y, j in
            [(x, y, (y - 2000) // 25) for x, y in nodes]]  # fmt: skip
    rng.shuffle(rows)
    path = tmp_path / "depth.csv"
    path.write_text(_lines("# depth map, invented", "X,Y,depth,row", *rows))
    data = read_xyz(path)
    g = data.grid
    assert (g.kind, g.shape, g.x0, g.y0, g.dx, g.dy) == ("map", (3, 4), 1000, 2000, 25, 25)
    assert g.attributes == ("depth", "row")
    depth = data.values["depth"]
    assert np.isnan(depth[1, 2]) and np.isfinite(depth).sum() == 11
    assert depth[2, 3] == pytest.approx(1075 / 10 + 2050 / 100)
    np.testing.assert_array_equal(np.nanmax(data.values["row"], axis=1), [0, 1, 2])


def test_xyz_without_header_whitespace(tmp_path):
    path = tmp_path / "top.xyz"
    path.write_text(_lines("0.0 0.0 10", "10.0 0.0 11", "0.0 5.0 12", "10.0   5.0\t13"))
    data = read_xyz(path)
    assert data.grid.attributes == ("value",) and data.grid.shape == (2, 2)
    np.testing.assert_array_equal(data.values["value"], [[10, 11], [12, 13]])
    named = read_xyz(path, names=["twt_ms"])
    assert list(named.values) == ["twt_ms"]


def test_header_with_easting_northing_and_semicolons(tmp_path):
    path = tmp_path / "m.csv"
    path.write_text(_lines("easting;northing;amp", "5;7;1", "6;7;2", "5;9;3", "6;9;4"))
    data = read_xyz(path)
    assert (data.grid.dx, data.grid.dy) == (1.0, 2.0)
    np.testing.assert_array_equal(data.values["amp"], [[1, 2], [3, 4]])


def test_irregular_coordinates_refused_with_line(tmp_path):
    rows = [f"{x},{y},1" for y in (0, 10) for x in (0, 10, 20, 33)]
    path = tmp_path / "irr.csv"
    path.write_text(_lines("x,y,v", *rows))
    with pytest.raises(ValueError, match=r"irr.csv, line 5: x = 33 is not on a regular grid"):
        read_xyz(path)


def test_rounding_jitter_within_tolerance_accepted(tmp_path):
    rng = np.random.default_rng(5)
    rows = [f"{100 * i + rng.normal(0, 1e-4):.6f},{50 * j:.1f},{i + j}"
            for j in range(3) for i in range(5)]  # fmt: skip
    path = tmp_path / "jit.csv"
    path.write_text(_lines(*rows))
    data = read_xyz(path)
    assert data.grid.shape == (3, 5) and data.grid.dx == pytest.approx(100.0, abs=1e-3)


def test_whole_missing_column_is_allowed(tmp_path):
    rows = [f"{x},{y},1" for y in (0, 1) for x in (0, 1, 3)]  # x = 2 absent in every row
    path = tmp_path / "gap.csv"
    path.write_text(_lines(*rows))
    data = read_xyz(path)
    assert data.grid.shape == (2, 4) and np.all(np.isnan(data.values["value"][:, 2]))


def test_text_in_numeric_column_names_line(tmp_path):
    path = tmp_path / "bad.csv"
    path.write_text(_lines("x,y,depth", "0,0,1", "1,0,2", "0,1,3", "1,1,abc"))
    with pytest.raises(ValueError, match=r"bad.csv, line 5: column 'depth' value 'abc' is not a"):
        read_xyz(path)


def test_text_in_first_line_without_header_names_line(tmp_path):
    path = tmp_path / "bad2.xyz"
    path.write_text(_lines("0 0 n/a", "1 0 2"))
    with pytest.raises(ValueError, match=r"bad2.xyz, line 1: column 3 value 'n/a' is not a num"):
        read_xyz(path)


def test_wrong_column_count_and_duplicates_name_lines(tmp_path):
    path = tmp_path / "c.csv"
    path.write_text(_lines("0,0,1", "1,0,2", "0,1"))
    with pytest.raises(ValueError, match=r"c.csv, line 3: 2 columns, expected 3"):
        read_xyz(path)
    path.write_text(_lines("0,0,1", "1,0,2", "0,1,3", "1,1,4", "1,0,5"))
    with pytest.raises(ValueError, match=r"lines 2 and 5: two points on the same grid node"):
        read_xyz(path)


def test_null_value_and_nan_tokens_are_missing(tmp_path):
    path = tmp_path / "n.csv"
    path.write_text(_lines("x,y,v", "0,0,-999.25", "1,0,2", "0,1,nan", "1,1,4"))
    v = read_xyz(path, null_value=-999.25).values["v"]
    assert np.isnan(v[0, 0]) and np.isnan(v[1, 0]) and v[1, 1] == 4


def test_scattered_points_refused(tmp_path):
    path = tmp_path / "s.csv"
    path.write_text(_lines("0,0,1", "1,0,1", "500,300,1", "0,1,1"))
    with pytest.raises(ValueError, match="scattered, not gridded"):
        read_xyz(path)


def test_binary_file_named_csv_refused_with_offset(tmp_path):
    path = tmp_path / "image.csv"
    path.write_bytes(b"x,y,v\n0,0,1\n\x89PNG\x00\x01")
    with pytest.raises(ValueError, match=r"image.csv: not a text file: control byte 0x00 at byte "
                       r"offset 16"):  # fmt: skip
        read_xyz(path)


def _map(rotation=0.0, dy=20.0):
    grid = Grid("map", (4, 5), x0=431000.5, y0=6712000.25, dx=25.0, dy=dy,
                rotation_deg=rotation)  # fmt: skip
    rng = np.random.default_rng(11)
    depth = rng.uniform(1500, 2500, size=(4, 5))
    depth[1, 3] = np.nan
    return GridData(grid, {"depth": depth, "net_to_gross": rng.uniform(0, 1, size=(4, 5))})


@pytest.mark.parametrize("rotation", [0.0, 30.0, -112.5])
def test_xyz_round_trip(tmp_path, rotation):
    original = _map(rotation)
    path = write_xyz(tmp_path / "map.csv", original)
    back = read_xyz(path, rotation_deg=rotation)
    assert back.grid.geometry_difference(original.grid) is None
    for name, arr in original.values.items():
        np.testing.assert_allclose(back.values[name], arr, rtol=0, atol=0, equal_nan=True)


def test_xyz_round_trip_with_null_and_space_delimiter(tmp_path):
    original = _map()
    path = write_xyz(tmp_path / "map.xyz", original, delimiter=" ", header=False,
                     null_value=-999.25)  # fmt: skip
    assert "-999.25" in path.read_text()
    back = read_xyz(path, names=["depth", "net_to_gross"], null_value=-999.25)
    np.testing.assert_array_equal(back.values["depth"], original.values["depth"])


def test_npz_round_trip_keeps_attributes_and_geometry(tmp_path):
    original = _map(rotation=12.0, dy=-20.0)
    path = write_npz(tmp_path / "maps.npz", original)
    back = read_npz(path)
    assert back.grid.to_dict() == original.grid.to_dict()
    assert list(back.values) == ["depth", "net_to_gross"]
    for name, arr in original.values.items():
        np.testing.assert_array_equal(back.values[name], arr)


def test_npz_with_coordinate_vectors(tmp_path):
    path = tmp_path / "user.npz"
    amp = np.arange(12.0).reshape(3, 4)
    np.savez(path, amp=amp, x=np.array([10.0, 20.0, 30.0, 40.0]), y=np.array([5.0, 7.0, 9.0]))
    data = read_npz(path)
    assert (data.grid.x0, data.grid.dx, data.grid.y0, data.grid.dy) == (10, 10, 5, 2)
    cube = tmp_path / "cube.npz"
    np.savez(cube, amp=np.zeros((3, 4, 6)), x=np.arange(4.0), y=np.arange(3.0),
             samples=1000 + 4.0 * np.arange(6))  # fmt: skip
    assert read_npz(cube).grid.sample_axis == SampleAxis("time", 1000.0, 4.0)


def test_npz_refuses_pickles_and_mismatched_shapes(tmp_path):
    path = tmp_path / "obj.npz"
    np.savez(path, a=np.array([{"x": 1}], dtype=object))
    with pytest.raises(ValueError, match="obj.npz"):
        read_npz(path)
    path = tmp_path / "mix.npz"
    np.savez(path, intercept=np.zeros((3, 4)), gradient=np.zeros((3, 5)))
    with pytest.raises(ValueError, match=r"'intercept' \(shape \(3, 4\)\).*'gradient' \(shape "
                       r"\(3, 5\)\)"):  # fmt: skip
        read_npz(path)
    (tmp_path / "junk.npz").write_text("not a zip")
    with pytest.raises(ValueError, match="junk.npz: not a readable .npz"):
        read_npz(tmp_path / "junk.npz")


def test_npy_map_and_cube(tmp_path):
    cube = np.arange(60, dtype=np.float32).reshape(3, 4, 5)
    write_npy(tmp_path / "c.npy", cube)
    data = read_npy(tmp_path / "c.npy", name="intercept", mmap=True)
    assert isinstance(data.values["intercept"], np.memmap)
    assert data.grid.kind == "cube" and not data.grid.georeferenced
    np.testing.assert_array_equal(data.values["intercept"], cube)
    grid = Grid("cube", (3, 4, 6), sample_axis=SampleAxis("time", 0, 4))
    with pytest.raises(ValueError, match=r"shape \(3, 4, 6\).*shape \(3, 4, 5\)"):
        read_npy(tmp_path / "c.npy", grid)
    np.save(tmp_path / "v.npy", np.zeros(5))
    with pytest.raises(ValueError, match=r"map is 2-D and a cube 3-D \(got shape \(5,\)\)"):
        read_npy(tmp_path / "v.npy")


def test_check_same_geometry_names_both_shapes():
    a = Grid("map", (10, 20), dx=25, dy=25)
    b = Grid("map", (10, 21), dx=25, dy=25)
    with pytest.raises(ValueError, match=r"'intercept' \(shape \(10, 20\)\) does not match "
                       r"'gradient' \(shape \(10, 21\)\): shape differs"):  # fmt: skip
        check_same_geometry(a, b, ("intercept", "gradient"))
    shifted = Grid("map", (10, 20), x0=5.0, dx=25, dy=25)
    with pytest.raises(ValueError, match="origin differs"):
        check_same_geometry(a, shifted, ("a", "b"))
    check_same_geometry(a, Grid("map", (10, 20), x0=0.01, dx=25, dy=25), ("a", "b"))  # 1 mm tol
    check_same_geometry(Grid.unit((10, 20)), shifted, ("a", "b"))  # placeholder: shape only
    check_same_geometry(a, np.zeros((10, 20)), ("grid", "array"))


def test_grid_validation_and_json_round_trip():
    with pytest.raises(ValueError, match="a cube needs a sample_axis"):
        Grid("cube", (2, 3, 4))
    with pytest.raises(ValueError, match="needs 2 inline and 3 crossline numbers"):
        Grid("cube", (2, 3, 4), sample_axis=SampleAxis("time", 0, 4), inlines=(1, 2, 3),
             crosslines=(1, 2), sorting="inline")  # fmt: skip
    with pytest.raises(ValueError, match="spacing must be non-zero"):
        Grid("map", (2, 2), dx=0.0)
    with pytest.raises(ValueError, match="sample step must be a positive number"):
        SampleAxis("depth", 0.0, -1.0)
    g = Grid("cube", (2, 3, 4), 1.0, 2.0, 12.5, -25.0, 45.0, SampleAxis("depth", 1000.0, 2.0),
             inlines=(10, 11), crosslines=(5, 6, 7), sorting="inline", attributes=("ai",),
             null_value=-999.25)  # fmt: skip
    again = Grid.from_dict(json.loads(json.dumps(g.to_dict())))
    assert again == g


def test_node_xy_follows_rotation():
    g = Grid("map", (2, 2), x0=100.0, y0=200.0, dx=10.0, dy=5.0, rotation_deg=90.0)
    x, y = g.node_xy()
    # columns run north, rows run west when the grid is turned 90 degrees anticlockwise
    np.testing.assert_allclose(x, [[100, 100], [95, 95]], atol=1e-12)
    np.testing.assert_allclose(y, [[200, 210], [200, 210]], atol=1e-12)
    assert math.isclose(g.n_traces, 4)


def test_dead_trace_and_no_data_masks():
    block = np.array(
        [[0.0, 0.0, 0.0], [np.nan, np.nan, np.nan], [0.0, np.nan, 0.0], [0.0, 1.0, 0.0],
         [1.0, np.nan, 2.0]]
    )  # fmt: skip
    np.testing.assert_array_equal(dead_trace_mask(block), [True, True, True, False, False])
    nd = no_data_mask(block)
    np.testing.assert_array_equal(nd[3], [False, False, False])
    np.testing.assert_array_equal(nd[4], [False, True, False])
    assert nd[:3].all()


def test_iter_chunks_reassembles(tmp_path):
    arr = np.arange(103 * 4).reshape(103, 4)
    np.save(tmp_path / "a.npy", arr)
    mm = np.load(tmp_path / "a.npy", mmap_mode="r")
    parts = list(iter_chunks(mm, 10))
    assert len(parts) == 11 and parts[-1][0] == slice(100, 103)
    np.testing.assert_array_equal(np.concatenate([p for _, p in parts]), arr)
    with pytest.raises(ValueError, match="chunk_rows must be a positive integer"):
        next(iter_chunks(arr, 0))
