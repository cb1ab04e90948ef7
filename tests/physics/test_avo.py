"""Reflection coefficients, intercept/gradient and AVO classes (porecast.physics.avo).

All rock properties below are invented, illustrative values (m/s, m/s, g/cm3).
"""

import numpy as np
import pytest

from porecast.physics import avo

# ---------------------------------------------------------------------------
# Independent routes used as references
# ---------------------------------------------------------------------------


def boundary_condition_solution(vp1, vs1, rho1, vp2, vs2, rho2, angle_deg):
    """Reflected/transmitted P and S amplitudes from the four boundary conditions.

    Built here from first principles, independent of the closed form in the module:
    plane waves u = d exp(i w (p x + q z - t)), z down, with P polarisation along the
    slowness vector and SV polarisation perpendicular to it; continuity of ux, uz,
    sigma_zz and sigma_xz at z = 0 (Aki & Richards 1980, section 5.2, the system their
    eq. 5.39 writes as a matrix) is solved with numpy.linalg.solve on stacked 4x4
    matrices. Evanescent waves take the principal root (Im q >= 0, decaying away from
    the interface). Returns (Rp, Rs, Tp, Ts, energy-flux weights).
    """
    vp1, vs1, rho1, vp2, vs2, rho2, ang = np.broadcast_arrays(
        *(np.asarray(x, dtype=float) for x in (vp1, vs1, rho1, vp2, vs2, rho2, angle_deg))
    )
    p = np.sin(np.radians(ang)) / vp1

    def q(v):
        return np.sqrt((1.0 - (p * v) ** 2).astype(complex)) / v

    mu1, mu2 = rho1 * vs1**2, rho2 * vs2**2
    lam1, lam2 = rho1 * vp1**2 - 2 * mu1, rho2 * vp2**2 - 2 * mu2

    def rows(dx, dz, qz, lam, mu):
        # ux, uz and the two tractions (divided by i w) of one plane wave
        szz = lam * (p * dx + qz * dz) + 2 * mu * qz * dz
        sxz = mu * (qz * dx + p * dz)
        return np.stack([dx + 0j, dz + 0j, szz, sxz], axis=-1)

    qa1, qb1, qa2, qb2 = q(vp1), q(vs1), q(vp2), q(vs2)
    incident = rows(vp1 * p, vp1 * qa1, qa1, lam1, mu1)
    refl_p = rows(vp1 * p, -vp1 * qa1, -qa1, lam1, mu1)
    refl_s = rows(-vs1 * qb1, -vs1 * p, -qb1, lam1, mu1)
    trans_p = rows(vp2 * p, vp2 * qa2, qa2, lam2, mu2)
    trans_s = rows(vs2 * qb2, -vs2 * p, qb2, lam2, mu2)
    matrix = np.stack([refl_p, refl_s, -trans_p, -trans_s], axis=-1)
    amp = np.linalg.solve(matrix, -incident[..., None])[..., 0]
    # vertical energy flux of each wave relative to the incident one: rho v^2 q |amp|^2
    flux_in = rho1 * vp1**2 * qa1.real
    weights = np.stack(
        [
            np.ones_like(flux_in),
            rho1 * vs1**2 * qb1.real / flux_in,
            rho2 * vp2**2 * qa2.real / flux_in,
            rho2 * vs2**2 * qb2.real / flux_in,
        ],
        axis=-1,
    )
    return amp, weights


def contrast_grid(c, vs_vp, vp=2500.0, rho=2.3):
    """Layers with relative contrasts (difference over mean) on a 5x5x5 grid in [-c, c]."""
    g = np.linspace(-c, c, 5)
    da, db, dr = np.meshgrid(g, g, g, indexing="ij")
    vs = vs_vp * vp
    return (
        vp * (1 - da / 2), vs * (1 - db / 2), rho * (1 - dr / 2),
        vp * (1 + da / 2), vs * (1 + db / 2), rho * (1 + dr / 2),
    )


