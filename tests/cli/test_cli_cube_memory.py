"""``porecast classify`` on a cube of 10^8 samples stays under 1.5 GB of peak memory.

The requirement: a cube of 10^8 samples classifies with peak resident memory under
1.5 GB, whatever its size on disk, because the cube is streamed chunk by chunk.
The test writes two attribute cubes (intercept and gradient, 200 lines x 500 traces
x 1000 samples, float32: 400 MB each) piece by piece, runs the real command in a
child process and reads the child's own peak resident set (``VmHWM`` of
/proc/self/status, which counts anonymous and mapped file pages alike). The
outputs are then checked against an in-process classification of a few traces
with the same trained model (same seed, so the same Monte Carlo samples).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest

from porecast.io import Grid, GridData, write_npz
from porecast.physics import forward
from porecast.physics.scenario import default_scenario, validate_scenario
from porecast.services import classification as cls

SHAPE = (200, 500, 1000)  # lines, traces per line, samples per trace: 10^8 samples
LIMIT_BYTES = 1.5e9
REALISATIONS = 300

_CHILD = textwrap.dedent(
    """
    import json, sys
    from porecast.cli import main

    rc = main(sys.argv[1:])
    with open("/proc/self/status") as fh:
        hwm_kib = int(next(l for l in fh if l.startswith("VmHWM:")).split()[1])
    print(json.dumps({"rc": rc, "peak_bytes": hwm_kib * 1024}))
    """
)


def _trace_values(t0: int, n: int, ns: int, rng: np.random.Generator) -> tuple[np.ndarray, ...]:
    """Invented intercept and gradient traces: a drifting background with noise."""
    t = np.arange(t0, t0 + n, dtype=np.float64)[:, None]
    z = np.arange(ns, dtype=np.float64)[None, :]
    intercept = 0.04 * np.sin(t / 700.0 + z / 90.0) + rng.normal(0.0, 0.03, (n, ns))
    gradient = -0.08 * np.cos(t / 1100.0 - z / 130.0) + rng.normal(0.0, 0.05, (n, ns))
    return intercept.astype("<f4"), gradient.astype("<f4")


def _write_cubes(folder) -> tuple[str, str]:
    """Write both cubes piece by piece (the test process itself stays small)."""
    paths = folder / "intercept.npy", folder / "gradient.npy"
    header = {"descr": "<f4", "fortran_order": False, "shape": SHAPE}
    n_traces, ns = SHAPE[0] * SHAPE[1], SHAPE[2]
    rng = np.random.default_rng(20261201)
    handles = [open(p, "wb") for p in paths]
    try:
        for fh in handles:
            np.lib.format.write_array_header_1_0(fh, header)
        piece = 4000
        for t0 in range(0, n_traces, piece):
            n = min(piece, n_traces - t0)
            a, b = _trace_values(t0, n, ns, rng)
            if t0 == 0:
                a[:3] = 0.0  # three dead traces
                b[:3] = 0.0
                a[5, 10:20] = np.nan  # a gap of no data inside a live trace
            handles[0].write(a.tobytes())
            handles[1].write(b.tobytes())
    finally:
        for fh in handles:
            fh.close()
    return str(paths[0]), str(paths[1])


def _covariate_maps(folder) -> tuple[list[str], dict[str, np.ndarray]]:
    ny, nx = SHAPE[:2]
    cols, rows = np.meshgrid(np.arange(nx), np.arange(ny))
    maps = {
        "net_uplift_m": 1150.0 * cols / (nx - 1) + 25.0,
        "present_depth_m": 1420.0 + 1300.0 * rows / (ny - 1),
        "gradient_c_per_km": 29.0 + 12.0 * (cols + rows) / (nx + ny - 2),
    }
    grid = Grid(kind="map", shape=(ny, nx), x0=0.0, y0=0.0, dx=25.0, dy=25.0)
    args: list[str] = []
    for name, arr in maps.items():
        path = folder / f"{name}.npz"
        write_npz(path, GridData(grid.with_attributes((name,)), {name: arr}))
        args += ["--covariate", f"{name}={path}"]
    return args, maps


@pytest.mark.slow
@pytest.mark.skipif(not os.path.exists("/proc/self/status"), reason="needs Linux /proc")
def test_classify_cube_of_1e8_samples_under_1_5_gb(tmp_path):
    free = os.statvfs(tmp_path)
    if free.f_bavail * free.f_frsize < 6e9:
        pytest.skip("needs 6 GB of free disk for a 10^8-sample cube and its outputs")
    assert int(np.prod(SHAPE)) == 10**8
    intercept, gradient = _write_cubes(tmp_path)
    cov_args, maps = _covariate_maps(tmp_path)
    scenario = tmp_path / "scenario.json"
    scenario.write_text(json.dumps(default_scenario()))
    out = tmp_path / "out"

    t0 = time.perf_counter()
    proc = subprocess.run(
        [sys.executable, "-c", _CHILD, "classify", str(scenario), "--attributes",
         f"intercept={intercept}", f"gradient={gradient}", *cov_args,
         "--realisations", str(REALISATIONS), "--out", str(out), "--quiet"],
        capture_output=True, text=True, timeout=1800,
    )  # fmt: skip
    seconds = time.perf_counter() - t0
    assert proc.returncode == 0, proc.stderr[-2000:]
    figures = json.loads(proc.stdout.strip().splitlines()[-1])
    assert figures["rc"] == 0
    peak = figures["peak_bytes"]
    print(f"classify 10^8-sample cube: peak RSS {peak / 1e6:.0f} MB (limit 1500 MB), "
          f"{seconds:.0f} s, {1e8 / seconds:.2e} samples/s end to end")
    assert peak < LIMIT_BYTES

    summary = json.loads((out / "summary.json").read_text())
    assert summary["shape"] == list(SHAPE)
    assert summary["n_dead_traces"] == 3
    most = np.load(out / "most_likely.npy", mmap_mode="r")
    assert most.shape == SHAPE
    assert np.all(np.isnan(most[0, :3]))  # dead traces are never classified
    assert np.all(np.isnan(most[0, 5, 10:20])) and not np.isnan(most[0, 5, 9])

    # Spot checks against the same model classifying the same traces in this process.
    sc = validate_scenario(default_scenario())
    model = cls.train(forward.simulate(sc, realisations=REALISATIONS), sc)
    a_all = np.load(intercept, mmap_mode="r")
    g_all = np.load(gradient, mmap_mode="r")
    names = cls.cube_output_names(model)
    outputs = {n: np.load(out / f"{n}.npy", mmap_mode="r") for n in names}
    for line, trace in ((0, 7), (57, 123), (199, 499)):
        rows = np.stack([a_all[line, trace], g_all[line, trace]], -1).astype(np.float64)
        covs = {c: np.full(SHAPE[2], maps[c][line, trace]) for c in model.axes}
        res = model.classify(rows, covs)
        np.testing.assert_array_equal(outputs["most_likely"][line, trace],
                                      res.most_likely.astype(np.float32))
        for j, f in enumerate(model.facies):
            np.testing.assert_allclose(outputs[f"posterior_{cls.slug(f)}"][line, trace],
                                       res.posterior[:, j].astype(np.float32), rtol=1e-6,
                                       atol=1e-30)
