"""Tornado swings and first-order variance-based indices (porecast.physics.sensitivity).

Input paths and coefficients below are invented.
"""

import numpy as np
import pytest
from scipy import special

from porecast.physics import sensitivity

# ---------------------------------------------------------------------------
# First-order indices
# ---------------------------------------------------------------------------

A_ISHIGAMI, B_ISHIGAMI = 7.0, 0.1


def ishigami(x1, x2, x3, a=A_ISHIGAMI, b=B_ISHIGAMI):
    """Ishigami & Homma (1990) test function on X_i ~ U(-pi, pi)."""
    return np.sin(x1) + a * np.sin(x2) ** 2 + b * x3**4 * np.sin(x1)


def ishigami_partial_variances(a=A_ISHIGAMI, b=B_ISHIGAMI):
    """V1, V2, V3, V derived here for X_i ~ U(-pi, pi).

    E[sin^2] = 1/2, E[sin^4] = 3/8, E[x^4] = pi^4/5, E[x^8] = pi^8/9 on U(-pi, pi).
    E[Y | x1] = (1 + b pi^4/5) sin x1 + a/2       -> V1 = (1 + b pi^4/5)^2 / 2
    E[Y | x2] = a sin^2 x2                         -> V2 = a^2 (3/8 - 1/4) = a^2 / 8
    E[Y | x3] = a/2 (E sin x1 = 0)                 -> V3 = 0
    Var(sin x1 (1 + b x3^4)) = (1 + 2 b pi^4/5 + b^2 pi^8/9) / 2, plus V2.
    """
    v1 = 0.5 * (1 + b * np.pi**4 / 5) ** 2
    v2 = a**2 / 8
    v = a**2 / 8 + b * np.pi**4 / 5 + b**2 * np.pi**8 / 18 + 0.5
    return v1, v2, 0.0, v


def equal_bins(low, high, m):
    edges = np.linspace(low, high, m + 1)
    return edges[:-1], edges[1:]


def test_ishigami_variances_match_published_indices():
    # Published first-order indices for a = 7, b = 0.1: S1 = 0.3139, S2 = 0.4424, S3 = 0
    # (Ishigami & Homma 1990; values from memory). Checked against the derivation above.
    v1, v2, v3, v = ishigami_partial_variances()
    assert v1 / v == pytest.approx(0.3139, abs=5e-5)
    assert v2 / v == pytest.approx(0.4424, abs=5e-5)
    # and the total variance against a direct Monte Carlo estimate (sd from the 4th moment)
    rng = np.random.default_rng(0)
    y = ishigami(*rng.uniform(-np.pi, np.pi, (3, 400_000)))
    assert abs(y.var() - v) < 4 * np.sqrt((np.mean((y - y.mean()) ** 4) - y.var() ** 2) / y.size)


def test_ishigami_first_order_indices():
    n = 20_000
    rng = np.random.default_rng(42)
    x = rng.uniform(-np.pi, np.pi, (3, n))
    y = ishigami(*x)
    res = sensitivity.first_order_indices({"x1": x[0], "x2": x[1], "x3": x[2]}, y, seed=1)
    v1, v2, v3, v = ishigami_partial_variances()
    m = res["x1"].n_bins
    assert m == int(np.sqrt(n)) == 141
    # Expected value of the binned estimator: bin averages of E[Y | X_i] over equal-width
    # bins (uniform inputs): mean of sin on [l, u] = (cos l - cos u) / (u - l), mean of
    # sin^2 = 1/2 - (sin 2u - sin 2l) / (4 (u - l)). The gap to S_i is the binning bias.
    lo, hi = equal_bins(-np.pi, np.pi, m)
    w = hi - lo
    mean_sin = (np.cos(lo) - np.cos(hi)) / w
    mean_sin2 = 0.5 - (np.sin(2 * hi) - np.sin(2 * lo)) / (4 * w)
    binned = {
        "x1": (1 + B_ISHIGAMI * np.pi**4 / 5) ** 2 * np.mean(mean_sin**2) / v,
        "x2": A_ISHIGAMI**2 * np.var(mean_sin2) / v,
        "x3": 0.0,
    }
    exact = {"x1": v1 / v, "x2": v2 / v, "x3": v3 / v}
    for path in ("x1", "x2", "x3"):
        est = res[path]
        bias = abs(exact[path] - binned[path])
        assert bias < 1e-3  # the binning loses little with 141 bins
        assert abs(est.value - exact[path]) < 4 * est.standard_error + bias
        assert est.ci_low < est.value < est.ci_high
    assert res["x2"].value > res["x1"].value > res["x3"].value + 0.2


