"""SEG-Y reading by chunks, geometry from headers, header-copying output, bad files.

Reference implementation throughout: segyio itself (``segyio.tools.cube``,
``segyio.tools.rotation``, header and binary-header access), which the code
under test only uses for opening files and reading trace ranges.
"""

from __future__ import annotations

import math
import os

import numpy as np
import pytest
import segyio

from porecast.io.grids import SampleAxis, dead_trace_mask
from porecast.io.segy import (
    SegyTraceWriter,
    check_segy_layout,
    iter_segy_chunks,
    segy_geometry,
    write_segy_like,
)


@pytest.mark.parametrize("sorting", ["inline", "crossline"])
def test_trace_chunks_reassemble_to_segyio_cube(make_segy, sorting):
    path, data = make_segy(shape=(5, 7, 30), sorting=sorting)
    chunks = list(iter_segy_chunks(path, max_traces=4))  # 35 traces: 9 chunks, last of 3
    assert [c.data.shape[0] for c in chunks] == [4] * 8 + [3]
    whole = np.concatenate([c.data for c in chunks])
    reference = segyio.tools.cube(str(path))
    np.testing.assert_array_equal(whole.reshape(reference.shape), reference)
    np.testing.assert_array_equal(whole.reshape(data.shape), data)
    with segyio.open(str(path)) as f:
        il = f.attributes(segyio.TraceField.INLINE_3D)[:]
        xl = f.attributes(segyio.TraceField.CROSSLINE_3D)[:]
    np.testing.assert_array_equal(np.concatenate([c.headers["inline"] for c in chunks]), il)
    np.testing.assert_array_equal(np.concatenate([c.headers["crossline"] for c in chunks]), xl)


@pytest.mark.parametrize("sorting", ["inline", "crossline"])
def test_inline_chunks_hold_one_inline_each(make_segy, sorting):
    path, _ = make_segy(shape=(4, 5, 12), sorting=sorting)
    seen = np.zeros(20, dtype=int)
    with segyio.open(str(path)) as f:
        for chunk in iter_segy_chunks(path, max_traces=3, by="inline"):
            assert chunk.data.shape[0] <= 3
            assert np.all(chunk.headers["inline"] == chunk.inline)
            traces = np.arange(f.tracecount)[chunk.traces]
            seen[traces] += 1
            line = f.iline[chunk.inline]  # segyio's own inline reader, (n_crosslines, ns)
            pos = np.searchsorted(f.xlines, chunk.headers["crossline"])
            np.testing.assert_array_equal(chunk.data, line[pos])
    assert np.all(seen == 1)  # every trace exactly once


def test_geometry_from_headers_matches_construction(make_segy):
    path, _ = make_segy(
        shape=(6, 8, 10), origin=(431000.0, 6712000.0), spacing=(25.0, 12.5), rotation_deg=30.0
    )
    geom = segy_geometry(path)
    grid = geom.grid
    assert geom.structured and geom.sorting == "inline" and geom.note == ""
    assert grid is not None and grid.shape == (6, 8, 10)
    assert grid.inlines == tuple(range(100, 112, 2)) and grid.crosslines == tuple(range(10, 18))
    # centimetre rounding of the stored coordinates bounds the errors
    assert grid.x0 == pytest.approx(431000.0, abs=0.01)
    assert grid.y0 == pytest.approx(6712000.0, abs=0.01)
    assert grid.dx == pytest.approx(25.0, abs=0.01)
    assert grid.dy == pytest.approx(12.5, abs=0.01)
    assert grid.rotation_deg == pytest.approx(30.0, abs=1e-3)
    gx, gy = grid.node_xy()
    np.testing.assert_allclose(gx.ravel(), geom.cdp_x, atol=0.02)
    np.testing.assert_allclose(gy.ravel(), geom.cdp_y, atol=0.02)
    assert geom.sample_axis == SampleAxis("time", 0.0, 4.0)
    # segyio.tools.rotation: clockwise angle from north of the first fast line. It
    # works on the stored integers in single precision (about 4 cm at 6.7e8 cm), so
    # over the 175 m line it agrees to about 0.02 degree.
    with segyio.open(str(path)) as f:
        rot_cw_north, _, _ = segyio.tools.rotation(f)
    segyio_ccw_east = (90.0 - math.degrees(rot_cw_north)) % 360.0
    assert segyio_ccw_east == pytest.approx(grid.rotation_deg, abs=0.02)


