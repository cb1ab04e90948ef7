"""Facies classification: Bayes posteriors, non-stationary Gaussians, KDE, fit tests.

Reference sources named beside each check:
* scikit-learn ``QuadraticDiscriminantAnalysis`` (posteriors, means, covariances, priors);
* ``scipy.stats.multivariate_normal.logpdf`` (Gaussian log-likelihoods);
* ``scipy.spatial.distance.mahalanobis`` (Mahalanobis distances);
* ``scipy.stats.gaussian_kde`` (kernel density estimates, Scott and Silverman rules);
* ``scipy.stats.skew`` / ``scipy.stats.kurtosis`` (Mardia's statistics reduce to them in 1-D);
* hand-worked Bayes' rule with ``math.exp`` for the prior-map examples;
* Bayes-optimal accuracy computed from the true generating parameters with an
  explicit closed-form bivariate normal density written out in this file.
"""

from __future__ import annotations

import importlib.util
import math
import subprocess
import sys

import numpy as np
import pytest
from scipy import stats
from scipy.spatial.distance import mahalanobis as scipy_mahalanobis

from porecast.physics import classify as C
from porecast.physics.classify import (
    GaussianFacies,
    NonstationaryGaussianFacies,
    classify,
    log_likelihood,
    mahalanobis,
    posterior,
    posterior_nonstationary,
)
from porecast.physics.density import (
    GaussianKernelDensity,
    gaussian_fit_tests,
    mardia_skewness_kurtosis,
)

HAVE_NUMBA = importlib.util.find_spec("numba") is not None
needs_numba = pytest.mark.skipif(not HAVE_NUMBA, reason="numba is not installed")
ENGINES = ["numpy", pytest.param("numba", marks=needs_numba)]


def random_spd(rng: np.random.Generator, k: int, d: int, scale: float = 1.0) -> np.ndarray:
    """k random symmetric positive definite d x d matrices."""
    a = rng.normal(size=(k, d, d))
    return scale * (a @ a.transpose(0, 2, 1) + 0.5 * np.eye(d))


def labelled_sample(rng: np.random.Generator, k: int, d: int, sizes: list[int]):
    means = rng.normal(scale=2.0, size=(k, d))
    covs = random_spd(rng, k, d)
    x = np.concatenate(
        [rng.multivariate_normal(means[j], covs[j], size=sizes[j]) for j in range(k)]
    )
    y = np.repeat(np.arange(k), sizes)
    return x, y


# ------------------------------------------------------------------ external references


@pytest.mark.parametrize("engine", ENGINES)
@pytest.mark.parametrize("d", [2, 3])
def test_posterior_equals_sklearn_qda(rng, engine, d):
    # Source: scikit-learn QuadraticDiscriminantAnalysis(store_covariance=True), fitted
    # on the same samples. scikit-learn 1.9 (installed) normalises the class
    # covariances by n (older releases used n - 1) and takes priors from the class
    # frequencies: fit the same way.
    from sklearn.discriminant_analysis import QuadraticDiscriminantAnalysis

    x, y = labelled_sample(rng, 3, d, [400, 250, 600])
    qda = QuadraticDiscriminantAnalysis(store_covariance=True).fit(x, y)
    ours = GaussianFacies(priors="frequencies", covariance_ddof=0, engine=engine).fit(x, y)
    test_x = rng.normal(scale=3.0, size=(2000, d))
    np.testing.assert_allclose(ours.means_, qda.means_, rtol=0, atol=1e-12)
    np.testing.assert_allclose(ours.covariances_, np.array(qda.covariance_), rtol=1e-10)
    np.testing.assert_allclose(ours.priors_, qda.priors_, rtol=1e-14)
    np.testing.assert_allclose(ours.predict_proba(test_x), qda.predict_proba(test_x), atol=1e-8)
    np.testing.assert_array_equal(ours.predict(test_x), qda.predict(test_x))
    # The functional API with sklearn's own fitted parameters gives the same posteriors.
    p = posterior(test_x, qda.means_, np.array(qda.covariance_), qda.priors_, engine=engine)
    np.testing.assert_allclose(p, qda.predict_proba(test_x), atol=1e-8)
    # Default: the unbiased covariance, numpy.cov's.
    unbiased = GaussianFacies(engine=engine).fit(x, y)
    for j in range(3):
        np.testing.assert_allclose(
            unbiased.covariances_[j], np.cov(x[y == j], rowvar=False), rtol=1e-12
        )


@pytest.mark.parametrize("engine", ENGINES)
@pytest.mark.parametrize("d", [1, 2, 4, 6])
def test_log_likelihood_equals_scipy_multivariate_normal(rng, engine, d):
    # Source: scipy.stats.multivariate_normal.logpdf.
    k = 3
    means = rng.normal(size=(k, d))
    covs = random_spd(rng, k, d, scale=0.7)
    x = rng.normal(scale=2.0, size=(500, d))
    expected = np.stack(
        [stats.multivariate_normal(means[j], covs[j]).logpdf(x).reshape(-1) for j in range(k)],
        axis=1,
    )
    np.testing.assert_allclose(
        log_likelihood(x, means, covs, engine=engine), expected, rtol=1e-11, atol=1e-11
    )


@pytest.mark.parametrize("engine", ENGINES)
def test_mahalanobis_equals_scipy_distance(rng, engine):
    # Source: scipy.spatial.distance.mahalanobis(u, v, VI) with VI the inverse covariance.
    k, d = 4, 3
    means = rng.normal(size=(k, d))
    covs = random_spd(rng, k, d)
    x = rng.normal(scale=2.0, size=(50, d))
    got = mahalanobis(x, means, covs, engine=engine)
    for i in range(0, 50, 7):
        for j in range(k):
            ref = scipy_mahalanobis(x[i], means[j], np.linalg.inv(covs[j]))
            assert got[i, j] == pytest.approx(ref, rel=1e-11)
    model = GaussianFacies(engine=engine).fit(
        {f"f{j}": rng.multivariate_normal(means[j], covs[j], size=300) for j in range(k)}
    )
    got = model.mahalanobis(x)
    for j in range(k):
        ref = scipy_mahalanobis(x[3], model.means_[j], np.linalg.inv(model.covariances_[j]))
        assert got[3, j] == pytest.approx(ref, rel=1e-11)