def test_linear_model_indices():
    # Y = sum c_i X_i, X_i ~ N(mu_i, sd_i) independent: S_i = c_i^2 sd_i^2 / sum_j c_j^2 sd_j^2
    c = np.array([1.5, -2.0, 0.5, 0.0])
    mu = np.array([10.0, -3.0, 0.0, 100.0])
    sd = np.array([1.0, 0.5, 2.0, 1.0])
    n = 20_000
    rng = np.random.default_rng(3)
    x = rng.normal(mu[:, None], sd[:, None], (4, n))
    y = c @ x
    res = sensitivity.first_order_indices({f"x{i}": x[i] for i in range(4)}, y, seed=2)
    m = res["x0"].n_bins
    # binned target: E[Z | Z in quantile bin] = M (phi(a) - phi(b)) for a standard normal
    edges = special.ndtri(np.linspace(0, 1, m + 1))
    pdf = np.exp(-0.5 * edges**2) / np.sqrt(2 * np.pi)
    bin_means = m * (pdf[:-1] - pdf[1:])
    share_binned = np.mean(bin_means**2)  # Var of the bin means of a standard normal
    total = np.sum(c**2 * sd**2)
    for i in range(4):
        exact = c[i] ** 2 * sd[i] ** 2 / total
        bias = exact * (1 - share_binned)
        est = res[f"x{i}"]
        assert abs(est.value - exact) < 4 * est.standard_error + bias
    assert 0 < 1 - share_binned < 0.01


def test_bias_correction_removes_noise_of_finite_bins():
    # Inputs unrelated to the output: S = 0. Uncorrected, the between-bin variance of
    # pure noise has expectation (M - 1) / n of Var(Y) (one-way ANOVA).
    n, n_inputs = 2000, 20
    rng = np.random.default_rng(17)
    y = rng.normal(size=n)
    x = rng.uniform(size=(n_inputs, n))
    res = sensitivity.first_order_indices({f"u{i}": x[i] for i in range(n_inputs)}, y)
    est = np.array([r.value for r in res.values()])
    se = np.mean([r.standard_error for r in res.values()])
    m = res["u0"].n_bins
    bound = 4 * se / np.sqrt(n_inputs)
    assert abs(est.mean()) < bound
    assert (m - 1) / n > 2 * bound  # an uncorrected estimator would fail the line above


def test_standard_error_matches_spread_over_repeated_samples():
    # 30 independent samples of n = 2000: the spread of the estimates is the true standard
    # error; its own relative sd is about 1 / sqrt(2 * 29) = 0.13.
    c = np.array([1.0, -2.0, 0.0])
    sd = np.array([1.0, 0.5, 1.0])
    estimates, errors = [], []
    for rep in range(30):
        rng = np.random.default_rng(1000 + rep)
        x = rng.normal(0.0, sd[:, None], (3, 2000))
        res = sensitivity.first_order_indices(
            {f"x{i}": x[i] for i in range(3)}, c @ x, n_subsamples=100, seed=rep
        )
        estimates.append([res[f"x{i}"].value for i in range(3)])
        errors.append([res[f"x{i}"].standard_error for i in range(3)])
    ratio = np.mean(errors, axis=0) / np.std(estimates, axis=0, ddof=1)
    assert np.all(ratio > 1 - 4 * 0.13) and np.all(ratio < 1 + 4 * 0.13)


@pytest.mark.parametrize(
    "inputs, output, kwargs, message",
    [
        ({"a": np.arange(150.0)}, np.arange(150.0), {}, "at least 200"),
        ({"a": np.ones(300)}, np.arange(300.0), {}, "constant"),
        ({"a": np.arange(300.0)}, np.ones(300), {}, "output is constant"),
        ({"a": np.arange(299.0)}, np.arange(300.0), {}, r"shape \(300,\)"),
        ({"a": np.arange(300.0)}, np.arange(300.0), {"n_bins": 31}, "n_bins"),
        ({"a": np.arange(300.0)}, np.arange(300.0), {"n_bins": 1}, "n_bins"),
        ({"a": np.r_[np.nan, np.arange(299.0)]}, np.arange(300.0), {}, "finite"),
        ({}, np.arange(300.0), {}, "at least one input"),
        ({"a": np.arange(300.0)}, np.arange(300.0), {"n_subsamples": 10}, "n_subsamples"),
        ({"a": np.arange(300.0)}, np.arange(300.0), {"seed": -3}, "seed"),
        ({"a": np.arange(300.0)}, np.ones((300, 2)), {}, r"shape \(n,\)"),
    ],
)
def test_first_order_indices_rejects(inputs, output, kwargs, message):
    with pytest.raises(ValueError, match=message):
        sensitivity.first_order_indices(inputs, output, **kwargs)