def max_error(func, c, max_angle):
    """Worst |func - exact Rpp| over vs/vp 0.35-0.6, contrasts within c, 0..max_angle deg."""
    worst = 0.0
    for vs_vp in (0.35, 0.5, 0.6):
        layers = contrast_grid(c, vs_vp)
        ang = np.arange(0.0, max_angle + 0.5, 1.0)[:, None, None, None]
        exact = avo.zoeppritz_pp(*layers, ang).real
        worst = max(worst, float(np.max(np.abs(func(*layers, ang) - exact))))
    return worst


def random_layers(rng, n, contrast):
    """Random layer pairs; vp, vs/vp and rho differ across the interface by up to contrast."""
    vp = rng.uniform(1800.0, 4500.0, n)
    ratio = rng.uniform(0.35, 0.55, n)  # mean vs/vp; stays below sqrt(3)/2 for contrast <= 1
    rho = rng.uniform(1.9, 2.65, n)
    da, dk, dr = (rng.uniform(-contrast, contrast, n) for _ in range(3))
    vp1, vp2 = vp * (1 - da / 2), vp * (1 + da / 2)
    return (
        vp1, vp1 * ratio * (1 - dk / 2), rho * (1 - dr / 2),
        vp2, vp2 * ratio * (1 + dk / 2), rho * (1 + dr / 2),
    )


# ---------------------------------------------------------------------------
# Exact Zoeppritz
# ---------------------------------------------------------------------------

# Values computed with bruges 0.5.4 `bruges.reflection.zoeppritz_rpp` on 2026-12-01 in a
# throwaway environment, independent of this code (bruges is not a test dependency).
# Columns: layers, Rpp at 0, 15, 30, 45 degrees (all pre-critical, real).
BRUGES_PRECRITICAL = [
    ((2740, 1390, 2.29, 2590, 1580, 2.08),
     (-0.0760945994614897, -0.08403688829144373, -0.10755860626771488, -0.14756473434630538)),
    ((3000, 1500, 2.3, 3500, 2100, 2.5),
     (0.11821086261980827, 0.09538100710479996, 0.03675272780818778, -0.014388676029030665)),
    ((2000, 880, 2.18, 2200, 1200, 2.05),
     (0.01691093573844413, 0.003138460658696556, -0.032250078073244814, -0.06607400763028763)),
    ((3800, 2100, 2.55, 2600, 1650, 2.15),
     (-0.268324607329843, -0.25267256656051096, -0.21652363133223573, -0.19209956847032358)),
]
# Same source; |Rpp| across the P critical angle (38.7 deg) of a slow-over-fast interface.
# Only the modulus is compared: bruges returns the complex conjugate of our post-critical
# value (the other sign convention for the evanescent root).
BRUGES_FAST_FLOOR = (2500, 1000, 2.2, 4000, 2400, 2.6)
BRUGES_FAST_FLOOR_ABS = {
    10: 0.29003611372316807,
    30: 0.1809964294535508,
    45: 0.43741598774993046,
    60: 0.545074143659242,
    80: 0.8429104421598821,
}


@pytest.mark.parametrize(("layers", "expected"), BRUGES_PRECRITICAL)
def test_zoeppritz_matches_bruges_precritical(layers, expected):
    r = avo.zoeppritz_pp(*layers, np.array([0.0, 15.0, 30.0, 45.0]))
    np.testing.assert_allclose(r.real, expected, rtol=0, atol=1e-12)
    np.testing.assert_array_equal(r.imag, 0.0)


def test_zoeppritz_modulus_matches_bruges_postcritical():
    angles = np.array(list(BRUGES_FAST_FLOOR_ABS))
    r = avo.zoeppritz_pp(*BRUGES_FAST_FLOOR, angles)
    np.testing.assert_allclose(np.abs(r), list(BRUGES_FAST_FLOOR_ABS.values()), atol=1e-12)
    assert np.all(r.imag[angles > 38.7] != 0.0)


