"""Prospect risk summary: geometry, P(hc), p-field simulation (porecast.physics.risk).

All grids, outlines and probabilities below are invented.
"""

import numpy as np
import pytest
from scipy import special, stats

from porecast.physics import risk

# ---------------------------------------------------------------------------
# Independent routes used as references
# ---------------------------------------------------------------------------


def winding_number(poly, px, py):
    """Winding number of points about a closed polygon by summing signed angles.

    A different algorithm from the module's ray casting: for a simple polygon a point
    is inside exactly when the winding number is +/-1 (Hormann & Agathos 2001, Comput.
    Geom. 20, the equivalence of even-odd and non-zero rules for simple polygons).
    """
    a = poly[:, None, :] - np.stack([px, py], axis=-1)[None, :, :]
    b = np.roll(poly, -1, axis=0)[:, None, :] - np.stack([px, py], axis=-1)[None, :, :]
    cross = a[..., 0] * b[..., 1] - a[..., 1] * b[..., 0]
    dot = a[..., 0] * b[..., 0] + a[..., 1] * b[..., 1]
    return np.rint(np.sum(np.arctan2(cross, dot), axis=0) / (2 * np.pi)).astype(int)


def distance_to_outline(poly, px, py):
    """Shortest distance of points to the polygon's edges, m."""
    a = poly[:, None, :]
    b = np.roll(poly, -1, axis=0)[:, None, :]
    p = np.stack([px, py], axis=-1)[None, :, :]
    ab = b - a
    t = np.clip(np.sum((p - a) * ab, axis=-1) / np.sum(ab * ab, axis=-1), 0.0, 1.0)
    nearest = a + t[..., None] * ab
    return np.min(np.hypot(*(p - nearest).transpose(2, 0, 1)), axis=0)


def poisson_binomial_pmf(p):
    """Exact distribution of a sum of independent Bernoulli(p_i) by repeated convolution."""
    pmf = np.array([1.0])
    for q in p:
        pmf = np.convolve(pmf, [1.0 - q, q])
    return pmf


def star(n_points, r_out, r_in, centre=(0.0, 0.0)):
    """Concave star outline with alternating outer and inner radii, m."""
    ang = np.pi / 2 + np.arange(2 * n_points) * np.pi / n_points
    r = np.where(np.arange(2 * n_points) % 2 == 0, r_out, r_in)
    return np.stack([centre[0] + r * np.cos(ang), centre[1] + r * np.sin(ang)], axis=1)


L_SHAPE = np.array([[0, 0], [600, 0], [600, 200], [250, 200], [250, 500], [0, 500]], float)


def perimeter(poly):
    return float(np.sum(np.hypot(*(np.roll(poly, -1, axis=0) - poly).T)))


def two_facies_posterior(p_hc):
    """Posterior (ny, nx, 2) with facies 0 = brine sand, 1 = gas sand of probability p_hc."""
    p_hc = np.asarray(p_hc, float)
    return np.stack([1.0 - p_hc, p_hc], axis=-1)


HC = [False, True]

# ---------------------------------------------------------------------------
# Geometry
# ---------------------------------------------------------------------------


def test_cell_centres_match_complex_rotation():
    # Independent route: node = origin + (j dx + i i dy) * exp(i r) in complex numbers.
    X, Y = risk.cell_centres((4, 5), 1000.0, 2000.0, 25.0, 50.0, rotation_deg=30.0)
    i, j = np.mgrid[0:4, 0:5]
    z = (1000.0 + 2000.0j) + (j * 25.0 + 1j * i * 50.0) * np.exp(1j * np.radians(30.0))
    np.testing.assert_allclose(X, z.real, rtol=0, atol=1e-9)
    np.testing.assert_allclose(Y, z.imag, rtol=0, atol=1e-9)


def test_cell_centres_quarter_turn_and_negative_dy():
    X, Y = risk.cell_centres((2, 3), 0.0, 0.0, 10.0, -20.0, rotation_deg=90.0)
    # a quarter turn sends the column axis to map +y and the (negative) row axis to map +x
    np.testing.assert_allclose(X, [[0, 0, 0], [20, 20, 20]], atol=1e-12)
    np.testing.assert_allclose(Y, [[0, 10, 20], [0, 10, 20]], atol=1e-12)


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"dx": 0.0}, "dx"),
        ({"dy": np.nan}, "dy"),
        ({"rotation_deg": 400.0}, "rotation_deg"),
        ({"shape": (0, 3)}, "shape"),
    ],
)
def test_cell_centres_rejects(kwargs, message):
    args = {"shape": (3, 3), "x0": 0.0, "y0": 0.0, "dx": 10.0, "dy": 10.0} | kwargs
    with pytest.raises(ValueError, match=message):
        risk.cell_centres(**args)