def test_first_order_indices_are_deterministic_given_the_seed():
    rng = np.random.default_rng(5)
    x = rng.normal(size=(2, 500))
    y = x[0] + 0.3 * x[1] ** 2
    a = sensitivity.first_order_indices({"p": x[0], "q": x[1]}, y, seed=7)
    b = sensitivity.first_order_indices({"p": x[0], "q": x[1]}, y, seed=7)
    c = sensitivity.first_order_indices({"p": x[0], "q": x[1]}, y, seed=8)
    assert a == b
    assert a["p"].value == c["p"].value and a["p"].standard_error != c["p"].standard_error


# ---------------------------------------------------------------------------
# Tornado
# ---------------------------------------------------------------------------

BETA = {"geology.sand_fraction": 4.0, "burial.gradient": -0.05, "rock.cement_onset": 0.02}
MEANS = {"geology.sand_fraction": 0.5, "burial.gradient": 30.0, "rock.cement_onset": 70.0}


def logistic_outcome(calls):
    def outcome(overrides):
        calls.append(dict(overrides))
        z = -1.0 + sum(BETA[p] * overrides.get(p, MEANS[p]) for p in BETA)
        return 1.0 / (1.0 + np.exp(-z))

    return outcome


def test_tornado_order_and_values_for_a_logistic_outcome():
    inputs = {
        "geology.sand_fraction": (0.4, 0.6),
        "burial.gradient": (20.0, 40.0),
        "rock.cement_onset": (60.0, 80.0),
    }
    calls, progress = [], []
    res = sensitivity.tornado(
        logistic_outcome(calls), inputs, progress=lambda *a: progress.append(a)
    )
    # by hand: base z = -1 + 2 - 1.5 + 1.4 = 0.9
    assert res.base == pytest.approx(1 / (1 + np.exp(-0.9)), rel=1e-14)
    dz = {p: BETA[p] * np.array(inputs[p]) - BETA[p] * MEANS[p] for p in BETA}
    expected = {p: 1 / (1 + np.exp(-(0.9 + dz[p]))) for p in BETA}
    # |swing| in z: gradient 1.0, sand 0.8, cement 0.4 -> the same order in probability
    assert [s.path for s in res.swings] == [
        "burial.gradient",
        "geology.sand_fraction",
        "rock.cement_onset",
    ]
    for s in res.swings:
        assert (s.outcome_low, s.outcome_high) == pytest.approx(tuple(expected[s.path]), rel=1e-14)
        assert (s.low_value, s.high_value) == inputs[s.path] and s.base == res.base
    assert res.swings[0].outcome_low > res.swings[0].outcome_high  # negative coefficient
    assert len(calls) == 2 * 3 + 1 and calls[0] == {}
    assert [p[:2] for p in progress] == [(i, 7) for i in range(1, 8)]
    assert progress[0][2] == "base" and progress[-1][2] == "rock.cement_onset high"


def test_tornado_applies_base_overrides_to_every_call():
    calls = []
    sensitivity.tornado(
        logistic_outcome(calls), {"burial.gradient": (20.0, 40.0)}, {"rock.cement_onset": 90.0}
    )
    assert calls == [
        {"rock.cement_onset": 90.0},
        {"rock.cement_onset": 90.0, "burial.gradient": 20.0},
        {"rock.cement_onset": 90.0, "burial.gradient": 40.0},
    ]


def test_tornado_refuses_non_finite_outcome():
    with pytest.raises(ValueError, match="outcome \\(a high\\)"):
        sensitivity.tornado(lambda o: np.nan if o.get("a") == 2.0 else 0.5, {"a": (1.0, 2.0)})
    with pytest.raises(ValueError, match="must return a number"):
        sensitivity.tornado(lambda o: "high", {"a": (1.0, 2.0)})
    with pytest.raises(ValueError, match="one finite number"):
        sensitivity.tornado(lambda o: np.array([0.1, 0.2]), {"a": (1.0, 2.0)})
    with pytest.raises(ValueError, match="low_value, high_value"):
        sensitivity.tornado(lambda o: 0.5, {"a": (1.0, 2.0, 3.0)})


# standard normal 90th percentile, z = 1.2815515655446004 (normal tables; from memory)
Z90 = 1.2815515655446004