def test_zoeppritz_matches_boundary_condition_solve(rng):
    # Second independent route: the 4x4 boundary-condition system solved numerically,
    # over random layers with strong contrasts and angles beyond critical ones.
    layers = random_layers(rng, 4000, contrast=0.8)
    angle = rng.uniform(0.0, 89.0, 4000)
    amp, _ = boundary_condition_solution(*layers, angle)
    np.testing.assert_allclose(avo.zoeppritz_pp(*layers, angle), amp[:, 0], rtol=1e-9, atol=1e-12)


def test_boundary_condition_route_conserves_energy(rng):
    # Checks the reference route itself: the vertical energy fluxes of the four scattered
    # waves add up to the incident flux (Aki & Richards 1980, section 5.2.4).
    layers = random_layers(rng, 2000, contrast=0.8)
    amp, weights = boundary_condition_solution(*layers, rng.uniform(0.0, 89.0, 2000))
    np.testing.assert_allclose(np.sum(weights * np.abs(amp) ** 2, axis=-1), 1.0, atol=1e-10)


def test_zoeppritz_normal_incidence_is_impedance_contrast(rng):
    # At 0 degrees Rpp = (I2 - I1) / (I2 + I1) exactly (Aki & Richards 1980, sec. 5.2).
    layers = random_layers(rng, 10_000, contrast=1.0)
    vp1, _, rho1, vp2, _, rho2 = layers
    i1, i2 = vp1 * rho1, vp2 * rho2
    r0 = avo.zoeppritz_pp(*layers, 0.0)
    np.testing.assert_allclose(r0.real, (i2 - i1) / (i2 + i1), rtol=0, atol=1e-12)
    np.testing.assert_array_equal(r0.imag, 0.0)


def test_zoeppritz_no_contrast_no_reflection():
    r = avo.zoeppritz_pp(3000, 1600, 2.4, 3000, 1600, 2.4, np.arange(0.0, 90.0, 1.0))
    np.testing.assert_allclose(r, 0.0, atol=1e-15)


# ---------------------------------------------------------------------------
# Aki-Richards and Shuey against exact
# ---------------------------------------------------------------------------

# Measured worst errors against zoeppritz_pp on the contrast grids (2026-12-01):
#   contrasts <= 5 %,  <= 30 deg: 0.0010     contrasts <= 10 %, <= 20 deg: 0.0021
#   contrasts <= 10 %, <= 30 deg: 0.0040     contrasts <= 20 %, <= 30 deg: 0.0160
@pytest.mark.parametrize(
    ("contrast", "max_angle", "tolerance"),
    [(0.05, 30, 0.0015), (0.10, 20, 0.0025), (0.10, 30, 0.005), (0.20, 30, 0.02)],
)
def test_aki_richards_close_to_exact(contrast, max_angle, tolerance):
    assert max_error(avo.aki_richards, contrast, max_angle) < tolerance


def test_aki_richards_error_is_second_order_in_contrast():
    # A linearisation leaves an error of second order: halving every contrast divides it
    # by about 4 (a first-order mistake would divide it by only 2).
    ratio = max_error(avo.aki_richards, 0.10, 30) / max_error(avo.aki_richards, 0.05, 30)
    assert 3.0 < ratio < 5.0


def test_aki_richards_normal_incidence_equals_intercept(rng):
    layers = random_layers(rng, 1000, contrast=0.5)
    np.testing.assert_allclose(
        avo.aki_richards(*layers, 0.0), avo.intercept_gradient(*layers).intercept, atol=1e-15
    )


# Measured worst errors of the two-term Shuey form (2026-12-01):
#   vs exact, contrasts <= 10 %: 0.0064 at <= 20 deg, 0.0163 at <= 30 deg
#   vs Aki-Richards, contrasts <= 10 %, <= 30 deg: 0.0125
@pytest.mark.parametrize(("max_angle", "tolerance"), [(20, 0.008), (30, 0.02)])
def test_shuey_close_to_exact_within_small_angles(max_angle, tolerance):
    assert max_error(avo.shuey, 0.10, max_angle) < tolerance