def test_shoelace_area_of_hand_triangle():
    # right triangle with legs 4 m and 3 m: 6 m2 (elementary geometry)
    assert risk.shoelace_area([[0, 0], [4, 0], [0, 3]]) == pytest.approx(6.0, abs=1e-12)


def test_rectangle_on_cell_boundaries_is_exact():
    # centres at 5, 15, ... m: the rectangle edges fall on cell boundaries
    X, Y = risk.cell_centres((20, 30), 5.0, 5.0, 10.0, 10.0)
    rect = [[20, 10], [150, 10], [150, 120], [20, 120]]
    mask = risk.polygon_mask(rect, X, Y)
    assert mask.sum() == 13 * 11
    assert mask.sum() * 100.0 == risk.shoelace_area(rect) == 130.0 * 110.0
    assert mask[1, 2] and not mask[0, 2] and not mask[1, 1] and mask[11, 14] and not mask[12, 14]


@pytest.mark.parametrize("rotation_deg", [0.0, 30.0])
@pytest.mark.parametrize(
    "poly", [L_SHAPE, star(5, 400.0, 150.0, (400.0, 400.0))], ids=["L", "star"]
)
def test_mask_area_converges_to_shoelace_area(poly, rotation_deg):
    # Cells whose inside/outside status differs from their area share lie within half a
    # cell diagonal of the outline, so |mask area - polygon area| <= perimeter * h * sqrt(2).
    exact = risk.shoelace_area(poly)
    errors = []
    c, s = np.cos(np.radians(rotation_deg)), np.sin(np.radians(rotation_deg))
    for h in (40.0, 20.0, 10.0, 5.0):
        # a 1600 m square grid centred on (200, 200) m covers both outlines at any rotation
        n = int(1600 / h)
        half = (n - 1) * h / 2
        x0, y0 = 200.0 - (c * half - s * half), 200.0 - (s * half + c * half)
        X, Y = risk.cell_centres((n, n), x0, y0, h, h, rotation_deg)
        area = risk.polygon_mask(poly, X, Y).sum() * h * h
        errors.append(abs(area - exact))
        assert errors[-1] <= perimeter(poly) * h * np.sqrt(2.0)
    assert errors[-1] < errors[0]
    assert errors[-1] / exact < 0.01


def test_mask_matches_winding_number_on_random_points():
    rng = np.random.default_rng(7)
    poly = star(7, 500.0, 120.0)
    px, py = rng.uniform(-600, 600, 20000), rng.uniform(-600, 600, 20000)
    far = distance_to_outline(poly, px, py) > 1e-6
    mask = risk.polygon_mask(poly, px, py)
    reference = winding_number(poly, px, py) != 0
    assert np.array_equal(mask[far], reference[far])
    assert 0.1 < mask.mean() < 0.5  # a real mix of inside and outside points


def test_mask_ignores_winding_order_and_closing_vertex():
    X, Y = risk.cell_centres((50, 60), 5.0, 5.0, 10.0, 10.0)
    base = risk.polygon_mask(L_SHAPE, X, Y)
    assert np.array_equal(base, risk.polygon_mask(L_SHAPE[::-1], X, Y))
    assert np.array_equal(base, risk.polygon_mask(np.vstack([L_SHAPE, L_SHAPE[:1]]), X, Y))
    assert base.sum() * 100.0 == risk.shoelace_area(L_SHAPE)  # edges on cell boundaries