@pytest.mark.parametrize("engine", ENGINES)
def test_far_points_give_finite_posteriors(engine):
    # 1e3 standard deviations from both facies: densities underflow to 0 in linear
    # space; the log-space posterior must equal the logistic of the log-likelihood
    # difference from scipy.stats.multivariate_normal.logpdf (finite in log space).
    means = np.array([[0.0, 0.0], [3.0, 1.0]])
    covs = np.array([np.eye(2), [[2.0, 0.3], [0.3, 0.5]]])
    x = np.array([[1e3, 0.0], [0.0, -1e3], [-7e2, 7e2], [1e3, 1e3]])
    p = posterior(x, means, covs, engine=engine)
    assert np.all(np.isfinite(p))
    np.testing.assert_allclose(p.sum(axis=1), 1.0, rtol=0, atol=1e-14)
    l0 = stats.multivariate_normal(means[0], covs[0]).logpdf(x)
    l1 = stats.multivariate_normal(means[1], covs[1]).logpdf(x)
    with np.errstate(over="ignore"):
        expected = 1.0 / (1.0 + np.exp(l0 - l1))
    np.testing.assert_allclose(p[:, 1], expected, rtol=1e-12, atol=1e-300)
    lp = GaussianFacies(engine=engine).fit(
        {"a": np.array([[0, 0], [1, 0], [0, 1.0]]), "b": np.array([[3, 1], [4, 1], [3, 2.5]])}
    )
    assert np.all(np.isfinite(lp.log_posterior(x)))
    result = lp.classify(x, max_mahalanobis=50.0)
    assert np.all(result.unclassified)
    assert np.all(result.most_likely == -1)
    assert np.all(np.isfinite(result.mahalanobis)) and np.all(result.mahalanobis > 50.0)


def test_prior_map_changes_posterior_as_bayes_says():
    # Hand example, 1-D: facies A ~ N(0, 1), B ~ N(2, 1). At x = 1 the likelihoods are
    # equal, so the posterior is the prior; at x = 0, P(A) = pA phi(0) / (pA phi(0) +
    # pB phi(2)) with phi the standard normal density (math.exp by hand).
    means = np.array([[0.0], [2.0]])
    covs = np.ones((2, 1, 1))
    x = np.array([[1.0], [1.0], [0.0], [0.0]])
    priors = np.array([[0.5, 0.5], [0.2, 0.8], [0.5, 0.5], [0.2, 0.8]])
    p = posterior(x, means, covs, priors)
    assert p[0, 0] == pytest.approx(0.5, abs=1e-15)
    assert p[1, 0] == pytest.approx(0.2, abs=1e-15)
    for row, pa in ((2, 0.5), (3, 0.2)):
        a = pa * math.exp(0.0)
        b = (1.0 - pa) * math.exp(-0.5 * 2.0**2)
        assert p[row, 0] == pytest.approx(a / (a + b), rel=1e-14)
    # A zero prior rules a facies out wherever it is zero.
    p0 = posterior(np.array([[2.0], [2.0]]), means, covs, np.array([[0.0, 1.0], [1.0, 0.0]]))
    np.testing.assert_array_equal(p0, [[0.0, 1.0], [1.0, 0.0]])


@pytest.mark.parametrize("engine", ENGINES)
def test_entropy_uniform_and_certain(engine):
    # Shannon (1948): identical facies densities -> uniform posterior -> entropy log k.
    k = 5
    means = np.zeros((k, 2))
    covs = np.stack([np.eye(2)] * k)
    x = np.array([[0.3, -0.2], [4.0, 1.0]])
    r = classify(x, means, covs, engine=engine)
    np.testing.assert_allclose(r.entropy, np.log(k), rtol=1e-14)
    rn = classify(x, means, covs, normalised_entropy=True, engine=engine)
    np.testing.assert_allclose(rn.entropy, 1.0, rtol=1e-14)
    # A point deep inside one of two well separated facies: entropy ~ 0.
    far = classify(
        np.array([[0.0, 0.0]]),
        np.array([[0.0, 0.0], [40.0, 0.0]]),
        np.stack([np.eye(2)] * 2),
        engine=engine,
    )
    assert 0.0 <= far.entropy[0] < 1e-12
    # Entropy from its definition -sum p log p on ordinary points.
    rng = np.random.default_rng(3)
    means = rng.normal(size=(3, 2))
    covs = random_spd(rng, 3, 2)
    pts = rng.normal(size=(200, 2))
    res = classify(pts, means, covs, engine=engine)
    ref = -np.sum(res.posterior * np.log(res.posterior), axis=1)
    np.testing.assert_allclose(res.entropy, ref, rtol=1e-11, atol=1e-14)


# ------------------------------------------------------------------ methods agree


@pytest.mark.parametrize("engine", ENGINES)
def test_methods_agree(rng, engine):
    x, y = labelled_sample(rng, 4, 2, [200, 300, 250, 150])
    names = np.array(["shale", "brine sand", "oil sand", "gas sand"])
    model = GaussianFacies(engine=engine).fit(x, names[y])
    pts = rng.normal(scale=2.5, size=(3000, 2))
    proba = model.predict_proba(pts)
    np.testing.assert_allclose(proba.sum(axis=1), 1.0, atol=1e-14)
    np.testing.assert_array_equal(model.predict(pts), model.classes_[np.argmax(proba, axis=1)])
    np.testing.assert_allclose(np.exp(model.log_posterior(pts)), proba, rtol=1e-12, atol=1e-300)
    res = model.classify(pts)
    np.testing.assert_array_equal(res.most_likely, np.argmax(proba, axis=1))
    np.testing.assert_allclose(res.posterior, proba, rtol=0, atol=0)
    dist = model.mahalanobis(pts)
    np.testing.assert_allclose(
        res.mahalanobis, dist[np.arange(len(pts)), res.most_likely], rtol=1e-13
    )
    assert res.n_clamped == 0 and not res.unclassified.any()
    # Functional API with the fitted parameters: same numbers.
    np.testing.assert_allclose(
        posterior(pts, model.means_, model.covariances_, model.priors_, engine=engine),
        proba,
        rtol=0,
        atol=1e-15,
    )