def test_shuey_close_to_aki_richards_within_30_degrees():
    worst = 0.0
    for vs_vp in (0.35, 0.5, 0.6):
        layers = contrast_grid(0.10, vs_vp)
        ang = np.arange(0.0, 31.0)[:, None, None, None]
        diff = avo.shuey(*layers, ang) - avo.aki_richards(*layers, ang)
        worst = max(worst, float(np.max(np.abs(diff))))
    assert worst < 0.015


def test_shuey_degrades_beyond_its_validity():
    # Small-angle validity (Shuey 1985): the error at 40-50 deg exceeds the error at <= 30.
    assert max_error(avo.shuey, 0.10, 50) > 2 * max_error(avo.shuey, 0.10, 30)


# ---------------------------------------------------------------------------
# Intercept and gradient
# ---------------------------------------------------------------------------


def test_intercept_agrees_with_normal_incidence_to_third_order(rng):
    # With vp = m(1 +- a/2), rho = n(1 +- r/2) the exact R0 = (a + r) / (2 + a r / 2) while
    # A = (a + r) / 2; algebra gives A - R0 = (a + r) a r / (8 + 2 a r) exactly.
    layers = random_layers(rng, 10_000, contrast=0.6)
    vp1, _, rho1, vp2, _, rho2 = layers
    a = 2 * (vp2 - vp1) / (vp2 + vp1)
    r = 2 * (rho2 - rho1) / (rho2 + rho1)
    intercept = avo.intercept_gradient(*layers).intercept
    r0 = avo.zoeppritz_pp(*layers, 0.0).real
    np.testing.assert_allclose(intercept - r0, (a + r) * a * r / (8 + 2 * a * r), atol=1e-12)


def test_gradient_matches_slope_of_exact_curve():
    # dRpp/d(sin^2) of the exact curve at 0 deg equals B to first order in the contrasts;
    # the remainder shrinks like the square of the contrast (halving -> about a quarter).
    def slope_error(c):
        worst = 0.0
        for vs_vp in (0.35, 0.5, 0.6):
            layers = contrast_grid(c, vs_vp)
            s2 = np.sin(np.radians(0.5)) ** 2
            slope = (avo.zoeppritz_pp(*layers, 0.5).real - avo.zoeppritz_pp(*layers, 0.0).real)
            worst = max(worst, float(np.max(np.abs(slope / s2 - avo.intercept_gradient(*layers)
                                                   .gradient))))
        return worst

    e10, e05 = slope_error(0.10), slope_error(0.05)
    assert e10 < 0.06  # measured 0.048 on 2026-12-01, while |B| reaches 0.27 on this grid
    assert 3.0 < e10 / e05 < 5.0


def test_intercept_gradient_is_named_tuple_of_arrays():
    result = avo.intercept_gradient([2740, 2800], 1390, 2.29, 2590, 1580, 2.08)
    assert isinstance(result, avo.InterceptGradient)
    assert result.intercept.shape == result.gradient.shape == (2,)
    np.testing.assert_allclose(
        avo.shuey([2740, 2800], 1390, 2.29, 2590, 1580, 2.08, 0.0), result.intercept
    )


# ---------------------------------------------------------------------------
# AVO classes
# ---------------------------------------------------------------------------


def reference_class(a, b, t=avo.NEAR_ZERO_INTERCEPT, ref_deg=avo.REFERENCE_ANGLE_DEG):
    """Scalar restatement of the documented rules, one if-chain per pair."""
    if a > t:
        return "I"
    if a >= -t:
        # polarity reversal at or before ref_deg: the zero crossing of A + B sin^2 lies at
        # sin^2 = -A/B, which exists only for A > 0 > B and -A/B <= 1
        if a > 0 > b and -a / b <= 1.0 and np.degrees(np.arcsin(np.sqrt(-a / b))) <= ref_deg:
            return "IIp"
        return "II"
    return "IV" if b > 0 else "III"