@pytest.mark.parametrize(
    "poly, message",
    [
        ([[0, 0], [1, 1], [1, 0], [0, 1]], r"edge 0 \(vertices 0-1\) meets edge 2"),
        ([[0, 0], [2, 0], [1, 1], [2, 2], [0, 2], [1, 1]], r"edge 1 .* meets edge 4"),
        ([[0, 0], [4, 0], [4, 2], [4, 1], [0, 3]], "self-intersecting"),  # spike
        ([[0, 0], [1, 0]], "at least 3"),
        ([[0, 0], [1, 0], [np.nan, 1]], "finite"),
        ([[0, 0], [1, 0], [1, 0], [0, 1]], "repeats vertex 1"),
        ([[0, 0], [1, 0], [2, 0]], "self-intersecting"),  # zero area
        ([0, 1, 2, 3], r"list of \[x, y\] vertices"),
    ],
    ids=["bowtie", "touching", "spike", "two-vertices", "nan", "repeat", "collinear", "flat"],
)
def test_bad_outlines_are_refused(poly, message):
    with pytest.raises(ValueError, match=message):
        risk.polygon_vertices(poly)


def test_mask_needs_matching_coordinate_arrays():
    with pytest.raises(ValueError, match="X and Y must have the same shape"):
        risk.polygon_mask(L_SHAPE, np.zeros((3, 4)), np.zeros((4, 3)))


def test_large_outline_validates_and_a_late_crossing_is_found():
    ang = np.linspace(0, 2 * np.pi, 999, endpoint=False)
    circle = np.stack([1000 * np.cos(ang), 1000 * np.sin(ang)], axis=1)
    assert len(risk.polygon_vertices(circle)) == 999
    # regular 999-gon: area n/2 r^2 sin(2 pi / n)
    assert risk.shoelace_area(circle) == pytest.approx(
        999 / 2 * 1000.0**2 * np.sin(2 * np.pi / 999), rel=1e-12
    )
    crossed = circle.copy()
    crossed[[700, 701]] = crossed[[701, 700]]  # swapping two vertices crosses edges 699 and 701
    with pytest.raises(ValueError, match="edge 699 .* meets edge 701"):
        risk.polygon_vertices(crossed)


# ---------------------------------------------------------------------------
# Hydrocarbon probability
# ---------------------------------------------------------------------------


def test_hydrocarbon_probability_sums_hc_facies():
    post = np.array(
        [
            [[0.2, 0.5, 0.3], [0.6, 0.1, 0.3]],
            [[np.nan, np.nan, np.nan], [0.0, 0.0, 1.0]],
        ]
    )
    p = risk.hydrocarbon_probability(post, [False, True, True])
    np.testing.assert_allclose(p, [[0.8, 0.4], [np.nan, 1.0]], atol=1e-15)


@pytest.mark.parametrize(
    "post, hc, message",
    [
        ([[0.5, np.nan]], [False, True], "NaN in all facies or none"),
        ([[0.5, 0.6]], [False, True], "sum to 1"),
        ([[1.2, -0.2]], [False, True], "between 0 and 1"),
        ([[0.5, 0.5]], [0, 1], "booleans"),
        ([[0.5, 0.5]], [True], "booleans"),
        (np.zeros((2, 0)), [], "k >= 1"),
    ],
)
def test_hydrocarbon_probability_rejects(post, hc, message):
    with pytest.raises(ValueError, match=message):
        risk.hydrocarbon_probability(post, hc)


# ---------------------------------------------------------------------------
# Gaussian random fields
# ---------------------------------------------------------------------------

# cell pairs (row, col): neighbours along both axes, a diagonal, and opposite corners,
# which would be wrongly correlated if the periodic embedding wrapped around
PAIRS = [((0, 0), (0, 1)), ((0, 0), (1, 0)), ((3, 4), (5, 7)), ((0, 0), (11, 15))]


@pytest.mark.parametrize(
    "model, length, method",
    [
        ("exponential", 40.0, "circulant"),
        ("gaussian", 30.0, "circulant"),
        ("exponential", 400.0, "dense"),
        ("gaussian", 400.0, "dense"),
    ],
)
def test_field_correlation_matches_model(model, length, method):
    n = 4000
    dx, dy = 10.0, 15.0
    res = risk.gaussian_random_field(
        (12, 16), (dx, dy), length, n, np.random.default_rng(3), covariance=model, method=method
    )
    assert res.fields.shape == (n, 12, 16)
    assert res.method == method
    assert res.covariance_error < 1e-9
    f = res.fields
    # unit variance per cell: the sample variance of n normals has sd sqrt(2 / n)
    assert abs(np.var(f[:, 6, 8]) - 1.0) < 4 * np.sqrt(2 / n)
    for (i1, j1), (i2, j2) in PAIRS:
        h = np.hypot((i2 - i1) * dy, (j2 - j1) * dx)
        rho = float(risk.covariance_function(h, length, model))
        r = np.corrcoef(f[:, i1, j1], f[:, i2, j2])[0, 1]
        # sd of a sample correlation of n bivariate normals: (1 - rho^2) / sqrt(n)
        assert abs(r - rho) < 4 * (1 - rho**2) / np.sqrt(n) + 1e-3