def test_positive_coordinate_scalar_multiplies(make_segy):
    path, _ = make_segy(shape=(3, 4, 5), scalar=10, spacing=(20.0, 10.0), rotation_deg=0.0)
    geom = segy_geometry(path)
    assert geom.grid.dx == pytest.approx(20.0) and geom.grid.dy == pytest.approx(10.0)
    assert geom.cdp_x[0] == pytest.approx(500000.0)


def test_crossline_sorted_grid_maps_nodes_to_cdp(make_segy):
    path, _ = make_segy(shape=(5, 3, 6), sorting="crossline", rotation_deg=-20.0)
    geom = segy_geometry(path)
    assert geom.sorting == "crossline" and geom.grid.shape == (5, 3, 6)
    gx, gy = geom.grid.node_xy()
    np.testing.assert_allclose(gx.ravel(), geom.cdp_x, atol=0.02)
    np.testing.assert_allclose(gy.ravel(), geom.cdp_y, atol=0.02)


def test_little_endian_file_is_detected(make_segy):
    path, data = make_segy(shape=(3, 4, 9), endian="little")
    assert check_segy_layout(path).endian == "little"
    whole = np.concatenate([c.data for c in iter_segy_chunks(path, 5)])
    np.testing.assert_array_equal(whole.reshape(data.shape), data)


def _unstructured(path, n=7, ns=10):
    spec = segyio.spec()
    spec.tracecount = n
    spec.samples = np.arange(ns) * 2.0
    spec.format = 5
    il = [1, 1, 2, 5, 5, 9, 3][:n]
    xl = [1, 3, 1, 2, 2, 7, 1][:n]
    with segyio.create(str(path), spec) as f:
        for i in range(n):
            f.header[i] = {segyio.su.iline: il[i], segyio.su.xline: xl[i]}
            f.trace[i] = np.arange(ns, dtype=np.float32) + i
    return np.arange(ns, dtype=np.float32)[None, :] + np.arange(n)[:, None]


def test_unstructured_file_falls_back_with_note(tmp_path):
    path = tmp_path / "scattered.sgy"
    expected = _unstructured(path)
    geom = segy_geometry(path)
    assert not geom.structured and geom.grid is None
    assert "ignore_geometry=True" in geom.note and "no regular inline/crossline grid" in geom.note
    assert geom.shape == (7, 10)
    whole = np.concatenate([c.data for c in iter_segy_chunks(path, 3)])
    np.testing.assert_array_equal(whole, expected)
    with pytest.raises(ValueError, match="reading by inline needs a structured file"):
        list(iter_segy_chunks(path, 3, by="inline"))


def test_truncated_segy_refused_with_byte_offset(make_segy, tmp_path):
    path, _ = make_segy(shape=(3, 4, 25))
    raw = path.read_bytes()
    trace_bytes = 240 + 25 * 4
    assert len(raw) == 3600 + 12 * trace_bytes
    cut = tmp_path / "cut.sgy"
    cut.write_bytes(raw[:-100])
    last_complete_end = 3600 + 11 * trace_bytes
    with pytest.raises(
        ValueError, match=rf"cut.sgy: truncated SEG-Y.*byte offset {last_complete_end}"
    ):
        check_segy_layout(cut)
    with pytest.raises(ValueError, match="truncated"):
        segy_geometry(cut)
    with pytest.raises(ValueError, match="truncated"):
        list(iter_segy_chunks(cut, 4))


def test_text_file_named_sgy_refused(tmp_path):
    path = tmp_path / "notes.sgy"
    path.write_text("this is a plain text file, not seismic\n" * 200)
    with pytest.raises(ValueError, match=r"notes.sgy: not a SEG-Y file.*byte offset 3224"):
        segy_geometry(path)


def test_file_shorter_than_header_refused(tmp_path):
    path = tmp_path / "tiny.segy"
    path.write_bytes(b"\x00" * 100)
    with pytest.raises(ValueError, match="tiny.segy: not a SEG-Y file: 100 bytes"):
        check_segy_layout(path)


def test_depth_axis_needs_explicit_sample_axis(make_segy):
    path, _ = make_segy(shape=(2, 2, 5))
    with pytest.raises(ValueError, match="depth sample step"):
        segy_geometry(path, sample_domain="depth")
    axis = SampleAxis("depth", 1500.0, 5.0)
    assert segy_geometry(path, sample_axis=axis).grid.sample_axis == axis