def test_avo_class_sweep_every_pair_one_documented_label():
    t = avo.NEAR_ZERO_INTERCEPT
    a_values = np.unique(np.r_[np.linspace(-0.5, 0.5, 201), -t, 0.0, t, 0.9 * t, 1.1 * t])
    b_values = np.unique(np.r_[np.linspace(-1.0, 1.0, 201), 0.0, -4 * 0.9 * t, -4 * 1.1 * t])
    a, b = np.meshgrid(a_values, b_values, indexing="ij")
    labels = avo.avo_class(a, b)
    assert labels.shape == a.shape
    assert set(np.unique(labels)) == set(avo.AVO_CLASS_LABELS)
    expected = np.array([[reference_class(x, y) for y in b_values] for x in a_values])
    np.testing.assert_array_equal(labels, expected)


def test_avo_class_behaviour_of_two_term_curves():
    # Described behaviour per class (Rutherford & Williams 1989; Ross & Kinman 1995;
    # Castagna & Swan 1997), checked on the curve A + B sin^2 theta.
    a, b = np.meshgrid(np.linspace(-0.3, 0.3, 61), np.linspace(-0.6, 0.6, 61), indexing="ij")
    labels = avo.avo_class(a, b)
    far = a + b * np.sin(np.radians(avo.REFERENCE_ANGLE_DEG)) ** 2
    near = a + b * np.sin(np.radians(2.0)) ** 2
    iv, iii, iip = labels == "IV", labels == "III", labels == "IIp"
    assert np.all(np.abs(near[iv]) < np.abs(a[iv]))  # |R| decreases away from 0 deg
    assert np.all(np.abs(far[iii]) >= np.abs(a[iii]))  # |R| does not decrease
    assert np.all((a[iip] > 0) & (far[iip] <= 0))  # reversal within the reference angle
    assert np.all(np.abs(a[labels == "II"]) <= avo.NEAR_ZERO_INTERCEPT)


def test_avo_class_options_and_shape():
    assert avo.avo_class(0.03, -0.3, near_zero=0.05).item() == "IIp"
    assert avo.avo_class(0.01, -0.03).item() == "II"  # reversal only near 35 deg
    assert avo.avo_class(0.01, -0.03, reference_angle_deg=40.0).item() == "IIp"
    assert avo.avo_class([[0.1], [-0.1]], [-0.2, 0.2]).shape == (2, 2)


# Facts of the trade (common practice), with invented illustrative rocks: label from the
# intercept/gradient, and the exact Zoeppritz curve behaving as that class should.
SHALE = (2400.0, 1000.0, 2.25)  # soft shale cap rock
HARD_SHALE = (2900.0, 1300.0, 2.40)
TIGHT_CAP = (3800.0, 2100.0, 2.55)  # fast-shear cap rock (tight carbonate or siltstone)


def test_soft_shale_over_gas_sand_is_class_iii():
    layers = (*SHALE, 2100.0, 1250.0, 2.00)  # lower-impedance gas sand
    a, b = avo.intercept_gradient(*layers)
    assert a < 0 and b < 0
    assert avo.avo_class(a, b).item() == "III"
    r = avo.zoeppritz_pp(*layers, np.arange(0.0, 31.0)).real
    assert np.all(np.diff(r) < 0)  # brightens with angle


def test_hard_cemented_sand_is_class_i():
    layers = (*HARD_SHALE, 3800.0, 2400.0, 2.45)
    a, b = avo.intercept_gradient(*layers)
    assert a > avo.NEAR_ZERO_INTERCEPT and b < 0
    assert avo.avo_class(a, b).item() == "I"
    r = avo.zoeppritz_pp(*layers, np.arange(0.0, 31.0)).real
    assert r[0] > 0 and np.all(np.diff(r) < 0)  # positive, dimming with angle


def test_near_zero_contrast_sand_with_reversal_is_class_iip():
    layers = (2800.0, 1300.0, 2.35, 3000.0, 1800.0, 2.25)
    a, b = avo.intercept_gradient(*layers)
    assert 0 < a <= avo.NEAR_ZERO_INTERCEPT
    assert avo.avo_class(a, b).item() == "IIp"
    r = avo.zoeppritz_pp(*layers, np.array([0.0, 30.0])).real
    assert r[0] > 0 > r[1]  # the exact curve reverses polarity too