@needs_numba
def test_engines_agree_stationary(rng):
    # The compiled kernel (own vectorised exp/log) against the numpy reference path.
    for d, k in ((1, 2), (2, 6), (3, 1), (5, 7)):
        means = rng.normal(size=(k, d))
        covs = random_spd(rng, k, d)
        x = rng.normal(scale=4.0, size=(1500, d))
        x[::97] *= 300.0  # far points: large negative log-likelihoods
        x[5] = np.nan
        x[700, 0] = np.nan
        priors = rng.dirichlet(np.ones(k), size=1500)
        a = classify(x, means, covs, priors, engine="numba", max_mahalanobis=4.0)
        b = classify(x, means, covs, priors, engine="numpy", max_mahalanobis=4.0)
        np.testing.assert_allclose(a.posterior, b.posterior, rtol=1e-12, atol=1e-14)
        np.testing.assert_array_equal(a.most_likely, b.most_likely)
        np.testing.assert_allclose(a.mahalanobis, b.mahalanobis, rtol=1e-12)
        np.testing.assert_allclose(a.entropy, b.entropy, rtol=1e-10, atol=1e-13)
        np.testing.assert_array_equal(a.unclassified, b.unclassified)
        good = np.isfinite(x).all(axis=1)
        la = C._evaluate(
            C._prepare_gaussians(means, covs),
            x[good],
            None,
            C._log_priors(priors[good], good.sum(), k),
            C._LOG_POSTERIOR,
            engine="numba",
        ).values
        lb = C._evaluate(
            C._prepare_gaussians(means, covs),
            x[good],
            None,
            C._log_priors(priors[good], good.sum(), k),
            C._LOG_POSTERIOR,
            engine="numpy",
        ).values
        np.testing.assert_allclose(la, lb, rtol=1e-12, atol=1e-10)


@needs_numba
def test_engines_agree_gridded(rng):
    for d, k, shape in ((2, 6, (11,)), (3, 3, (4, 3)), (1, 2, (3, 2, 2))):
        axes = [
            np.sort(rng.uniform(0.0, 10.0, size=m)) if m > 1 else np.array([5.0]) for m in shape
        ]
        for a in axes:
            a += np.arange(a.size) * 1e-3  # strictly increasing
        means = rng.normal(size=(*shape, k, d))
        covs = random_spd(rng, int(np.prod(shape)) * k, d).reshape(*shape, k, d, d)
        model = C._prepare_gridded(axes, means, covs)
        n = 2000
        x = rng.normal(scale=2.0, size=(n, d))
        cov = rng.uniform(-2.0, 12.0, size=(n, len(shape)))  # some outside: clamped
        cov[4, 0] = np.nan
        x[9] = np.nan
        lp = C._log_priors(None, n, k)
        a = C._evaluate(model, x, cov, lp, C._POSTERIOR, extras=True, engine="numba")
        b = C._evaluate(model, x, cov, lp, C._POSTERIOR, extras=True, engine="numpy")
        np.testing.assert_allclose(a.values, b.values, rtol=1e-11, atol=1e-13)
        np.testing.assert_array_equal(a.most_likely, b.most_likely)
        np.testing.assert_allclose(a.q_win, b.q_win, rtol=1e-10)
        np.testing.assert_allclose(a.entropy, b.entropy, rtol=1e-9, atol=1e-12)
        np.testing.assert_array_equal(a.counts, b.counts)
        assert a.counts[C._COUNT_CLAMPED] > 0


@needs_numba
@pytest.mark.parametrize("d", [2, 3])
def test_lost_definiteness_is_flagged_by_both_engines(rng, d):
    # Node covariances are validated, so a non-positive-definite interpolated matrix
    # can only come from rounding; force one by editing the packed parameters and
    # check both engines flag the same rows instead of returning numbers.
    k = 2
    means = rng.normal(size=(2, k, d))
    covs = np.broadcast_to(np.eye(d), (2, k, d, d)).copy()
    model = C._prepare_gridded([np.array([0.0, 1.0])], means, covs)
    n_par = d + d * (d + 1) // 2
    model.params[1, n_par + d] = -1.0  # facies 1, node 1: first variance negative
    x = rng.normal(size=(40, d))
    cov = np.linspace(0.0, 1.0, 40)[:, None]
    lp = C._log_priors(None, 40, k)
    a = C._evaluate(model, x, cov, lp, C._POSTERIOR, extras=True, engine="numba")
    b = C._evaluate(model, x, cov, lp, C._POSTERIOR, extras=True, engine="numpy")
    assert a.counts[C._COUNT_NOT_PD] == b.counts[C._COUNT_NOT_PD] > 0
    np.testing.assert_array_equal(a.most_likely == -1, b.most_likely == -1)
    with pytest.raises(ValueError, match="not numerically positive definite"):
        C._raise_for_nonfinite(a.counts, allow_nan=True, cov_name="covariate")


@needs_numba
@pytest.mark.parametrize("k", [1, 6, 8, 9])
@pytest.mark.parametrize("even", [True, False])
def test_one_covariate_fast_path_matches_numpy_engine(rng, k, even):
    # The compiled kernel's fused path (one covariate, two attributes, up to 8 facies;
    # evenly spaced nodes found by arithmetic; the posterior without a log determinant)
    # against the numpy engine, which the tests above check against scipy and sklearn.
    # k = 9 takes the general path. Attribute scales from 1e-75 to 1e75 put the
    # determinants near both ends of the float range (1e-300 to 1e300).
    nodes = np.linspace(1000.0, 3000.0, 9) if even else np.array([900.0, 1000.0, 1750.0, 3100.0])
    m = nodes.size
    for scale in (1e-75, 1.0, 1e75):
        means = scale * rng.normal(size=(m, k, 2))
        covs = random_spd(rng, m * k, 2, scale=scale**2).reshape(m, k, 2, 2)
        x = scale * rng.normal(scale=2.0, size=(3000, 2))
        x[:5] *= 400.0  # far from every facies
        c = np.concatenate([rng.uniform(500.0, 3500.0, 2000 - nodes.size), nodes,
                            np.repeat(nodes[[0, -1]], 500)])
        priors = rng.dirichlet(np.ones(k), size=3000)
        got = {}
        for name, p in (("uniform", None), ("map", priors)):
            a = posterior_nonstationary(x, c, nodes, means, covs, p, engine="numba")
            b = posterior_nonstationary(x, c, nodes, means, covs, p, engine="numpy")
            np.testing.assert_allclose(a, b, rtol=1e-10, atol=1e-14)
            np.testing.assert_allclose(a.sum(axis=1), 1.0, rtol=0, atol=1e-14)
            got[name] = a
        ra = classify(x, means, covs, covariate=c, nodes=nodes, engine="numba")
        rb = classify(x, means, covs, covariate=c, nodes=nodes, engine="numpy")
        # points on the end nodes are inside the range: only those beyond are clamped
        assert ra.n_clamped == rb.n_clamped == np.sum((c < nodes[0]) | (c > nodes[-1]))
        np.testing.assert_array_equal(ra.most_likely, rb.most_likely)
        np.testing.assert_allclose(ra.posterior, got["uniform"], rtol=1e-10, atol=1e-14)
    # on a node: that node's Gaussians (scipy.stats.multivariate_normal densities)
    means = rng.normal(size=(m, k, 2))
    covs = random_spd(rng, m * k, 2).reshape(m, k, 2, 2)
    x = rng.normal(size=(50, 2))
    got = posterior_nonstationary(x, np.full(50, nodes[1]), nodes, means, covs, engine="numba")
    dens = np.stack([stats.multivariate_normal(means[1, j], covs[1, j]).pdf(x)
                     for j in range(k)], axis=1)
    np.testing.assert_allclose(got, dens / dens.sum(axis=1, keepdims=True), rtol=1e-11)


