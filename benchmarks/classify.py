"""Throughput of the facies classifier against scikit-learn and the memory bound.

Run:  python benchmarks/classify.py [--n 10000000] [--repeats 3]

One process, one thread (threadpoolctl limits BLAS/OpenMP to 1; the numba kernels
are serial), the same data for every contender: n points of d = 2 attributes, k = 6
facies. Printed per contender: best wall time of ``--repeats`` runs, samples/s from
it, samples/s per core from the process CPU time (less sensitive to other jobs on a
shared machine), and the ratio to scikit-learn's
``QuadraticDiscriminantAnalysis.predict_proba``. The memory-bandwidth bound is the
time of a numpy copy of the input plus the output array (the bytes a classifier must
at least read and write; a copy moves them twice, so it is a generous bound), and
the cost of allocating and first touching a fresh output array (page faults) is
shown separately because every call that returns a new array pays it; the
``out=`` line times the same posterior written into one reused array (as when a
cube is streamed block by block), which does not pay it. The goals and ratios below
use the plain calls, as users make them.

Goals (per core): stationary posterior >= 5e7 samples/s and >= 10x scikit-learn;
non-stationary at least half the stationary rate.
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Callable

import numpy as np
from threadpoolctl import threadpool_limits

from porecast.physics.classify import classify, posterior, posterior_nonstationary


def best_of(fn: Callable[[], object], repeats: int) -> tuple[float, float]:
    """Best wall and CPU seconds of ``repeats`` calls (result dropped between calls)."""
    wall = cpu = float("inf")
    for _ in range(repeats):
        w0, c0 = time.perf_counter(), time.process_time()
        out = fn()
        w1, c1 = time.perf_counter(), time.process_time()
        del out
        wall, cpu = min(wall, w1 - w0), min(cpu, c1 - c0)
    return wall, cpu


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=float, default=1e7, help="points (default 1e7)")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--nodes", type=int, default=11, help="covariate nodes")
    parser.add_argument("--skip-numpy", action="store_true", help="skip the numpy engine")
    args = parser.parse_args()
    n, k, d = int(args.n), 6, 2
    rng = np.random.default_rng(20261201)

    # Six facies in intercept-gradient space (dimensionless reflectivities).
    from sklearn.discriminant_analysis import QuadraticDiscriminantAnalysis

    centres = rng.normal(scale=0.1, size=(k, d))
    train = np.concatenate([rng.normal(c, 0.03 + 0.02 * rng.random(d), (2000, d)) for c in centres])
    labels = np.repeat(np.arange(k), 2000)
    qda = QuadraticDiscriminantAnalysis(store_covariance=True).fit(train, labels)
    means, covs, priors = qda.means_, np.array(qda.covariance_), qda.priors_
    x = rng.normal(scale=0.12, size=(n, d))
    nodes = np.linspace(1000.0, 3000.0, args.nodes)  # covariate: max burial depth, m
    drift = np.linspace(0.0, 1.0, args.nodes)[:, None, None]
    node_means = means[None] + 0.05 * drift
    node_covs = covs[None] * (1.0 + drift[..., None])
    depth = rng.uniform(900.0, 3100.0, n)

    with threadpool_limits(limits=1):
        # Compile (or load from the on-disk cache) before timing.
        posterior(x[:300], means, covs, priors)
        posterior_nonstationary(x[:300], depth[:300], nodes, node_means, node_covs, priors)
        classify(x[:300], means, covs, priors)
        classify(x[:300], node_means, node_covs, priors, covariate=depth[:300], nodes=nodes)
        check = posterior(x[:100_000], means, covs, priors)
        err = np.max(np.abs(check - qda.predict_proba(x[:100_000])))

        rows: list[tuple[str, float, float]] = []

        def run(name: str, fn: Callable[[], object], repeats: int = args.repeats) -> None:
            wall, cpu = best_of(fn, repeats)
            rows.append((name, wall, cpu))
            print(
                f"  {name:<44s} {wall:8.3f} s  {n / wall:10.3e} samples/s"
                f"  {n / cpu:10.3e} samples/s per core (CPU time)",
                flush=True,
            )

        print(f"n = {n:.0e} points, d = {d}, k = {k} facies, 1 thread")
        print(f"max |posterior - sklearn predict_proba| on 1e5 points: {err:.1e}")
        run("sklearn QDA predict_proba", lambda: qda.predict_proba(x), max(1, args.repeats - 1))
        run("porecast posterior (numba)", lambda: posterior(x, means, covs, priors))
        reused = np.empty((n, k))
        run(
            "porecast posterior (numba, out= reused)",
            lambda: posterior(x, means, covs, priors, out=reused),
        )
        if not args.skip_numpy:
            run(
                "porecast posterior (numpy engine)",
                lambda: posterior(x, means, covs, priors, engine="numpy"),
                1,
            )
        run(
            f"porecast posterior_nonstationary ({args.nodes} nodes)",
            lambda: posterior_nonstationary(x, depth, nodes, node_means, node_covs, priors),
        )
        run("porecast classify (posterior+QC+entropy)", lambda: classify(x, means, covs, priors))
        run(
            f"porecast classify non-stationary ({args.nodes} nodes)",
            lambda: classify(x, node_means, node_covs, priors, covariate=depth, nodes=nodes),
        )

        out = np.empty((n, k))
        out.fill(0.5)
        x_copy = np.empty_like(x)
        out_copy = np.empty_like(out)

        def copy_both() -> None:
            np.copyto(x_copy, x)
            np.copyto(out_copy, out)

        run("bound: numpy copy of input + output", copy_both)

        def fresh_output() -> np.ndarray:
            a = np.empty((n, k))
            a.fill(0.0)
            return a

        run("cost: allocate + first touch of output", fresh_output)

    by_name = {name: wall for name, wall, _ in rows}
    cpu_by_name = {name: cpu for name, _, cpu in rows}
    sk = by_name["sklearn QDA predict_proba"]
    st = by_name["porecast posterior (numba)"]
    ns = by_name[f"porecast posterior_nonstationary ({args.nodes} nodes)"]
    bound = by_name["bound: numpy copy of input + output"]
    print(f"speed-up over scikit-learn (wall):          {sk / st:6.1f}x   (goal >= 10x)")
    cpu_ratio = cpu_by_name["sklearn QDA predict_proba"] / cpu_by_name["porecast posterior (numba)"]
    print(f"speed-up over scikit-learn (CPU time):      {cpu_ratio:6.1f}x")
    print(f"non-stationary / stationary rate:           {st / ns:6.2f}    (goal >= 0.5)")
    print(f"stationary time / memory-bound copy time:   {st / bound:6.2f}")


if __name__ == "__main__":
    main()
