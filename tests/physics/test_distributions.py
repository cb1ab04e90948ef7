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
    got = distributions.truncated_normal_from_uniform(u, 0.0, 1.0, -np.inf, np.inf)
    ref = special.ndtri(u)
    nonzero = ref != 0.0
    rel = np.abs(got[nonzero] / ref[nonzero] - 1.0)
    print(f"Acklam vs ndtri: max relative error {rel.max():.3e}")
    assert rel.max() < 1.2e-9
    assert got[u == 0.5][0] == 0.0


def test_scaled_and_clipped_to_the_support():
    # Hand values: Phi(1) maps to mean + sd; the clip holds at the interval ends.
    got = distributions.truncated_normal_from_uniform(
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