def test_model_formulas():
    # exp(-h/L) and exp(-(h/L)^2) at h = L: both 1/e (definition of the length)
    for model in risk.COVARIANCE_MODELS:
        assert risk.covariance_function(50.0, 50.0, model) == pytest.approx(np.exp(-1.0))
    assert risk.covariance_function(100.0, 50.0, "gaussian") == pytest.approx(np.exp(-4.0))


def test_auto_switches_to_dense_when_embedding_is_approximate():
    # 20 x 20 cells of 10 m with a 500 m exponential length: every torus tried has
    # negative eigenvalues well above NEGLIGIBLE_COVARIANCE_ERROR
    rng = np.random.default_rng(0)
    approx = risk.gaussian_random_field((20, 20), (10, 10), 500.0, 2, rng, method="circulant")
    assert approx.covariance_error > risk.NEGLIGIBLE_COVARIANCE_ERROR
    auto = risk.gaussian_random_field((20, 20), (10, 10), 500.0, 2, rng)
    assert auto.method == "dense" and auto.covariance_error < 1e-9


def test_approximate_embedding_keeps_unit_variance_and_reports_its_error():
    # Chan & Wood (1997) approximate option: negative eigenvalues dropped, the rest
    # rescaled so that the point variance sum(lambda) / M = c(0) = 1 stays exact.
    shape, spacing, length = (20, 20), (10.0, 10.0), 500.0
    sampler = risk._circulant(shape, spacing, length, "exponential")
    assert sampler.method == "circulant" and sampler.covariance_error > 1e-3
    root = sampler.factor
    assert np.sum(root**2) == pytest.approx(1.0, rel=1e-12)
    # achieved covariance at lag (a, b) = sum_k |root_k|^2 exp(2 pi i k.(a, b) / m), by an
    # explicit sum over the torus, independent of the FFT in the module
    m1, m2 = root.shape
    k1, k2 = np.meshgrid(np.arange(m1), np.arange(m2), indexing="ij")
    worst = 0.0
    for a in range(shape[0]):
        for b in range(0, shape[1], 3):
            phase = np.exp(2j * np.pi * (k1 * a / m1 + k2 * b / m2))
            achieved = float(np.sum(root**2 * phase).real)
            target = float(risk.covariance_function(np.hypot(a, b) * 10.0, length, "exponential"))
            worst = max(worst, abs(achieved - target))
    assert worst <= sampler.covariance_error + 1e-12
    assert worst > 0.5 * sampler.covariance_error  # the sampled lags see most of the error


def test_field_arguments_are_checked(monkeypatch):
    rng = np.random.default_rng(0)
    with pytest.raises(ValueError, match="at most 2500 cells"):
        risk.gaussian_random_field((60, 60), (10, 10), 50.0, 2, rng, method="dense")
    with pytest.raises(ValueError, match="method must be"):
        risk.gaussian_random_field((6, 6), (10, 10), 50.0, 2, rng, method="fft")
    with pytest.raises(ValueError, match="spacing"):
        risk.gaussian_random_field((6, 6), (10, 0), 50.0, 2, rng)
    with pytest.raises(ValueError, match="correlation_length_m"):
        risk.gaussian_random_field((6, 6), (10, 10), 0.0, 2, rng)
    with pytest.raises(ValueError, match="n_fields"):
        risk.gaussian_random_field((6, 6), (10, 10), 50.0, 0, rng)
    with pytest.raises(ValueError, match="spacing"):
        risk.gaussian_random_field((6, 6), (10.0,), 50.0, 2, rng)
    # larger tori are tried only within MAX_EMBEDDING_CELLS
    monkeypatch.setattr(risk, "MAX_EMBEDDING_CELLS", 2000)
    assert risk._circulant((20, 20), (10.0, 10.0), 500.0, "exponential").factor.shape == (40, 40)
    monkeypatch.undo()
    # 60 x 60 cells (above the dense limit) with a 2 km length: approximate embedding,
    # refused once its measured error exceeds the limit
    approx = risk._circulant((60, 60), (10.0, 10.0), 2000.0, "exponential")
    assert approx.covariance_error > 1e-4
    monkeypatch.setattr(risk, "MAX_COVARIANCE_ERROR", 1e-4)
    with pytest.raises(ValueError, match="too long for a 60 x 60 cell outline"):
        risk.gaussian_random_field((60, 60), (10, 10), 2000.0, 2, rng)


