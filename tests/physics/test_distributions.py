"""Sampling of uncertain inputs: the inverse normal CDF behind truncated normals.

References: scipy.special.ndtri (Cephes, accurate to rounding) and
scipy.stats.truncnorm. Acklam's (2003) approximation claims a relative error of at
most 1.15e-9 over (0, 1) (his figure, from memory).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special, stats

from porecast.physics import distributions


def test_inverse_normal_cdf_matches_scipy_ndtri():
    # Source: scipy.special.ndtri. Central region, both tails, the split points and
    # values a double can barely tell from 0 and 1.
    rng = np.random.default_rng(11)
    u = np.concatenate([rng.uniform(0.0, 1.0, 200_000), np.logspace(-300, -1, 2000),
                        1.0 - np.logspace(-16, -1, 500), [0.02425, 0.97575, 0.5]])
    u = u[(u > 0.0) & (u < 1.0)]
    got = distributions.normal_quantile(u, 0.0, 1.0, -np.inf, np.inf)
    ref = special.ndtri(u)
    nonzero = ref != 0.0
    rel = np.abs(got[nonzero] / ref[nonzero] - 1.0)
    print(f"Acklam vs ndtri: max relative error {rel.max():.3e}")
    assert rel.max() < 1.2e-9
    assert got[u == 0.5][0] == 0.0


def test_scaled_and_clipped_to_the_support():
    # Hand values: Phi(1) maps to mean + sd; the clip holds at the interval ends.
    got = distributions.normal_quantile(
        np.array([special.ndtr(1.0), 1e-12, 1.0 - 1e-12]), 2.0, 0.5, 1.5, 3.0)
    assert got[0] == pytest.approx(2.5, rel=2e-9)
    assert got[1] == 1.5 and got[2] == 3.0


def test_truncated_normal_draws_follow_scipy_truncnorm():
    # Source: scipy.stats.truncnorm; Kolmogorov-Smirnov on 20 000 draws (a sampler
    # with a wrong shape or wrong truncation gives p << 1e-3 at this size).
    params = {"mean": 0.30, "sd": 0.05, "low": 0.22, "high": 0.33}
    x = distributions.sample("truncated_normal", params, np.random.default_rng(5), 20_000)
    a = (params["low"] - params["mean"]) / params["sd"]
    b = (params["high"] - params["mean"]) / params["sd"]
    ks = stats.kstest(x, stats.truncnorm(a, b, loc=params["mean"], scale=params["sd"]).cdf)
    assert ks.pvalue > 1e-3
    assert x.min() >= params["low"] and x.max() <= params["high"]
    wrong = stats.kstest(x, stats.norm(params["mean"], params["sd"]).cdf)
    assert wrong.pvalue < 1e-6  # the check can tell truncation apart


def test_skipping_a_truncated_normal_stream_equals_drawing_it():
    params = {"mean": 0.0, "sd": 1.0, "low": -1.0, "high": 2.0}
    r1, r2 = np.random.default_rng(9), np.random.default_rng(9)
    distributions.sample("truncated_normal", params, r1, 1000)
    assert distributions.skip("truncated_normal", params, r2, 1000)
    np.testing.assert_array_equal(distributions.sample("truncated_normal", params, r1, 50),
                                  distributions.sample("truncated_normal", params, r2, 50))


@pytest.mark.parametrize("kind, params, reference", [
    ("normal", {"mean": 35.0, "sd": 1.5}, stats.norm(35.0, 1.5)),
    ("lognormal", {"median": 0.22, "sd_log": 0.25}, stats.lognorm(0.25, scale=0.22)),
])
def test_normal_and_lognormal_draws_follow_scipy(kind, params, reference):
    # Source: scipy.stats.norm / lognorm; Kolmogorov-Smirnov on 50 000 draws.
    x = distributions.sample(kind, params, np.random.default_rng(21), 50_000)
    assert np.all(np.isfinite(x))
    ks = stats.kstest(x, reference.cdf)
    assert ks.pvalue > 1e-3
    assert ks.statistic < 0.01  # sup |F_n - F| of a correct sampler at n = 5e4 is ~0.004


def test_open_uniforms_never_reach_the_ends():
    # The extreme generator outputs 0 and 2^64 - 1 map strictly inside (0, 1), so
    # no draw maps to an infinite quantile (hand values: 2^-53 and 1 - 2^-53).
    class Raw:
        def random_raw(self, size):
            return np.array([0, 2**64 - 1], dtype=np.uint64)[:size]

    class Edges:
        bit_generator = Raw()

    u = distributions._open_uniform(Edges(), 2)
    assert u[0] == 2.0**-53 and u[1] == 1.0 - 2.0**-53
    x = distributions.normal_quantile(u, 0.0, 1.0)
    assert np.all(np.isfinite(x)) and x[0] == pytest.approx(-x[1], rel=1e-6)