@needs_numba
def test_lost_definiteness_is_flagged_by_the_posterior_alone(rng):
    # As above, on the one-covariate path of the posterior without extras (no log
    # determinant there): the rows are flagged, not given numbers.
    k = 2
    means = rng.normal(size=(2, k, 2))
    covs = np.broadcast_to(np.eye(2), (2, k, 2, 2)).copy()
    model = C._prepare_gridded([np.array([0.0, 1.0])], means, covs)
    model.params[1, 5 + 2] = -1.0  # facies 1, node 1: first variance negative
    x = rng.normal(size=(40, 2))
    cov = np.linspace(0.0, 1.0, 40)[:, None]
    lp = C._log_priors(None, 40, k)
    a = C._evaluate(model, x, cov, lp, C._POSTERIOR, extras=False, engine="numba")
    b = C._evaluate(model, x, cov, lp, C._POSTERIOR, extras=False, engine="numpy")
    assert a.counts[C._COUNT_NOT_PD] == b.counts[C._COUNT_NOT_PD] > 0
    np.testing.assert_array_equal(np.isnan(a.values), np.isnan(b.values))
    good = ~np.isnan(b.values)
    np.testing.assert_allclose(a.values[good], b.values[good], rtol=1e-12, atol=1e-15)


@needs_numba
def test_own_exp_and_log_match_numpy():
    # The kernels' vectorisable exp (t <= 0) and log (t > 0) against numpy's libm.
    C._numba_kernels()
    rng = np.random.default_rng(11)
    t = np.concatenate(
        [
            -rng.uniform(0, 1, 256),
            -rng.uniform(0, 700, 256),
            [0.0, -1e-300, -707.9, -708.0, -708.1, -np.inf] + [-1.0] * 250,
        ]
    )
    for s in range(0, t.size, 256):
        out = np.empty(256)
        C._exp_block(t[s : s + 256], out, 256)
        ref = np.exp(t[s : s + 256])
        ref[t[s : s + 256] < -708.0] = 0.0
        np.testing.assert_allclose(out, ref, rtol=4e-16, atol=0)
    assert C._exp1(np.nan) == 0.0  # documented: NaN -> 0 (no-data rows are overwritten)
    y = np.concatenate(
        [
            rng.uniform(0.5, 2.0, 256),
            10.0 ** rng.uniform(-300, 300, 256),
            [1.0, 5e-324, 1e-310, np.inf, 0.0] + [2.0] * 251,
        ]
    )
    for s in range(0, y.size, 256):
        out = np.empty(256)
        C._log_block(y[s : s + 256], out, 256)
        with np.errstate(divide="ignore"):
            ref = np.log(y[s : s + 256])
        np.testing.assert_allclose(out, ref, rtol=4e-16, atol=4e-16)


@needs_numba
def test_own_exp_error_bound():
    # The documented bound of the minimax exp: relative error below 2e-16 (0.9 ulp of
    # 1; measured maximum 1.64e-16). Reference: numpy's exp in extended precision where
    # the platform has it (x86 long double, 64-bit mantissa); otherwise numpy's double
    # exp, which is itself within 1 ulp, so the bound is widened by one ulp.
    C._numba_kernels()
    rng = np.random.default_rng(12)
    half_ln2 = math.log(2.0) / 2.0
    # Arguments spread over the whole range and piled up at the ends of the reduced
    # interval (t = n ln 2 +- ln(2)/2), where the polynomial error peaks.
    n_ln2 = -math.log(2.0) * rng.integers(0, 1021, 200_000)
    t = np.concatenate(
        [
            -rng.uniform(0.0, 708.0, 400_000),
            -rng.uniform(0.0, 1.0, 200_000),
            np.minimum(n_ln2 + rng.uniform(-1e-9, 1e-9, 200_000) + half_ln2, 0.0),
            np.maximum(n_ln2 + rng.uniform(-1e-9, 1e-9, 200_000) - half_ln2, -708.0),
        ]
    )
    got = np.empty_like(t)
    C._exp_block(t, got, t.size)
    extended = np.finfo(np.longdouble).nmant >= 63
    ref = np.exp(t.astype(np.longdouble)) if extended else np.exp(t)
    rel = np.abs((got.astype(ref.dtype) - ref) / ref).astype(np.float64)
    bound = 2e-16 if extended else 2e-16 + np.finfo(np.float64).eps
    assert rel.max() < bound, rel.max()


@pytest.mark.parametrize("engine", ENGINES)
def test_nonstationary_identical_nodes_equal_stationary(rng, engine):
    k, d = 3, 2
    means = rng.normal(size=(k, d))
    covs = random_spd(rng, k, d)
    nodes = np.array([0.0, 500.0, 1200.0, 3000.0])
    x = rng.normal(scale=2.0, size=(1000, d))
    c = rng.uniform(-500.0, 3500.0, size=1000)
    p_ns = posterior_nonstationary(
        x, c, nodes, np.stack([means] * 4), np.stack([covs] * 4), engine=engine
    )
    np.testing.assert_allclose(
        p_ns, posterior(x, means, covs, engine=engine), rtol=1e-12, atol=1e-15
    )