def test_near_zero_negative_contrast_sand_is_class_ii():
    layers = (2800.0, 1300.0, 2.35, 2900.0, 1700.0, 2.25)
    a, b = avo.intercept_gradient(*layers)
    assert -avo.NEAR_ZERO_INTERCEPT <= a < 0 and b < 0
    assert avo.avo_class(a, b).item() == "II"


def test_gas_sand_under_fast_cap_rock_is_class_iv():
    layers = (*TIGHT_CAP, 2600.0, 1650.0, 2.15)
    a, b = avo.intercept_gradient(*layers)
    assert a < -avo.NEAR_ZERO_INTERCEPT and b > 0
    assert avo.avo_class(a, b).item() == "IV"
    r = avo.zoeppritz_pp(*layers, np.arange(0.0, 31.0)).real
    assert np.all(r < 0) and np.all(np.diff(np.abs(r)) < 0)  # negative, dimming


# ---------------------------------------------------------------------------
# Impedances
# ---------------------------------------------------------------------------


def test_impedances_and_ratio():
    np.testing.assert_allclose(avo.acoustic_impedance([2500.0, 3000.0], 2.2), [5500.0, 6600.0])
    np.testing.assert_allclose(avo.shear_impedance(1200.0, [2.0, 2.5]), [2400.0, 3000.0])
    np.testing.assert_allclose(avo.vp_vs_ratio(3000.0, [1500.0, 2000.0]), [2.0, 1.5])


def test_elastic_impedance_at_zero_is_acoustic_impedance(rng):
    vp1, vs1, rho1, *_ = random_layers(rng, 1000, contrast=0.1)
    np.testing.assert_allclose(
        avo.elastic_impedance(vp1, vs1, rho1, 0.0), avo.acoustic_impedance(vp1, rho1), rtol=1e-14
    )


def test_elastic_impedance_contrast_reproduces_reflectivity():
    # Connolly (1999): (EI2 - EI1) / (EI2 + EI1) at constant K approximates Rpp(theta).
    # Measured worst error against exact Rpp, contrasts <= 10 %, <= 30 deg: 0.0122 (at
    # vs/vp = 0.6; 0.0051 at vs/vp = 0.35), measured 2026-12-01.
    worst = 0.0
    for vs_vp in (0.35, 0.5, 0.6):
        vp1, vs1, rho1, vp2, vs2, rho2 = contrast_grid(0.10, vs_vp)
        k = ((vs1 + vs2) / (vp1 + vp2)) ** 2
        ang = np.arange(0.0, 31.0)[:, None, None, None]
        ei1 = avo.elastic_impedance(vp1, vs1, rho1, ang, k)
        ei2 = avo.elastic_impedance(vp2, vs2, rho2, ang, k)
        exact = avo.zoeppritz_pp(vp1, vs1, rho1, vp2, vs2, rho2, ang).real
        worst = max(worst, float(np.max(np.abs((ei2 - ei1) / (ei2 + ei1) - exact))))
    assert worst < 0.015


# ---------------------------------------------------------------------------
# Validation and broadcasting
# ---------------------------------------------------------------------------

GOOD = dict(vp1=2740.0, vs1=1390.0, rho1=2.29, vp2=2590.0, vs2=1580.0, rho2=2.08)