def test_fields_are_reproducible_with_the_seed():
    a = risk.gaussian_random_field((8, 9), (10, 10), 50.0, 5, np.random.default_rng(11))
    b = risk.gaussian_random_field((8, 9), (10, 10), 50.0, 5, np.random.default_rng(11))
    c = risk.gaussian_random_field((8, 9), (10, 10), 50.0, 5, np.random.default_rng(12))
    assert np.array_equal(a.fields, b.fields)
    assert not np.allclose(a.fields, c.fields)


# ---------------------------------------------------------------------------
# Prospect risk
# ---------------------------------------------------------------------------


def test_expected_area_is_exact_and_nodata_is_excluded():
    p = np.array([[0.1, 0.2, 0.3], [0.4, np.nan, 0.6], [0.7, 0.8, 0.9]])
    post = two_facies_posterior(p)
    mask = np.array([[1, 1, 0], [1, 1, 1], [0, 0, 1]], bool)
    res = risk.prospect_risk(post, HC, mask, 625.0, seed=1, n_realisations=200)
    assert res.n_cells == 6 and res.n_nodata == 1
    assert res.expected_area_m2 == pytest.approx((0.1 + 0.2 + 0.4 + 0.6 + 0.9) * 625.0, rel=1e-14)
    assert res.realised_areas.shape == (200,)
    assert np.all(res.realised_areas % 625.0 == 0) and res.realised_areas.max() <= 5 * 625.0


def test_independent_cells_follow_poisson_binomial():
    rng = np.random.default_rng(5)
    p = rng.uniform(0, 0.5, (20, 20))
    mask = np.ones((20, 20), bool)
    mask[15:, :5] = False
    cell = 2500.0
    n = 4000
    res = risk.prospect_risk(
        two_facies_posterior(p), HC, mask, cell, seed=9, n_realisations=n, min_area_m2=40 * cell
    )
    q = p[mask]
    k = res.realised_areas / cell
    # exact moments of a Poisson-binomial count
    mean, var = q.sum(), np.sum(q * (1 - q))
    kappa4 = np.sum(q * (1 - q) * (1 - 6 * q * (1 - q)))
    assert res.expected_area_m2 == pytest.approx(mean * cell, rel=1e-12)
    assert abs(k.mean() - mean) < 4 * np.sqrt(var / n)
    # sd of a sample variance: sqrt(2 var^2 / (n - 1) + kappa4 / n)
    assert abs(k.var(ddof=1) - var) < 4 * np.sqrt(2 * var**2 / (n - 1) + kappa4 / n)
    # exact distribution for the success probability and the quantiles
    cdf = np.cumsum(poisson_binomial_pmf(q))
    p_success = 1.0 - cdf[40]
    assert abs(res.probability_hc - p_success) < 4 * np.sqrt(p_success * (1 - p_success) / n)
    for value, level in ((res.p90_area_m2, 0.1), (res.p50_area_m2, 0.5), (res.p10_area_m2, 0.9)):
        tol = 4 * np.sqrt(level * (1 - level) / n)
        j = int(np.floor(value / cell))
        assert cdf[j] >= level - tol and (j == 0 or cdf[j - 1] <= level + tol)
    assert res.p90_area_m2 <= res.p50_area_m2 <= res.p10_area_m2
    assert res.p90_area_m2 < res.p10_area_m2
    assert "P90 = low case" in res.convention