def test_prestack_file_refused(tmp_path):
    spec = segyio.spec()
    spec.ilines, spec.xlines, spec.offsets = [1, 2], [1, 2], [100, 200]
    spec.samples = np.arange(4) * 4.0
    spec.format = 5
    path = tmp_path / "gathers.sgy"
    with segyio.create(str(path), spec) as f:
        t = 0
        for il in (1, 2):
            for xl in (1, 2):
                for off in (100, 200):
                    f.header[t] = {segyio.su.iline: il, segyio.su.xline: xl, segyio.su.offset: off}
                    f.trace[t] = np.ones(4, np.float32)
                    t += 1
    with pytest.raises(ValueError, match="pre-stack file with 2 offsets"):
        segy_geometry(path)


def test_dead_traces_flagged_in_chunks(make_segy):
    data = np.random.default_rng(3).normal(size=(3, 4, 8)).astype(np.float32)
    data[0, 1] = 0.0
    data[2, 3] = 0.0
    path, _ = make_segy(data=data)
    dead = np.concatenate([dead_trace_mask(c.data) for c in iter_segy_chunks(path, 5)])
    assert np.flatnonzero(dead).tolist() == [1, 11]


def _all_headers(path):
    with segyio.open(str(path), ignore_geometry=True) as f:
        return f.text[0], dict(f.bin), [dict(h) for h in f.header], segyio.tools.collect(f.trace)


def test_output_copies_text_binary_and_trace_headers(make_segy, tmp_path):
    path, data = make_segy(shape=(4, 5, 16))
    out = tmp_path / "posterior_sand.sgy"
    write_segy_like(path, out, 0.5 * data, chunk_traces=3)
    text_in, bin_in, hdr_in, _ = _all_headers(path)
    text_out, bin_out, hdr_out, traces_out = _all_headers(out)
    assert text_out == text_in
    assert bin_out == bin_in  # the template is already IEEE float (format 5)
    assert hdr_out == hdr_in
    np.testing.assert_array_equal(traces_out.reshape(data.shape), 0.5 * data)
    np.testing.assert_array_equal(segyio.tools.cube(str(out)), 0.5 * data)


def test_output_from_ibm_template_is_ieee_with_other_headers_equal(make_segy, tmp_path):
    path, _ = make_segy(shape=(3, 3, 10), fmt=1)
    with segyio.open(str(path)) as f:
        assert int(f.bin[segyio.BinField.Format]) == 1  # IBM float
        values = segyio.tools.cube(f)
    out = tmp_path / "facies.sgy"
    write_segy_like(path, out, values)
    _, bin_in, hdr_in, _ = _all_headers(path)
    _, bin_out, hdr_out, _ = _all_headers(out)
    assert bin_out.pop(segyio.BinField.Format) == 5 and bin_in.pop(segyio.BinField.Format) == 1
    assert bin_out == bin_in and hdr_out == hdr_in
    np.testing.assert_array_equal(segyio.tools.cube(str(out)), values)


def test_incomplete_output_is_discarded(make_segy, tmp_path):
    path, data = make_segy(shape=(2, 3, 5))
    outdir = tmp_path / "out"
    outdir.mkdir()
    with pytest.raises(ValueError, match="3 of 6 traces were never written"):
        with SegyTraceWriter(path, outdir / "half.sgy") as w:
            w.write(slice(0, 3), data.reshape(6, 5)[:3])
    assert os.listdir(outdir) == []


def test_exception_while_writing_leaves_nothing(make_segy, tmp_path):
    path, data = make_segy(shape=(2, 3, 5))
    outdir = tmp_path / "out"
    outdir.mkdir()
    with pytest.raises(RuntimeError, match="worker stopped"):
        with SegyTraceWriter(path, outdir / "x.sgy") as w:
            w.write(slice(0, 2), data.reshape(6, 5)[:2])
            raise RuntimeError("worker stopped")
    assert os.listdir(outdir) == []


def test_strided_write_fills_an_inline_of_a_crossline_sorted_file(make_segy, tmp_path):
    path, data = make_segy(shape=(4, 3, 6), sorting="crossline")
    out = tmp_path / "byline.sgy"
    with SegyTraceWriter(path, out) as w:
        for chunk in iter_segy_chunks(path, 10, by="inline"):
            w.write(chunk.traces, chunk.data + 1.0)
    np.testing.assert_array_equal(segyio.tools.cube(str(out)), data + 1.0)


def test_wrong_block_shape_refused(make_segy, tmp_path):
    path, _ = make_segy(shape=(2, 2, 5))
    with pytest.raises(ValueError, match=r"block of shape \(2, 4\)"):
        with SegyTraceWriter(path, tmp_path / "bad.sgy") as w:
            w.write(slice(0, 2), np.zeros((2, 4)))
    assert not (tmp_path / "bad.sgy").exists()