@pytest.mark.parametrize("engine", ENGINES)
def test_nonstationary_interpolates_convexly_and_clamps(rng, engine):
    k, d = 2, 2
    nodes = np.array([1000.0, 2000.0, 4000.0])
    means = rng.normal(size=(3, k, d))
    covs = random_spd(rng, 3 * k, d).reshape(3, k, d, d)
    x = rng.normal(size=(6, d))
    # At 2500 m: one quarter of the way from the 2000 m node to the 4000 m node.
    c = np.full(6, 2500.0)
    got = posterior_nonstationary(x, c, nodes, means, covs, engine=engine)
    ref = posterior(x, 0.75 * means[1] + 0.25 * means[2], 0.75 * covs[1] + 0.25 * covs[2])
    np.testing.assert_allclose(got, ref, rtol=1e-12)
    # On a node: that node's Gaussians. Outside the range: the end node's, clamped.
    for value, node in ((2000.0, 1), (500.0, 0), (9000.0, 2)):
        got = posterior_nonstationary(x, np.full(6, value), nodes, means, covs, engine=engine)
        np.testing.assert_allclose(got, posterior(x, means[node], covs[node]), rtol=1e-12)
    r = classify(
        x,
        means,
        covs,
        covariate=np.array([500, 1000, 1500, 4000, 4001, 2e4]),
        nodes=nodes,
        engine=engine,
    )
    assert r.n_clamped == 3


def test_nonstationary_beats_stationary_and_matches_bayes(rng):
    # Core claim: facies attributes drift with the covariate (here maximum burial
    # depth, m); Gaussians fitted at covariate nodes and interpolated classify within
    # 1 percentage point of the Bayes-optimal rule (true parameters), and clearly
    # better than one stationary model trained at the shallow end of the range.
    # With n = 200 000 test locations the Monte Carlo standard error of an accuracy
    # is sqrt(p(1-p)/n) <= 0.0011 (0.11 pp), so 1 pp is about 9 standard errors.
    k = 3
    depth0, depth1 = 1000.0, 3000.0
    mean0 = np.array([[0.00, -0.10], [-0.05, -0.20], [-0.15, -0.30]])  # intercept, gradient
    mean1 = np.array([[0.10, -0.20], [0.05, 0.05], [-0.05, -0.50]])
    cov0 = np.array(
        [
            [[4e-3, -1e-3], [-1e-3, 6e-3]],
            [[3e-3, 1e-3], [1e-3, 5e-3]],
            [[5e-3, -2e-3], [-2e-3, 8e-3]],
        ]
    )
    cov1 = 0.6 * cov0

    def truth(depth):
        s = ((depth - depth0) / (depth1 - depth0))[..., None, None]
        return (1 - s) * mean0 + s * mean1, (1 - s)[..., None] * cov0 + s[..., None] * cov1

    n_train = 3000
    nodes = np.linspace(depth0, depth1, 5)
    node_means, node_covs = truth(nodes)
    train = np.empty((nodes.size, k, n_train, 2))
    for i in range(nodes.size):
        for j in range(k):
            train[i, j] = rng.multivariate_normal(node_means[i, j], node_covs[i, j], n_train)
    model = NonstationaryGaussianFacies().fit(
        train, {"max_burial_m": nodes}, classes=["shale", "brine sand", "gas sand"]
    )
    stationary = GaussianFacies().fit({j: train[0, j] for j in range(k)})

    n = 200_000
    depth = rng.uniform(depth0, depth1, n)
    facies = rng.integers(0, k, n)
    mu, cv = truth(depth)
    mu, cv = mu[np.arange(n), facies], cv[np.arange(n), facies]
    chol = np.linalg.cholesky(cv)
    x = mu + np.einsum("nab,nb->na", chol, rng.normal(size=(n, 2)))

    # Bayes-optimal: explicit bivariate normal log-density with the true parameters.
    mu_all, cv_all = truth(depth)
    dx = x[:, None, :] - mu_all
    a, b, c = cv_all[..., 0, 0], cv_all[..., 0, 1], cv_all[..., 1, 1]
    det = a * c - b * b
    quad = (c * dx[..., 0] ** 2 - 2 * b * dx[..., 0] * dx[..., 1] + a * dx[..., 1] ** 2) / det
    bayes = np.argmax(-0.5 * np.log(det) - 0.5 * quad, axis=1)

    acc_bayes = np.mean(bayes == facies)
    acc_ns = np.mean(model.predict(x, {"max_burial_m": depth}) == model.classes_[facies])
    acc_st = np.mean(stationary.predict(x) == facies)
    se = math.sqrt(acc_bayes * (1 - acc_bayes) / n)
    print(
        f"\naccuracy: Bayes-optimal {acc_bayes:.4f}, non-stationary {acc_ns:.4f}, "
        f"stationary (trained at {depth0:.0f} m) {acc_st:.4f}; MC standard error {se:.4f}"
    )
    assert abs(acc_ns - acc_bayes) < 0.01
    assert acc_ns - acc_st > 0.10
    assert model.n_clamped_ == 0