def test_correlated_field_honours_every_cell_probability_on_average():
    # E[area] = sum p * cell area whatever the correlation (p-field property, Srivastava
    # 1992); low probabilities (Phi^-1(p) far from 0) make a biased threshold visible.
    rng = np.random.default_rng(8)
    p = rng.uniform(0.02, 0.2, (40, 40))
    n = 2000
    res = risk.prospect_risk(
        two_facies_posterior(p), HC, np.ones((40, 40), bool), 100.0, seed=6, n_realisations=n,
        correlation_length_m=15.0, spacing=(10.0, 10.0),
    )  # fmt: skip
    k = res.realised_areas / 100.0
    assert abs(k.mean() - p.sum()) < 4 * k.std(ddof=1) / np.sqrt(n)
    assert k.var(ddof=1) > 1.5 * np.sum(p * (1 - p))  # correlated: wider than Poisson-binomial


@pytest.mark.parametrize("model, length", [("exponential", 25.0), ("gaussian", 20.0)])
def test_correlated_area_variance_matches_gaussian_copula(model, length):
    # Exact variance of the hydrocarbon count under a Gaussian p-field:
    # Var K = sum_ij [Phi2(t_i, t_j; rho_ij) - p_i p_j], t = Phi^-1(p), computed with
    # scipy's bivariate normal CDF (an independent route from the simulation).
    rng = np.random.default_rng(21)
    ny, nx, d = 6, 7, 10.0
    p_box = rng.uniform(0.2, 0.7, (ny, nx))
    p = np.full((10, 12), np.nan)
    p[2 : 2 + ny, 3 : 3 + nx] = p_box
    mask = np.zeros((10, 12), bool)
    mask[1:9, 2:11] = True  # the outline also covers no-data cells around the box
    n = 6000
    res = risk.prospect_risk(
        two_facies_posterior(p), HC, mask, d * d, seed=4, n_realisations=n,
        correlation_length_m=length, spacing=(d, d), covariance=model,
    )  # fmt: skip
    assert res.n_nodata == mask.sum() - ny * nx and res.covariance_error < 1e-3
    iy, ix = np.divmod(np.arange(ny * nx), nx)
    rho = risk.covariance_function(np.hypot(iy[:, None] - iy, ix[:, None] - ix) * d, length, model)
    t = special.ndtri(p_box.ravel())
    joint = np.empty_like(rho)
    for r in np.unique(np.round(rho, 12)):
        sel = np.isclose(rho, r, rtol=0, atol=1e-12)
        if r > 1 - 1e-12:
            joint[sel] = special.ndtr(np.minimum(t[:, None], t[None, :]))[sel]
            continue
        ti, tj = np.broadcast_arrays(t[:, None], t[None, :])
        pts = np.stack([ti[sel], tj[sel]], axis=-1)
        joint[sel] = stats.multivariate_normal(cov=[[1, r], [r, 1]]).cdf(pts)
    var_exact = float(np.sum(joint - np.outer(p_box.ravel(), p_box.ravel())))
    k = res.realised_areas / (d * d)
    assert abs(k.mean() - p_box.sum()) < 4 * np.sqrt(var_exact / n)
    m4 = np.mean((k - k.mean()) ** 4)
    sd_var = np.sqrt((m4 - k.var() ** 2) / n)  # sd of a sample variance from the 4th moment
    assert abs(k.var(ddof=1) - var_exact) < 4 * sd_var
    poisson_binomial_var = np.sum(p_box * (1 - p_box))
    assert var_exact > 3 * poisson_binomial_var  # correlation really matters here


def test_very_long_correlation_makes_the_outline_all_or_nothing():
    p = np.full((5, 5), 0.3)
    n = 4000
    res = risk.prospect_risk(
        two_facies_posterior(p), HC, np.ones((5, 5), bool), 100.0, seed=2, n_realisations=n,
        correlation_length_m=1e6, spacing=(10.0, 10.0),
    )  # fmt: skip
    # all 25 cells share one uniform: P(any hc) -> 0.3, low case 0, high case the whole outline
    assert abs(res.probability_hc - 0.3) < 4 * np.sqrt(0.21 / n) + 0.01
    assert res.p90_area_m2 == 0.0 and res.p50_area_m2 == 0.0 and res.p10_area_m2 == 2500.0
    partial = np.mean((res.realised_areas > 0) & (res.realised_areas < 2500.0))
    assert partial < 0.02
    # independent cells: binomial(25, 0.3) has a 10th percentile of 5 cells (exact CDF)
    indep = risk.prospect_risk(two_facies_posterior(p), HC, np.ones((5, 5), bool), 100.0, seed=2)
    assert stats.binom.ppf(0.1, 25, 0.3) == 5
    assert indep.p90_area_m2 == pytest.approx(500.0, abs=100.0)