@pytest.mark.parametrize(
    ("name", "value", "pattern"),
    [
        ("vp1", -2740.0, r"vp1 must be between 100 and 20000 m/s"),
        ("vp2", 2.59, r"vp2 must be between 100 and 20000 m/s"),  # km/s slip
        ("vs1", 0.0, r"vs1 must be between 0 and 20000 m/s \(0 excluded\)"),
        ("vs2", 2500.0, r"vs2 must be at most 0.8660 \* vp2"),
        ("rho1", 2290.0, r"rho1 must be between 0 and 25 g/cm3"),
        ("rho2", np.nan, r"rho2 must be finite"),
    ],
)
def test_bad_layer_property_names_argument(name, value, pattern):
    args = {**GOOD, name: value}
    for func in (avo.zoeppritz_pp, avo.aki_richards, avo.shuey):
        with pytest.raises(ValueError, match=pattern):
            func(**args, angle_deg=10.0)
    with pytest.raises(ValueError, match=pattern):
        avo.intercept_gradient(**args)


@pytest.mark.parametrize("angle", [-1.0, 90.0, np.inf])
def test_bad_angle_names_argument(angle):
    for func in (avo.zoeppritz_pp, avo.aki_richards, avo.shuey):
        with pytest.raises(ValueError, match="angle_deg"):
            func(**GOOD, angle_deg=[10.0, angle])


def test_aki_richards_refuses_post_critical_angle():
    # P critical angle arcsin(2500/4000) = 38.7 deg
    assert np.isfinite(avo.aki_richards(2500, 1000, 2.2, 4000, 2400, 2.6, 38.0))
    with pytest.raises(ValueError, match="angle_deg must not exceed the P critical angle"):
        avo.aki_richards(2500, 1000, 2.2, 4000, 2400, 2.6, 40.0)


def test_bad_class_and_impedance_inputs_name_argument():
    with pytest.raises(ValueError, match="intercept must be finite"):
        avo.avo_class(np.nan, 0.1)
    with pytest.raises(ValueError, match="gradient must be finite"):
        avo.avo_class(0.1, [0.1, np.inf])
    with pytest.raises(ValueError, match="near_zero must be between 0 and 1"):
        avo.avo_class(0.1, 0.1, near_zero=2.0)
    with pytest.raises(ValueError, match="reference_angle_deg"):
        avo.avo_class(0.1, 0.1, reference_angle_deg=0.0)
    with pytest.raises(ValueError, match="rho must be"):
        avo.acoustic_impedance(2500.0, 2200.0)
    with pytest.raises(ValueError, match="vs must be between 0 and 20000 m/s"):
        avo.shear_impedance(-1.0, 2.2)
    with pytest.raises(ValueError, match="vs must be at most"):
        avo.vp_vs_ratio(2000.0, 1900.0)
    with pytest.raises(ValueError, match="k must be"):
        avo.elastic_impedance(2500.0, 1200.0, 2.2, 20.0, k=-0.1)


def test_functions_broadcast_like_scalar_loops():
    vp2 = np.array([[2400.0], [2590.0], [3100.0]])  # shape (3, 1)
    angles = np.array([0.0, 10.0, 20.0, 30.0])  # shape (4,)
    args = dict(vp1=2740.0, vs1=1390.0, rho1=2.29, vs2=1580.0, rho2=2.08)
    for func in (avo.zoeppritz_pp, avo.aki_richards, avo.shuey):
        out = func(vp2=vp2, angle_deg=angles, **args)
        assert out.shape == (3, 4)
        loop = [[func(vp2=float(v), angle_deg=float(t), **args) for t in angles] for v in vp2[:, 0]]
        np.testing.assert_allclose(out, np.array(loop), rtol=1e-14, atol=1e-16)
    a, b = avo.intercept_gradient(2740.0, 1390.0, 2.29, vp2, 1580.0, [2.0, 2.1])
    assert a.shape == b.shape == (3, 2)
    assert np.ndim(avo.zoeppritz_pp(*GOOD.values(), 15.0)) == 0


def test_large_arrays_stay_vectorised(rng):
    n = 200_000
    layers = random_layers(rng, n, contrast=0.3)
    a, b = avo.intercept_gradient(*layers)
    labels = avo.avo_class(a, b)
    assert labels.shape == (n,)
    assert np.isin(labels, avo.AVO_CLASS_LABELS).all()
    assert avo.zoeppritz_pp(*layers, 25.0).shape == (n,)