def test_nonstationary_multiple_covariates_and_sample_forms(rng):
    # Two covariates (uplift m x present depth m); means bilinear in them, so the
    # multilinear interpolation of exact node moments reproduces them in between.
    uplift = np.array([0.0, 500.0, 1000.0])
    depth = np.array([1500.0, 2500.0])
    k, d, n = 2, 2, 400

    def mean(u, z):
        return np.array([[1e-4 * z - 5e-4 * u, 0.0], [0.5 + 2e-4 * u, 1e-4 * z]])

    dense = np.empty((3, 2, k, n, d))
    for i, u in enumerate(uplift):
        for j, z in enumerate(depth):
            for f in range(k):
                dense[i, j, f] = mean(u, z)[f] + rng.normal(scale=0.1, size=(n, d))
    axes = {"uplift_m": uplift, "depth_m": depth}
    m_dense = NonstationaryGaussianFacies(engine="numpy").fit(dense, axes, classes=["a", "b"])
    ragged = np.empty((3, 2, k), dtype=object)
    for idx in np.ndindex(3, 2, k):
        ragged[idx] = dense[idx]
    m_ragged = NonstationaryGaussianFacies(engine="numpy").fit(ragged, axes, classes=["a", "b"])
    m_map = NonstationaryGaussianFacies(engine="auto").fit(
        {"a": dense[:, :, 0], "b": dense[:, :, 1]}, axes
    )
    for m in (m_ragged, m_map):
        np.testing.assert_allclose(m.means_, m_dense.means_, rtol=0, atol=0)
        np.testing.assert_allclose(m.covariances_, m_dense.covariances_, rtol=0, atol=0)
    assert m_dense.grid_shape_ == (3, 2) and m_dense.means_.shape == (3, 2, k, d)
    assert m_dense.goodness_of_fit_.ks_p_value.shape == (3, 2, k)
    pts = rng.normal(scale=0.5, size=(300, d))
    cov = {"uplift_m": rng.uniform(-100, 1100, 300), "depth_m": rng.uniform(1500, 2500, 300)}
    p1 = m_dense.predict_proba(pts, cov)
    p2 = m_map.predict_proba(pts, cov)
    np.testing.assert_allclose(p1, p2, rtol=1e-11, atol=1e-14)
    clamped = int(np.sum((cov["uplift_m"] < 0) | (cov["uplift_m"] > 1000)))
    assert m_dense.n_clamped_ == clamped and m_map.n_clamped_ == clamped
    r = m_map.classify(pts, cov)
    assert r.n_clamped == clamped
    np.testing.assert_array_equal(m_map.predict(pts, cov), m_map.classes_[r.most_likely])
    # The interpolated mean at a cell centre is the bilinear mean of the true moments.
    at = {"uplift_m": np.array([250.0]), "depth_m": np.array([2000.0])}
    dist = m_dense.mahalanobis(mean(250.0, 2000.0)[:1], at)
    assert dist[0, 0] < 0.2  # 400 samples of sd 0.1: mean error ~0.005, i.e. < 0.1 sd
    with pytest.raises(ValueError, match=r"missing \['depth_m'\]"):
        m_dense.predict_proba(pts, {"uplift_m": cov["uplift_m"]})


# ------------------------------------------------------------------ no data and streaming


@pytest.mark.parametrize("engine", ENGINES)
def test_nan_rows_carried_through_classify(rng, engine):
    means = np.array([[0.0, 0.0], [2.0, 1.0]])
    covs = np.stack([np.eye(2)] * 2)
    x = rng.normal(size=(10, 2))
    x[2] = np.nan
    x[6, 1] = np.nan
    r = classify(x, means, covs, engine=engine)
    bad = np.array([i in (2, 6) for i in range(10)])
    assert np.all(np.isnan(r.posterior[bad])) and np.all(np.isfinite(r.posterior[~bad]))
    np.testing.assert_array_equal(r.most_likely[bad], -1)
    assert np.all(r.most_likely[~bad] >= 0)
    assert np.all(r.unclassified == bad)
    assert np.all(np.isnan(r.entropy[bad])) and np.all(np.isnan(r.mahalanobis[bad]))
    with pytest.raises(ValueError, match="x must be finite"):
        posterior(x, means, covs, engine=engine)
    x[3, 0] = np.inf
    with pytest.raises(ValueError, match=r"x must be finite or NaN \(no data\)"):
        classify(x, means, covs, engine=engine)
    # NaN covariates are no data too; infinite ones are refused.
    nodes = np.array([0.0, 1.0])
    c = np.linspace(0, 1, 10)
    c[4] = np.nan
    x = rng.normal(size=(10, 2))
    r = classify(
        x, np.stack([means] * 2), np.stack([covs] * 2), covariate=c, nodes=nodes, engine=engine
    )
    assert r.most_likely[4] == -1 and r.unclassified.sum() == 1
    with pytest.raises(ValueError, match="covariate must be finite"):
        posterior_nonstationary(
            x, c, nodes, np.stack([means] * 2), np.stack([covs] * 2), engine=engine
        )


@pytest.mark.parametrize("engine", ENGINES)
def test_chunked_classification_equals_whole(rng, engine):
    means = rng.normal(size=(4, 2))
    covs = random_spd(rng, 4, 2)
    x = rng.normal(scale=2.0, size=(10_000, 2))
    x[::13] = np.nan
    whole = classify(x, means, covs, max_mahalanobis=3.0, engine=engine)
    parts = [
        classify(x[s : s + 777], means, covs, max_mahalanobis=3.0, engine=engine)
        for s in range(0, 10_000, 777)
    ]
    for field in ("posterior", "most_likely", "mahalanobis", "entropy", "unclassified"):
        np.testing.assert_array_equal(
            getattr(whole, field), np.concatenate([getattr(p, field) for p in parts])
        )


@pytest.mark.parametrize("engine", ENGINES)
def test_chunked_nonstationary_classification_equals_whole(rng, engine):
    # Bit-identical results however the rows are split into calls, for the gridded
    # kernel too (one covariate, the fast path; and two covariates, the general one).
    k, d, n = 4, 2, 10_000
    x = rng.normal(scale=2.0, size=(n, d))
    x[::17] = np.nan
    nodes = np.array([0.0, 300.0, 700.0, 1500.0, 2000.0])
    means = rng.normal(size=(nodes.size, k, d))
    covs = random_spd(rng, nodes.size * k, d).reshape(nodes.size, k, d, d)
    c = rng.uniform(-100.0, 2100.0, n)
    c[5::31] = np.nan

    def run(s):
        return classify(
            x[s], means, covs, covariate=c[s], nodes=nodes, max_mahalanobis=3.0, engine=engine
        )

    whole = run(slice(None))
    parts = [run(slice(s, s + 777)) for s in range(0, n, 777)]
    for field in ("posterior", "most_likely", "mahalanobis", "entropy", "unclassified"):
        np.testing.assert_array_equal(
            getattr(whole, field), np.concatenate([getattr(p, field) for p in parts])
        )
    assert whole.n_clamped == sum(p.n_clamped for p in parts) > 0
    model = NonstationaryGaussianFacies(engine=engine).fit(
        rng.normal(size=(3, 2, k, 40, d)), {"uplift_m": [0.0, 400.0, 900.0], "depth_m": [1e3, 3e3]}
    )
    cov2 = {"uplift_m": rng.uniform(0.0, 900.0, n), "depth_m": rng.uniform(1e3, 3e3, n)}
    whole2 = model.predict_proba(np.nan_to_num(x), cov2)
    parts2 = [
        model.predict_proba(
            np.nan_to_num(x[s : s + 777]), {a: v[s : s + 777] for a, v in cov2.items()}
        )
        for s in range(0, n, 777)
    ]
    np.testing.assert_array_equal(whole2, np.concatenate(parts2))