def test_prospect_risk_is_reproducible():
    p = np.random.default_rng(0).uniform(0, 1, (12, 12))
    args = (two_facies_posterior(p), HC, np.ones((12, 12), bool), 100.0)
    kw = {"correlation_length_m": 30.0, "spacing": (10.0, 10.0), "n_realisations": 300}
    a = risk.prospect_risk(*args, seed=3, **kw)
    b = risk.prospect_risk(*args, seed=3, **kw)
    c = risk.prospect_risk(*args, seed=4, **kw)
    assert np.array_equal(a.realised_areas, b.realised_areas)
    assert not np.array_equal(a.realised_areas, c.realised_areas)


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"mask": np.ones((3, 3), bool)}, "mask must be a boolean array of shape"),
        ({"mask": np.ones((4, 4), int)}, "mask must be a boolean"),
        ({"mask": np.zeros((4, 4), bool)}, "no cell"),
        ({"n_realisations": 50}, "n_realisations"),
        ({"correlation_length_m": 50.0}, "spacing"),
        ({"spacing": (10.0, 20.0)}, "disagrees"),
        ({"seed": -1}, "seed"),
        ({"min_area_m2": -1.0}, "min_area_m2"),
        ({"cell_area_m2": 0.0}, "cell_area_m2"),
        ({"covariance": "spherical"}, "covariance"),
        ({"posterior": np.full((4, 2), 0.5)}, r"shape \(ny, nx, k\)"),
    ],
)
def test_prospect_risk_rejects(kwargs, message):
    args = {
        "posterior": two_facies_posterior(np.full((4, 4), 0.5)),
        "hc_index": HC,
        "mask": np.ones((4, 4), bool),
        "cell_area_m2": 100.0,
        "seed": 0,
    } | kwargs
    with pytest.raises(ValueError, match=message):
        risk.prospect_risk(**args)


def test_prospect_without_data_is_refused():
    post = two_facies_posterior(np.full((3, 3), np.nan))
    with pytest.raises(ValueError, match="no cell inside the outline has data"):
        risk.prospect_risk(post, HC, np.ones((3, 3), bool), 100.0, seed=0)


# ---------------------------------------------------------------------------
# Scenario table
# ---------------------------------------------------------------------------


def test_scenario_table_lays_out_scenarios_side_by_side():
    p_lo, p_hi = np.full((10, 10), 0.2), np.full((10, 10), 0.6)
    mask_a = np.zeros((10, 10), bool)
    mask_a[:5] = True
    mask_b = ~mask_a
    cell = 2500.0

    def run(p, m):
        return risk.prospect_risk(two_facies_posterior(p), HC, m, cell, seed=1)

    rows = [
        ("cold", "A", run(p_lo, mask_a)),
        ("warm", "A", run(p_hi, mask_a)),
        ("cold", "B", run(p_lo, mask_b)),
    ]
    table = risk.scenario_table(rows)
    assert table.scenarios == ["cold", "warm"] and table.prospects == ["A", "B"]
    first = table.rows[0]
    assert (first["scenario"], first["prospect"]) == ("cold", "A")
    # 50 cells x 2500 m2 x 0.2 = 25 000 m2 = 0.025 km2
    assert first["expected_area_km2"] == pytest.approx(0.025, rel=1e-12)
    assert first["p90_area_km2"] == rows[0][2].p90_area_m2 / 1e6
    assert first["p90_area_km2"] <= first["p50_area_km2"] <= first["p10_area_km2"]
    grid = table.pivot("expected_area_km2")
    assert grid[0] == [pytest.approx(0.025), pytest.approx(0.075)]
    assert grid[1] == [pytest.approx(0.025), None]
    assert "P90 = low case" in table.convention
    with pytest.raises(ValueError, match="appears twice"):
        risk.scenario_table(rows + [("cold", "A", rows[0][2])])
    with pytest.raises(ValueError, match="ProspectRisk"):
        risk.scenario_table([("cold", "C", {"probability_hc": 0.5})])
    with pytest.raises(ValueError, match="key must be one of"):
        table.pivot("area")