DISTS = {
    "geology.sand_fraction": ("normal", {"mean": 0.5, "sd": 0.1}),
    "burial.gradient": ("uniform", {"low": 25.0, "high": 35.0}),
    "rock.cement_onset": ("triangular", {"low": 60.0, "mode": 70.0, "high": 90.0}),
}


def test_swing_values_are_the_10th_and_90th_percentiles():
    assert sensitivity.swing_values(*DISTS["geology.sand_fraction"]) == pytest.approx(
        (0.5 - Z90 * 0.1, 0.5 + Z90 * 0.1), rel=1e-12
    )
    assert sensitivity.swing_values(*DISTS["burial.gradient"]) == pytest.approx((26.0, 34.0))
    # triangular inverse CDF: a + sqrt(q (b - a)(c - a)) below the mode, b - sqrt((1-q)(b-a)(b-c))
    lo = 60.0 + np.sqrt(0.1 * 30.0 * 10.0)
    hi = 90.0 - np.sqrt(0.1 * 30.0 * 20.0)
    assert sensitivity.swing_values(*DISTS["rock.cement_onset"]) == pytest.approx((lo, hi))
    with pytest.raises(ValueError, match="low_q must be below high_q"):
        sensitivity.swing_values("uniform", {"low": 0.0, "high": 1.0}, 0.9, 0.1)


def probit_outcome(calls):
    """P(Y > 5) for Y = sum b_i X_i with unfixed inputs random (normal approximation exact
    for the normal input; uniform and triangular enter by their mean and variance)."""
    b = {"geology.sand_fraction": 10.0, "burial.gradient": -0.1, "rock.cement_onset": 0.05}
    var = {
        "geology.sand_fraction": 0.1**2,
        "burial.gradient": 10.0**2 / 12,  # uniform width^2 / 12
        "rock.cement_onset": (60**2 + 70**2 + 90**2 - 60 * 70 - 60 * 90 - 70 * 90) / 18,
    }
    mean = {"geology.sand_fraction": 0.5, "burial.gradient": 30.0, "rock.cement_onset": 220 / 3}

    def outcome(overrides):
        calls.append(dict(overrides))
        mu = sum(b[p] * overrides.get(p, mean[p]) for p in b)
        s2 = sum(b[p] ** 2 * var[p] for p in b if p not in overrides)
        return float(special.ndtr((mu - 5.0) / np.sqrt(s2))) if s2 else float(mu > 5.0)

    return outcome


def test_tornado_from_distributions_uncertain_and_fixed_base():
    calls = []
    res = sensitivity.tornado_from_distributions(probit_outcome(calls), DISTS)
    assert calls[0] == {} and len(calls) == 7
    sand = next(s for s in res.swings if s.path == "geology.sand_fraction")
    # sand fixed at mean -/+ z sd: mu = 10 (0.5 -/+ Z90 0.1) - 3 + 0.05 * 220/3
    s2 = 0.01 * 100 / 12 + 0.0025 * (60**2 + 70**2 + 90**2 - 4200 - 5400 - 6300) / 18
    for value, got in ((0.5 - Z90 * 0.1, sand.outcome_low), (0.5 + Z90 * 0.1, sand.outcome_high)):
        mu = 10.0 * value - 3.0 + 0.05 * 220 / 3
        assert got == pytest.approx(special.ndtr((mu - 5.0) / np.sqrt(s2)), rel=1e-12)
    assert 0.05 < sand.outcome_low < 0.2 and sand.outcome_high > 0.99  # not saturated both ends
    assert res.swings[0].path == "geology.sand_fraction"  # largest coefficient x spread
    calls.clear()
    fixed = sensitivity.tornado_from_distributions(probit_outcome(calls), DISTS, fix_others="mean")
    assert calls[0] == {
        "geology.sand_fraction": 0.5,
        "burial.gradient": 30.0,
        "rock.cement_onset": pytest.approx(220 / 3),
    }
    assert all(len(c) == 3 for c in calls)
    # deterministic base: mu = 5 - 3 + 3.667 = 5.667 > 5
    assert fixed.base == 1.0
    calls.clear()
    sensitivity.tornado_from_distributions(probit_outcome(calls), DISTS, fix_others="median")
    # triangular median above the mode: b - sqrt(0.5 (b - a)(b - c))
    assert calls[0]["rock.cement_onset"] == pytest.approx(90.0 - np.sqrt(0.5 * 30.0 * 20.0))
    assert calls[0]["burial.gradient"] == pytest.approx(30.0)
    with pytest.raises(ValueError, match="fix_others"):
        sensitivity.tornado_from_distributions(probit_outcome([]), DISTS, fix_others="mode")