@pytest.mark.parametrize("engine", ENGINES)
def test_posterior_into_given_array(rng, engine):
    # out= writes into (and returns) the caller's array: the same numbers as a fresh
    # result, for both functions; wrong arrays are refused with the expected shape.
    k, d, n = 3, 2, 1000
    means = rng.normal(size=(k, d))
    covs = random_spd(rng, k, d)
    x = rng.normal(scale=2.0, size=(n, d))
    priors = rng.dirichlet(np.ones(k), size=n)
    buf = np.full((n, k), -1.0)
    got = posterior(x, means, covs, priors, engine=engine, out=buf)
    assert got is buf
    np.testing.assert_array_equal(buf, posterior(x, means, covs, priors, engine=engine))
    nodes = np.array([0.0, 1.0, 2.0])
    c = rng.uniform(-0.5, 2.5, n)
    nm = np.stack([means, means + 0.3, means - 0.2])
    nc = np.stack([covs, 1.5 * covs, 0.7 * covs])
    got = posterior_nonstationary(x, c, nodes, nm, nc, engine=engine, out=buf)
    assert got is buf
    np.testing.assert_array_equal(buf, posterior_nonstationary(x, c, nodes, nm, nc, engine=engine))
    with pytest.raises(
        ValueError, match=r"out must be .*shape \(n_points, n_facies\) = \(1000, 3\)"
    ):
        posterior(x, means, covs, engine=engine, out=np.empty((n, k + 1)))
    with pytest.raises(ValueError, match="out must be .*float32"):
        posterior(x, means, covs, engine=engine, out=np.empty((n, k), dtype=np.float32))
    with pytest.raises(ValueError, match="non-contiguous or read-only"):
        posterior(x, means, covs, engine=engine, out=np.empty((k, n)).T)
    shared = np.zeros(n * k)
    with pytest.raises(ValueError, match="out must not share memory with x"):
        posterior(
            shared[: n * d].reshape(n, d), means, covs, engine=engine, out=shared.reshape(n, k)
        )


# ------------------------------------------------------------------ argument checks


def test_shape_errors_name_argument_and_shapes():
    x = np.zeros((5, 2))
    means = np.zeros((3, 2))
    covs = np.stack([np.eye(2)] * 3)
    with pytest.raises(ValueError, match=r"means must have shape \(n_facies, 2\).*\(3, 3\)"):
        posterior(x, np.zeros((3, 3)), covs)
    with pytest.raises(ValueError, match=r"covariances must have shape \(3, 2, 2\); got.*\(3, 2\)"):
        posterior(x, means, np.zeros((3, 2)))
    with pytest.raises(ValueError, match=r"priors must have shape \(n_facies,\) = \(3,\)"):
        posterior(x, means, covs, np.array([0.5, 0.5]))
    with pytest.raises(ValueError, match="priors must sum to 1"):
        posterior(x, means, covs, np.array([0.4, 0.6, 1.0]))
    with pytest.raises(ValueError, match=r"x must be an array of shape \(n_points, n_features\)"):
        posterior(np.zeros(5), means, covs)
    with pytest.raises(ValueError, match="means must be finite"):
        posterior(x, np.full((3, 2), np.nan), covs)
    nodes = np.array([0.0, 1.0])
    with pytest.raises(ValueError, match=r"covariate must have shape \(n_points,\) = \(5,\)"):
        posterior_nonstationary(x, np.zeros(4), nodes, np.stack([means] * 2), np.stack([covs] * 2))
    with pytest.raises(ValueError, match=r"means must have shape \(n_nodes=2, n_facies, 2\)"):
        posterior_nonstationary(x, np.zeros(5), nodes, means, np.stack([covs] * 2))
    with pytest.raises(ValueError, match="nodes must be strictly increasing"):
        posterior_nonstationary(
            x, np.zeros(5), np.array([1.0, 1.0]), np.stack([means] * 2), np.stack([covs] * 2)
        )


def test_bad_covariances_name_the_facies():
    x = np.zeros((2, 2))
    means = np.zeros((3, 2))
    covs = np.stack([np.eye(2)] * 3)
    covs[1] = [[1.0, 2.0], [2.0, 1.0]]  # eigenvalues 3 and -1
    with pytest.raises(ValueError, match=r"covariances\[1\] \(facies 1\) is not positive definite"):
        posterior(x, means, covs)
    covs[1] = [[1.0, 0.2], [0.1, 1.0]]
    with pytest.raises(ValueError, match=r"covariances\[1\] \(facies 1\) is not symmetric"):
        posterior(x, means, covs)
    node_covs = np.stack([np.stack([np.eye(2)] * 3)] * 2)
    node_covs[1, 2] = [[1.0, 0.0], [0.0, -1.0]]
    with pytest.raises(ValueError, match=r"covariances\[1, 2\] \(facies 2\) is not positive"):
        posterior_nonstationary(
            x, np.zeros(2), np.array([0.0, 1.0]), np.stack([means] * 2), node_covs
        )


