"""Chunked cube processing: lockstep reading, equality with whole-array results,
no data, atomic outputs, tiles and bounded memory."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest
import segyio

from porecast.io.cubes import NpyTraceWriter, iter_cube_chunks, open_cube, process_cube
from porecast.io.grids import Grid, SampleAxis


def two_facies_posterior(block):
    """A small two-class Gaussian classifier on (intercept, gradient) rows.

    Equal priors, isotropic unit covariances around (-1, -1) (sand) and (1, 1)
    (shale): the posterior of sand is a logistic function of the discriminant
    (Bayes' rule with equal covariances, e.g. Hastie et al., *Elements of
    Statistical Learning*, sec. 4.3).
    """
    if not np.all(np.isfinite(block)):
        raise AssertionError("no-data rows must not reach the function")
    return _posterior(block)


def _posterior(block):
    d_sand = np.sum((block - (-1.0)) ** 2, axis=1)
    d_shale = np.sum((block - 1.0) ** 2, axis=1)
    p_sand = 1.0 / (1.0 + np.exp(-0.5 * (d_shale - d_sand)))
    return {"p_sand": p_sand, "p_shale": 1.0 - p_sand, "most_likely": (p_sand < 0.5) * 1.0}


NAMES = ["p_sand", "p_shale", "most_likely"]


def _whole(intercept, gradient):
    rows = np.stack([intercept.ravel(), gradient.ravel()], axis=1).astype(np.float64)
    with np.errstate(invalid="ignore"):
        out = _posterior(rows)  # NaN rows give NaN; callers compare finite nodes only
    return {k: v.reshape(intercept.shape).astype(np.float32) for k, v in out.items()}


@pytest.fixture
def cubes(tmp_path, rng):
    shape = (6, 9, 25)
    intercept = rng.normal(size=shape).astype(np.float32)
    gradient = (rng.normal(size=shape) - 0.3 * intercept).astype(np.float32)
    np.save(tmp_path / "intercept.npy", intercept)
    np.save(tmp_path / "gradient.npy", gradient)
    return tmp_path, intercept, gradient


def test_streaming_equals_whole_array_processing(cubes):
    d, intercept, gradient = cubes
    out = d / "out"
    out.mkdir()
    result = process_cube(
        {"intercept": d / "intercept.npy", "gradient": d / "gradient.npy"},
        two_facies_posterior,
        NAMES,
        out,
        chunk_traces=4,  # 54 traces: 14 chunks, the last one partial
    )
    expected = _whole(intercept, gradient)
    assert set(result.outputs) == set(NAMES) and result.shape == intercept.shape
    for name in NAMES:
        got = np.load(result.outputs[name])
        assert got.dtype == np.float32
        np.testing.assert_array_equal(got, expected[name])
    assert result.n_dead_traces == 0 and result.n_no_data_samples == 0


def test_no_data_rows_skip_the_function_and_become_nan(cubes):
    d, intercept, gradient = cubes
    intercept[1, 2] = 0.0  # dead trace in one attribute only
    gradient[3, 4] = np.nan  # all-NaN trace
    intercept[0, 0, 5] = np.nan  # single missing sample
    out = d / "out"
    out.mkdir()
    result = process_cube(
        {"intercept": intercept, "gradient": gradient}, two_facies_posterior, NAMES, out,
        chunk_traces=7,
    )  # fmt: skip
    p = np.load(result.outputs["p_sand"])
    assert np.all(np.isnan(p[1, 2])) and np.all(np.isnan(p[3, 4])) and np.isnan(p[0, 0, 5])
    assert result.n_dead_traces == 2
    assert result.n_no_data_samples == 2 * 25 + 1
    finite = np.isfinite(p)
    assert finite.sum() == p.size - result.n_no_data_samples
    np.testing.assert_array_equal(p[finite], _whole(intercept, gradient)["p_sand"][finite])


def test_segy_inputs_to_segy_outputs_copy_headers(make_segy, tmp_path, rng):
    shape = (4, 5, 30)
    a = rng.normal(size=shape).astype(np.float32)
    b = rng.normal(size=shape).astype(np.float32)
    pa, _ = make_segy("intercept.sgy", data=a)
    pb, _ = make_segy("gradient.segy", data=b)
    out = tmp_path / "out"
    out.mkdir()
    result = process_cube(
        {"intercept": pa, "gradient": pb}, two_facies_posterior, NAMES, out,
        output_format="segy", chunk_traces=3,
    )  # fmt: skip
    assert result.grid is not None and result.grid.shape == shape
    expected = _whole(a, b)
    with segyio.open(str(pa)) as src:
        headers_in = [dict(h) for h in src.header]
        text_in = src.text[0]
    for name in NAMES:
        path = result.outputs[name]
        assert path.suffix == ".sgy"
        np.testing.assert_array_equal(segyio.tools.cube(str(path)), expected[name])
        with segyio.open(str(path)) as f:
            assert [dict(h) for h in f.header] == headers_in and f.text[0] == text_in


def test_mismatched_geometry_refused_with_both_shapes(cubes):
    d, intercept, _ = cubes
    np.save(d / "gradient.npy", np.zeros((6, 10, 25), np.float32))
    out = d / "out"
    out.mkdir()
    with pytest.raises(ValueError, match=r"'intercept' \(shape \(6, 9, 25\)\).*'gradient' "
                       r"\(shape \(6, 10, 25\)\)"):  # fmt: skip
        process_cube(
            {"intercept": d / "intercept.npy", "gradient": d / "gradient.npy"},
            two_facies_posterior, NAMES, out,
        )  # fmt: skip
    assert os.listdir(out) == []


def test_segy_cubes_with_different_origins_refused(make_segy, tmp_path):
    pa, _ = make_segy("a.sgy", shape=(3, 4, 5))
    pb, _ = make_segy("b.sgy", shape=(3, 4, 5), origin=(500100.0, 6000000.0))
    with pytest.raises(ValueError, match="origin differs"):
        list(iter_cube_chunks({"a": open_cube(pa, name="a"), "b": open_cube(pb, name="b")}, 2))


def test_lockstep_reads_same_traces_from_npy_and_segy(make_segy, tmp_path):
    pa, data = make_segy("a.sgy", shape=(3, 4, 6))
    np.save(tmp_path / "b.npy", 2.0 * data)
    readers = {"a": open_cube(pa, name="a"), "b": open_cube(tmp_path / "b.npy", name="b")}
    seen = []
    for chunk in iter_cube_chunks(readers, 5):
        np.testing.assert_array_equal(chunk.blocks["b"], 2.0 * chunk.blocks["a"])
        np.testing.assert_array_equal(
            chunk.blocks["a"], data.reshape(12, 6)[chunk.traces].astype(np.float64)
        )
        seen.append((chunk.traces.start, chunk.traces.stop))
    assert seen == [(0, 5), (5, 10), (10, 12)]
    for r in readers.values():
        r.close()


def test_wrong_function_keys_leave_no_output(cubes):
    d, *_ = cubes
    out = d / "out"
    out.mkdir()
    with pytest.raises(ValueError, match=r"func returned outputs \['p_sand'\]"):
        process_cube(
            {"intercept": d / "intercept.npy", "gradient": d / "gradient.npy"},
            lambda rows: {"p_sand": rows[:, 0]}, NAMES, out,
        )  # fmt: skip
    assert os.listdir(out) == []


def test_failure_midway_leaves_no_partial_output(cubes):
    d, *_ = cubes
    out = d / "out"
    out.mkdir()
    calls = []

    def flaky(rows):
        calls.append(len(rows))
        if len(calls) == 3:
            raise RuntimeError("classifier failed")
        return two_facies_posterior(rows)

    with pytest.raises(RuntimeError, match="classifier failed"):
        process_cube(
            {"intercept": d / "intercept.npy", "gradient": d / "gradient.npy"}, flaky, NAMES, out,
            chunk_traces=5,
        )  # fmt: skip
    assert len(calls) == 3 and os.listdir(out) == []


def test_truncated_segy_input_leaves_no_output(make_segy, tmp_path):
    pa, _ = make_segy("a.sgy", shape=(3, 4, 10))
    raw = pa.read_bytes()
    pa.write_bytes(raw[: len(raw) - 7])
    out = tmp_path / "out"
    out.mkdir()
    with pytest.raises(ValueError, match="a.sgy: truncated SEG-Y"):
        process_cube({"a": pa}, lambda r: {"x": r[:, 0]}, ["x"], out, output_format="segy")
    assert os.listdir(out) == []


def test_tiles_reassemble_the_full_result(cubes):
    d, intercept, gradient = cubes
    inputs = {"intercept": d / "intercept.npy", "gradient": d / "gradient.npy"}
    parts = []
    for k, (a, b) in enumerate([(0, 20), (20, 54)]):
        out = d / f"tile{k}"
        out.mkdir()
        res = process_cube(inputs, two_facies_posterior, NAMES, out, trace_range=(a, b),
                           chunk_traces=6)  # fmt: skip
        assert res.shape == (b - a, 25) and res.n_traces == b - a
        parts.append(np.load(res.outputs["p_sand"]))
    full = np.concatenate(parts).reshape(intercept.shape)
    np.testing.assert_array_equal(full, _whole(intercept, gradient)["p_sand"])


def test_progress_reports_every_chunk(cubes):
    d, *_ = cubes
    out = d / "out"
    out.mkdir()
    seen = []
    process_cube(
        {"intercept": d / "intercept.npy", "gradient": d / "gradient.npy"},
        two_facies_posterior, NAMES, out, chunk_traces=20,
        progress=lambda done, total: seen.append((done, total)),
    )  # fmt: skip
    assert seen == [(20, 54), (40, 54), (54, 54)]


def test_bad_output_names_and_formats_refused(cubes):
    d, *_ = cubes
    inputs = {"a": d / "intercept.npy"}
    with pytest.raises(ValueError, match="must be letters"):
        process_cube(inputs, two_facies_posterior, ["../escape"], d)
    with pytest.raises(ValueError, match="SEG-Y output needs a SEG-Y input"):
        process_cube(inputs, two_facies_posterior, ["p"], d, output_format="segy")
    with pytest.raises(ValueError, match="unknown cube format '.txt'"):
        open_cube(d / "cube.txt")


def test_fortran_ordered_npy_refused(tmp_path):
    np.save(tmp_path / "f.npy", np.asfortranarray(np.zeros((3, 4, 5))))
    with pytest.raises(ValueError, match="Fortran-ordered"):
        open_cube(tmp_path / "f.npy")


def test_null_value_of_grid_reads_as_nan(tmp_path):
    data = np.ones((2, 3, 4))
    data[1, 1, 2] = -999.25
    grid = Grid("cube", (2, 3, 4), sample_axis=SampleAxis("time", 0, 4), null_value=-999.25)
    np.save(tmp_path / "c.npy", data)
    with open_cube(tmp_path / "c.npy", grid=grid) as r:
        block = r.read(0, 6)
    assert np.isnan(block[4, 2]) and np.isfinite(block).sum() == 23


def test_npy_writer_discards_unfinished_file(tmp_path):
    with pytest.raises(ValueError, match="never written"):
        with NpyTraceWriter(tmp_path / "o.npy", (4, 3)) as w:
            w.write(slice(0, 2), np.ones((2, 3)))
    assert os.listdir(tmp_path) == []


# ----------------------------------------------------------------- peak memory

_MEMORY_SCRIPT = textwrap.dedent(
    """
    import json, sys
    import numpy as np
    import psutil
    from porecast.io.cubes import process_cube

    mode, a, b, out = sys.argv[1:5]

    def peak_rss_mib():
        # VmHWM: peak resident set of this process image. (getrusage's ru_maxrss
        # is not used: on Linux it keeps the parent's RSS across fork + exec.)
        with open("/proc/self/status") as fh:
            line = next(l for l in fh if l.startswith("VmHWM:"))
        return int(line.split()[1]) / 1024.0

    def func(rows):
        return {"ratio": rows[:, 1] / (1.0 + np.abs(rows[:, 0]))}

    base = psutil.Process().memory_info().rss / 2**20  # resident now, after imports
    if mode == "chunked":
        process_cube({"a": a, "b": b}, func, ["ratio"], out, chunk_traces=256, fsync=False)
    else:  # control: both cubes loaded whole, what the chunked path avoids
        total = float(np.load(a).sum()) + float(np.load(b).sum())
    print(json.dumps({"base_mib": base, "peak_mib": peak_rss_mib()}))
    """
)


def _write_npy_in_pieces(path, shape, fill):
    """Write a C-ordered float32 .npy piece by piece (so the test itself stays small)."""
    header = {"descr": "<f4", "fortran_order": False, "shape": shape}
    with open(path, "wb") as fh:
        np.lib.format.write_array_header_1_0(fh, header)
        rows_per_piece = 2048
        for start in range(0, shape[0] * shape[1], rows_per_piece):
            n = min(rows_per_piece, shape[0] * shape[1] - start)
            fh.write(fill(start, n, shape[2]).astype("<f4").tobytes())


@pytest.mark.slow
@pytest.mark.skipif(not os.path.exists("/proc/self/status"), reason="needs Linux /proc")
def test_peak_memory_is_bounded_by_the_chunk_not_the_cube(tmp_path):
    # two attribute cubes of 200 MiB each: 400 MiB of input, 200 MiB of output
    shape = (200, 256, 1024)
    cube_mib = 2 * np.prod(shape) * 4 / 2**20
    assert cube_mib == 400

    def fill_a(start, n, ns):
        # trace t holds t + 1 everywhere (no trace is dead)
        return np.broadcast_to(np.arange(start + 1, start + n + 1, dtype=np.float32)[:, None],
                               (n, ns))  # fmt: skip

    def fill_b(start, n, ns):
        return np.broadcast_to(np.arange(ns, dtype=np.float32)[None, :], (n, ns))

    a, b = tmp_path / "a.npy", tmp_path / "b.npy"
    _write_npy_in_pieces(a, shape, fill_a)
    _write_npy_in_pieces(b, shape, fill_b)
    out = tmp_path / "out"
    out.mkdir()

    def run(mode):
        t0 = time.perf_counter()
        proc = subprocess.run(
            [sys.executable, "-c", _MEMORY_SCRIPT, mode, str(a), str(b), str(out)],
            capture_output=True, text=True, check=True, timeout=300,
        )  # fmt: skip
        figures = json.loads(proc.stdout.strip().splitlines()[-1])
        return figures["peak_mib"] - figures["base_mib"], time.perf_counter() - t0

    growth, seconds = run("chunked")
    print(f"chunked: RSS growth {growth:.1f} MiB for a {cube_mib:.0f} MiB input ({seconds:.1f} s)")
    # one chunk: 256 traces x 1024 samples x 2 attributes x 8 bytes = 4 MiB; a few copies
    assert growth < 0.1 * cube_mib
    control, _ = run("whole")
    print(f"whole-array control: RSS growth {control:.1f} MiB")
    assert control > 0.45 * cube_mib  # the measurement sees one whole 200 MiB cube loaded

    ratio = np.load(out / "ratio.npy", mmap_mode="r")
    assert ratio.shape == shape
    for t in (0, 12345, 200 * 256 - 1):  # spot checks against the closed form
        j, i = divmod(t, 256)
        expected = np.arange(1024, dtype=np.float64) / (2.0 + t)
        np.testing.assert_allclose(ratio[j, i], expected.astype(np.float32), rtol=0)


def test_npy_inputs_with_segy_template(make_segy, tmp_path):
    template, data = make_segy("tpl.sgy", shape=(3, 4, 8))
    np.save(tmp_path / "a.npy", data)
    out = tmp_path / "out"
    out.mkdir()
    res = process_cube({"a": tmp_path / "a.npy"}, lambda r: {"twice": 2 * r[:, 0]}, ["twice"],
                       out, output_format="segy", segy_template=template)  # fmt: skip
    np.testing.assert_array_equal(segyio.tools.cube(str(res.outputs["twice"])), 2 * data)
    np.save(tmp_path / "t.npy", data.transpose(1, 0, 2).copy())  # same count, other shape
    with pytest.raises(ValueError, match=r"template 'tpl.sgy' \(shape \(3, 4, 8\)\) does not"):
        process_cube({"a": tmp_path / "t.npy"}, lambda r: {"x": r[:, 0]}, ["x"], out,
                     output_format="segy", segy_template=template)  # fmt: skip