def test_degenerate_fits_refused_with_clear_errors():
    good = np.array([[0.0, 0.0], [1.0, 0.2], [0.3, 1.0], [0.7, 0.6]])
    with pytest.raises(ValueError, match="at least 2 facies"):
        GaussianFacies().fit({"sand": good})
    with pytest.raises(
        ValueError,
        match=r"1 samples of 2 features; a covariance needs at least "
        r"n_features \+ 1 = 3 samples",
    ):
        GaussianFacies().fit({"sand": good, "shale": np.array([[1.0, 2.0]])})
    # Fewer samples than features.
    with pytest.raises(ValueError, match=r"2 samples of 3 features"):
        GaussianFacies().fit({"a": np.eye(3)[:2], "b": np.eye(3)[:2] + 1})
    collinear = np.array([[0.0, 0.0], [1.0, 2.0], [2.0, 4.0], [3.0, 6.0]])
    with pytest.raises(ValueError, match=r"collinear \(rank 1 < 2 features\).*reg_covariance"):
        GaussianFacies().fit({"sand": good, "shale": collinear})
    model = GaussianFacies(reg_covariance=0.1).fit({"sand": good, "shale": collinear})
    cov = model.covariances_[1]
    raw = np.cov(collinear, rowvar=False)
    np.testing.assert_allclose(cov, 0.9 * raw + 0.1 * np.diag(np.diag(raw)))
    assert np.all(np.linalg.eigvalsh(cov) > 0)
    assert np.all(np.isfinite(model.predict_proba(np.array([[0.5, 0.5], [10.0, -3.0]]))))
    constant = np.array([[0.0, 1.0], [1.0, 1.0], [2.0, 1.0]])
    with pytest.raises(ValueError, match="attribute 1 is constant"):
        GaussianFacies(reg_covariance=0.5).fit({"sand": good, "shale": constant})
    with pytest.raises(ValueError, match="not fitted"):
        GaussianFacies().predict_proba(good)
    with pytest.raises(ValueError, match="reg_covariance must be"):
        GaussianFacies(reg_covariance=1.0).fit({"sand": good, "shale": good + 1})
    with pytest.raises(ValueError, match="engine must be"):
        posterior(good, np.zeros((2, 2)), np.stack([np.eye(2)] * 2), engine="gpu")


def test_one_facies_posterior_is_one():
    r = classify(np.array([[0.0], [5.0]]), np.zeros((1, 1)), np.ones((1, 1, 1)))
    np.testing.assert_array_equal(r.posterior, 1.0)
    np.testing.assert_array_equal(r.entropy, 0.0)


# ------------------------------------------------------------------ KDE and fit tests


@pytest.mark.parametrize("rule", ["scott", "silverman", 0.4])
def test_kde_equals_scipy_gaussian_kde(rng, rule):
    # Source: scipy.stats.gaussian_kde(bw_method=rule).logpdf on the same centres.
    sample = np.concatenate([rng.normal(0, 1, (300, 2)), rng.normal(3, 0.5, (200, 2))])
    kde = GaussianKernelDensity(bandwidth=rule).fit(sample)
    ref = stats.gaussian_kde(sample.T, bw_method=rule)
    pts = np.concatenate([rng.normal(1.0, 2.0, (200, 2)), [[60.0, -40.0]]])
    np.testing.assert_allclose(kde.log_pdf(pts), ref.logpdf(pts.T), rtol=1e-10)
    assert np.isfinite(kde.log_pdf(np.array([[1e3, 1e3]])))[0]
    # Subsampling: the density is the KDE of the kept centres.
    big = GaussianKernelDensity(bandwidth=rule, max_points=100, random_state=4).fit(sample)
    assert big.centres_.shape == (100, 2) and big.n_samples_ == 500
    ref_sub = stats.gaussian_kde(big.centres_.T, bw_method=rule)
    np.testing.assert_allclose(big.log_pdf(pts), ref_sub.logpdf(pts.T), rtol=1e-10)


def test_kde_facies_in_classifier(rng):
    # A bimodal facies modelled by a KDE, a Gaussian one: posterior from Bayes' rule
    # with scipy.stats.gaussian_kde and scipy.stats.multivariate_normal densities.
    bimodal = np.concatenate([rng.normal(-2, 0.4, (300, 2)), rng.normal(2, 0.4, (300, 2))])
    unimodal = rng.normal(0, 0.6, (400, 2))
    model = GaussianFacies(density={"cemented": "kde"}, priors=[0.3, 0.7]).fit(
        {"cemented": bimodal, "friable": unimodal}
    )
    assert model.densities_ == ("kde", "gaussian")
    pts = rng.normal(0, 2, (500, 2))
    l0 = np.log(0.3) + stats.gaussian_kde(bimodal.T).logpdf(pts.T)
    l1 = np.log(0.7) + stats.multivariate_normal(model.means_[1], model.covariances_[1]).logpdf(pts)
    np.testing.assert_allclose(model.predict_proba(pts)[:, 0], 1 / (1 + np.exp(l1 - l0)), rtol=1e-9)
    pts[3] = np.nan
    r = model.classify(pts)
    assert r.most_likely[3] == -1 and np.isfinite(r.posterior[4]).all()
    # Gaussian fit tests flag the bimodal facies and accept the Gaussian one.
    assert model.goodness_of_fit_.kurtosis_p_value[0] < 1e-6
    assert model.goodness_of_fit_.ks_p_value[0] < 1e-6
    assert model.goodness_of_fit_.ks_p_value[1] > 1e-3


def test_mardia_statistics(rng):
    # 1-D: Mardia's b1 is the squared sample skewness and b2 the (non-excess) sample
    # kurtosis; source scipy.stats.skew and scipy.stats.kurtosis (biased estimators).
    v = rng.gamma(2.0, size=500)
    b1, b2 = mardia_skewness_kurtosis(v[:, None])
    assert b1 == pytest.approx(stats.skew(v) ** 2, rel=1e-12)
    assert b2 == pytest.approx(stats.kurtosis(v, fisher=False), rel=1e-12)
    # d-D: the O(n d^3) tensor form equals the O(n^2) double sum of the definition.
    x = rng.normal(size=(60, 3)) ** 3
    xc = x - x.mean(axis=0)
    g = xc @ np.linalg.inv(xc.T @ xc / 60) @ xc.T
    b1, b2 = mardia_skewness_kurtosis(x)
    assert b1 == pytest.approx(np.sum(g**3) / 60**2, rel=1e-10)
    assert b2 == pytest.approx(np.mean(np.diag(g) ** 2), rel=1e-10)
    # Normal data: b2 near d(d+2) within 4 standard errors sqrt(8 d (d+2) / n)
    # (Mardia 1970); p-values not extreme. Lognormal data: rejected.
    n, d = 4000, 3
    normal = rng.multivariate_normal(np.zeros(d), np.eye(d) + 0.5, size=n)
    res = gaussian_fit_tests(normal)
    assert abs(res.kurtosis - d * (d + 2)) < 4 * math.sqrt(8 * d * (d + 2) / n)
    assert min(res.skewness_p_value, res.kurtosis_p_value, res.ks_p_value) > 1e-3
    skewed = gaussian_fit_tests(np.exp(normal))
    assert max(skewed.skewness_p_value, skewed.kurtosis_p_value, skewed.ks_p_value) < 1e-6


def test_import_does_not_load_numba():
    code = "import sys, porecast.physics.classify; print('numba' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
