"""Rock-physics models: limits, closed forms, bounds and argument checks.

Sources are named beside each check. "RPH" is Mavko, Mukerji & Dvorkin, The
Rock Physics Handbook, 2nd ed. (2009); section numbers from memory.
"""

import math

import numpy as np
import pytest

from porecast.physics import rockphysics
from porecast.physics.rockphysics import (
    MINERALS,
    Moduli,
    constant_cement,
    contact_cement,
    critical_porosity_model,
    friable_sand,
    gassmann,
    gassmann_dry,
    hashin_shtrikman_bounds,
    hertz_mindlin,
    moduli_from_velocities,
    patchy_saturation,
    reuss,
    velocities,
    voigt,
    voigt_reuss_hill,
)

QUARTZ = MINERALS["quartz"]
CALCITE = MINERALS["calcite"]
PHIC = 0.36  # critical porosity of a random dense sphere pack, common practice
N = 9.0  # coordination number of a random dense pack, common practice


def _hs_upper_with_void(k, g, porosity):
    """Two-phase HS upper bound for mineral + empty pores (Hashin & Shtrikman 1963).

    Written out independently of the module: void has K = G = 0, so
    K+ = [(1-phi)/(K + 4/3 G) + phi/(4/3 G)]^-1 - 4/3 G and likewise for G with
    z = G/6 (9K + 8G)/(K + 2G).
    """
    z = g / 6.0 * (9.0 * k + 8.0 * g) / (k + 2.0 * g)
    k_up = 1.0 / ((1.0 - porosity) / (k + 4.0 / 3.0 * g) + porosity / (4.0 / 3.0 * g))
    g_up = 1.0 / ((1.0 - porosity) / (g + z) + porosity / z)
    return k_up - 4.0 / 3.0 * g, g_up - z


# ----------------------------------------------------------------------------- Hertz-Mindlin


def test_hertz_mindlin_hand_computed_quartz_pack():
    # Hand computation of the RPH 5.4 (Mindlin 1949) formulas, quartz K 36.6,
    # G 45 GPa, phi_c 0.36, n 9, P 20 MPa = 0.02 GPa:
    #   nu = (3*36.6 - 2*45) / (2 (3*36.6 + 45)) = 19.8 / 309.6 = 0.0639535
    #   (n (1-phi_c) G)^2 P = (9 * 0.64 * 45)^2 * 0.02 = 259.2^2 * 0.02 = 1343.6928
    #   pi^2 (1-nu)^2 = 9.8696044 * 0.8761831 = 8.6475803 -> ratio b = 155.38367
    #   K = (b / 18)^(1/3) = 8.632426^(1/3) = 2.05137 GPa
    #   G = (5 - 4 nu) / (5 (2 - nu)) * (1.5 b)^(1/3) = 0.490090 * 6.154114 = 3.01607 GPa
    k, g = hertz_mindlin(QUARTZ.k, QUARTZ.g, 0.36, 9, 20.0)
    assert k == pytest.approx(2.05137, rel=1e-5)
    assert g == pytest.approx(3.01607, rel=1e-5)


def test_hertz_mindlin_scales_with_cube_root_of_pressure():
    # Hertz contact: moduli proportional to P^(1/3) (RPH 5.4); 8x pressure doubles them.
    low = hertz_mindlin(QUARTZ.k, QUARTZ.g, PHIC, N, 3.0)
    high = hertz_mindlin(QUARTZ.k, QUARTZ.g, PHIC, N, 24.0)
    np.testing.assert_allclose(high.k, 2.0 * low.k, rtol=1e-12)
    np.testing.assert_allclose(high.g, 2.0 * low.g, rtol=1e-12)


def test_hertz_mindlin_slip_factor_ends():
    # Frictionless grains (Walton 1987 smooth spheres, from memory): G = 3/5 K.
    k, g = hertz_mindlin(QUARTZ.k, QUARTZ.g, PHIC, N, 10.0, slip_factor=0.0)
    assert g == pytest.approx(0.6 * k, rel=1e-12)
    # No slip: G/K = 3 (5 - 4 nu) / (5 (2 - nu)), the ratio of the two RPH 5.4 formulas.
    nu = 19.8 / 309.6
    k1, g1 = hertz_mindlin(QUARTZ.k, QUARTZ.g, PHIC, N, 10.0, slip_factor=1.0)
    assert g1 / k1 == pytest.approx(3.0 * (5.0 - 4.0 * nu) / (5.0 * (2.0 - nu)), rel=1e-12)
    assert k1 == pytest.approx(k, rel=1e-12)  # the bulk modulus does not depend on friction


def test_hertz_mindlin_zero_pressure_is_zero():
    k, g = hertz_mindlin(QUARTZ.k, QUARTZ.g, PHIC, N, 0.0)
    assert k == 0.0 and g == 0.0


# ----------------------------------------------------------------------------- friable sand


def test_friable_sand_ends_are_pack_and_mineral():
    # Dvorkin & Nur (1996): the modified HS lower bound runs from the HM pack at
    # phi_c to the mineral at phi = 0.
    hm = hertz_mindlin(QUARTZ.k, QUARTZ.g, PHIC, N, 25.0)
    at_phic = friable_sand(QUARTZ.k, QUARTZ.g, PHIC, PHIC, N, 25.0)
    at_zero = friable_sand(QUARTZ.k, QUARTZ.g, 0.0, PHIC, N, 25.0)
    np.testing.assert_allclose(at_phic, hm, rtol=1e-12)
    np.testing.assert_allclose(at_zero, (QUARTZ.k, QUARTZ.g), rtol=1e-12)


def test_friable_sand_at_zero_pressure_ends_at_mineral():
    # With no confining pressure the pack has no stiffness: any porosity > 0
    # gives zero, and zero porosity is still the mineral (HS limit).
    k, g = friable_sand(QUARTZ.k, QUARTZ.g, np.array([0.0, 0.2]), PHIC, N, 0.0)
    np.testing.assert_allclose(k, [QUARTZ.k, 0.0], atol=1e-12)
    np.testing.assert_allclose(g, [QUARTZ.g, 0.0], atol=1e-12)


def test_friable_sand_stiffens_as_porosity_drops_and_stays_below_hs_upper():
    phi = np.linspace(0.01, PHIC, 50)
    k, g = friable_sand(QUARTZ.k, QUARTZ.g, phi, PHIC, N, 25.0)
    assert np.all(np.diff(k) < 0) and np.all(np.diff(g) < 0)
    k_up, g_up = _hs_upper_with_void(QUARTZ.k, QUARTZ.g, phi)
    assert np.all(k < k_up) and np.all(g < g_up)


# ----------------------------------------------------------------------------- contact cement


def test_contact_cement_vanishes_without_cement_and_grows_with_it():
    # Dvorkin & Nur (1996): alpha = 0 at phi = phi_c. The fitted S_n, S_tau keep
    # small intercepts, so "zero" means under 0.5 % of the mineral moduli here.
    for scheme in (1, 2):
        k0, g0 = contact_cement(QUARTZ.k, QUARTZ.g, QUARTZ.k, QUARTZ.g, PHIC, PHIC, N, scheme)
        assert 0.0 <= k0 < 0.005 * QUARTZ.k and 0.0 <= g0 < 0.005 * QUARTZ.g
        phi = np.linspace(PHIC, 0.20, 40)
        k, g = contact_cement(QUARTZ.k, QUARTZ.g, QUARTZ.k, QUARTZ.g, phi, PHIC, N, scheme)
        assert np.all(np.diff(k) > 0) and np.all(np.diff(g) > 0)


def test_contact_cement_scheme1_stiffer_than_scheme2():
    # Dvorkin & Nur (1996): the same cement volume placed at the contacts
    # (scheme 1) stiffens the pack more than a uniform rim (scheme 2); here
    # alpha_1 = 2 (c/3n)^(1/4) exceeds alpha_2 = (2c/3)^(1/2) for every c < 12/n.
    phi = np.linspace(0.35, 0.15, 30)
    one = contact_cement(QUARTZ.k, QUARTZ.g, QUARTZ.k, QUARTZ.g, phi, PHIC, N, 1)
    two = contact_cement(QUARTZ.k, QUARTZ.g, QUARTZ.k, QUARTZ.g, phi, PHIC, N, 2)
    assert np.all(one.k > two.k) and np.all(one.g > two.g)


@pytest.mark.parametrize("cement", [MINERALS["quartz"], MINERALS["calcite"]])
@pytest.mark.parametrize("cement_volume", [0.001, 0.003])
def test_contact_cement_small_cement_limit_is_welded_contact(cement, cement_volume):
    # Independent check of the fit coefficients (written from memory). For a
    # thin cement bond of radius a = alpha R the contact acts as a welded
    # circular contact, whose stiffnesses are Sn = 4 G a / (1 - nu) and
    # St = 8 G a / (2 - nu) for any cement (Mindlin 1949 no-slip; Johnson 1985,
    # Contact Mechanics, from memory). Through the effective-medium sums of
    # Walton (1987) / Digby (1981), K = n (1 - phi_c) Sn / (12 pi R) and
    # G = n (1 - phi_c) (Sn + 1.5 St) / (20 pi R), R cancelling. The fit has a
    # small intercept and curvature, so at alpha 0.03-0.06 (scheme 2) it can
    # only agree to a few percent: 5 % on K, 10 % on G. A 10 % error in a
    # leading coefficient or a wrong exponent would fail.
    phi = PHIC - cement_volume
    alpha = math.sqrt(2.0 * cement_volume / (3.0 * (1.0 - PHIC)))  # scheme 2
    nu = (3 * QUARTZ.k - 2 * QUARTZ.g) / (2 * (3 * QUARTZ.k + QUARTZ.g))
    k_welded = N * (1 - PHIC) * 4 * QUARTZ.g * alpha / ((1 - nu) * 12 * math.pi)
    g_welded = N * (1 - PHIC) * QUARTZ.g * alpha * (4 / (1 - nu) + 12 / (2 - nu)) / (20 * math.pi)
    k, g = contact_cement(QUARTZ.k, QUARTZ.g, cement.k, cement.g, phi, PHIC, N, 2)
    assert k == pytest.approx(k_welded, rel=0.05)
    assert g == pytest.approx(g_welded, rel=0.10)


def test_contact_cement_below_hs_upper_bound_of_mineral_and_void():
    # RPH 4.1: no isotropic mix of mineral and empty pores can exceed the HS upper bound.
    phi = np.linspace(0.36, 0.05, 32)
    k_up, g_up = _hs_upper_with_void(QUARTZ.k, QUARTZ.g, phi)
    for scheme in (1, 2):
        k, g = contact_cement(QUARTZ.k, QUARTZ.g, QUARTZ.k, QUARTZ.g, phi, PHIC, N, scheme)
        assert np.all(k < k_up) and np.all(g < g_up)


def test_contact_cement_refuses_other_schemes():
    with pytest.raises(ValueError, match="scheme must be 1 .* or 2"):
        contact_cement(QUARTZ.k, QUARTZ.g, QUARTZ.k, QUARTZ.g, 0.3, PHIC, N, 3)


# ----------------------------------------------------------------------------- constant cement


def test_constant_cement_ends_and_position():
    # Avseth et al. (2000): equals contact cement at phi_b and the mineral at 0.
    phib = 0.32
    args = (QUARTZ.k, QUARTZ.g, QUARTZ.k, QUARTZ.g)
    at_b = constant_cement(*args, phib, PHIC, phib, N, 1)
    np.testing.assert_allclose(at_b, contact_cement(*args, phib, PHIC, N, 1), rtol=1e-12)
    at_zero = constant_cement(*args, 0.0, PHIC, phib, N, 1)
    np.testing.assert_allclose(at_zero, (QUARTZ.k, QUARTZ.g), rtol=1e-12)


def test_constant_cement_between_friable_sand_and_contact_cement():
    # Avseth et al. (2000), their template figure: just below phi_b a constant-
    # cement line is softer than the contact-cement line (which adds cement as
    # porosity falls) and stiffer than the friable-sand line. Checked only within
    # 3 % porosity of phi_b: further down the contact-cement fit, used beyond
    # the small cement volumes it was made for, flattens and is crossed.
    phib = 0.32
    args = (QUARTZ.k, QUARTZ.g, QUARTZ.k, QUARTZ.g)
    near = np.linspace(0.319, 0.29, 10)
    cc = constant_cement(*args, near, PHIC, phib, N, 1)
    ref = contact_cement(*args, near, PHIC, N, 1)
    assert np.all(cc.k < ref.k) and np.all(cc.g < ref.g)
    phi = np.linspace(0.31, 0.02, 30)
    cc = constant_cement(*args, phi, PHIC, phib, N, 1)
    soft = friable_sand(QUARTZ.k, QUARTZ.g, phi, PHIC, N, 25.0)
    assert np.all(cc.k > soft.k) and np.all(cc.g > soft.g)
    assert np.all(np.diff(cc.k) > 0) and np.all(np.diff(cc.g) > 0)
    k_up, g_up = _hs_upper_with_void(QUARTZ.k, QUARTZ.g, phi)
    assert np.all(cc.k < k_up) and np.all(cc.g < g_up)


def test_constant_cement_refuses_porosity_above_cemented():
    with pytest.raises(ValueError, match="porosity must be at most porosity_cemented"):
        constant_cement(QUARTZ.k, QUARTZ.g, QUARTZ.k, QUARTZ.g, 0.33, PHIC, 0.30, N, 1)


# ----------------------------------------------------------------------------- critical porosity


def test_critical_porosity_model_is_linear_between_mineral_and_zero():
    # Nur et al. (1995); RPH ch. 7: K_dry = K_m (1 - phi/phi_c).
    clay = MINERALS["clay"]
    k, g = critical_porosity_model(clay.k, clay.g, np.array([0.0, 0.3, 0.6]), 0.6)
    np.testing.assert_allclose(k, [clay.k, clay.k / 2, 0.0], atol=1e-12)
    np.testing.assert_allclose(g, [clay.g, clay.g / 2, 0.0], atol=1e-12)


# ----------------------------------------------------------------------------- Gassmann


def test_gassmann_suspension_is_wood_reuss_average():
    # Wood (1955) / RPH 4.2: with no frame the rock is a suspension, its K the
    # Reuss average of fluid and mineral, written out here.
    phi, kf = 0.4, 2.25
    k_sat, g_sat = gassmann(0.0, 0.0, QUARTZ.k, kf, phi)
    assert k_sat == pytest.approx(1.0 / (phi / kf + (1 - phi) / QUARTZ.k), rel=1e-12)
    assert g_sat == 0.0


def test_gassmann_empty_pores_and_zero_porosity():
    # Gassmann (1951): K_f = 0 leaves the dry frame; phi = 0 gives the mineral.
    assert gassmann(12.0, 9.0, QUARTZ.k, 0.0, 0.25).k == pytest.approx(12.0, rel=1e-15)
    assert gassmann(12.0, 9.0, QUARTZ.k, 2.25, 0.0).k == pytest.approx(QUARTZ.k, rel=1e-12)
    assert gassmann(QUARTZ.k, 9.0, QUARTZ.k, 0.0, 0.0).k == pytest.approx(QUARTZ.k, rel=1e-15)


def test_gassmann_hand_computed_example():
    # Invented case computed by hand from Gassmann (1951), RPH 6.3:
    # K_dry 12, K_m 36.6, K_f 2.25 GPa, phi 0.2.
    #   (1 - 12/36.6)^2 = 0.6721311^2 = 0.4517603
    #   0.2/2.25 + 0.8/36.6 - 12/36.6^2 = 0.0888889 + 0.0218579 - 0.0089582 = 0.1017886
    #   K_sat = 12 + 0.4517603 / 0.1017886 = 12 + 4.438220 = 16.43822 GPa
    k_sat, g_sat = gassmann(12.0, 10.0, 36.6, 2.25, 0.2)
    assert k_sat == pytest.approx(16.43822, rel=2e-6)
    assert g_sat == 10.0


def test_gassmann_matches_mavko_alternative_form(rng):
    # RPH 6.3 alternative form: K_sat/(K_m - K_sat) = K_dry/(K_m - K_dry) + K_f/(phi (K_m - K_f)).
    n = 1000
    km = rng.uniform(20.0, 80.0, n)
    kd = km * rng.uniform(0.0, 0.9, n)
    kf = rng.uniform(0.01, 5.0, n)
    phi = rng.uniform(0.02, 0.45, n)
    k_sat = gassmann(kd, 0.5 * kd, km, kf, phi).k
    lhs = k_sat / (km - k_sat)
    rhs = kd / (km - kd) + kf / (phi * (km - kf))
    np.testing.assert_allclose(lhs, rhs, rtol=1e-10)


def test_inverse_gassmann_round_trips(rng):
    # The inverse is a separate rearrangement (RPH 6.3); forward then inverse returns K_dry.
    n = 1000
    km = rng.uniform(20.0, 80.0, n)
    kd = km * rng.uniform(0.0, 0.95, n)
    kf = rng.uniform(0.01, 5.0, n)
    phi = rng.uniform(0.02, 0.45, n)
    k_sat = gassmann(kd, kd, km, kf, phi).k
    np.testing.assert_allclose(gassmann_dry(k_sat, km, kf, phi), kd, rtol=1e-9, atol=1e-10)


def test_gassmann_refuses_frame_stiffer_than_mineral():
    with pytest.raises(ValueError, match="k_dry must be at most k_mineral"):
        gassmann(40.0, 30.0, QUARTZ.k, 2.25, 0.2)


def test_inverse_gassmann_refuses_below_suspension():
    with pytest.raises(ValueError, match="k_sat must be at least the Reuss average"):
        gassmann_dry(3.0, QUARTZ.k, 2.25, 0.3)


def test_patchy_saturation_ends_and_above_uniform():
    # Mavko & Mukerji (1998, Geophysics 63): patchy (Hill 1963 average of the
    # P modulus) is the upper bound, uniform mixing (Wood fluid then Gassmann)
    # the lower; both reduce to Gassmann at full saturation of one fluid.
    kd, gd, phi = 8.0, 7.0, 0.28
    kf = np.array([2.6, 0.05])  # brine-like and gas-like, invented
    sw = np.linspace(0.0, 1.0, 11)
    sat = np.stack([sw, 1.0 - sw], axis=-1)
    patchy = patchy_saturation(kd, gd, QUARTZ.k, phi, kf, sat)
    uniform = gassmann(kd, gd, QUARTZ.k, reuss(sat, kf), phi)
    np.testing.assert_allclose(patchy.k[[0, -1]], uniform.k[[0, -1]], rtol=1e-12)
    assert np.all(patchy.k[1:-1] > uniform.k[1:-1])
    np.testing.assert_allclose(patchy.g, gd)


# ----------------------------------------------------------------------------- mixing and bounds


def test_voigt_and_reuss_simple_values():
    f = [0.25, 0.75]
    assert voigt(f, [40.0, 20.0]) == pytest.approx(25.0)
    assert reuss(f, [40.0, 20.0]) == pytest.approx(1.0 / (0.25 / 40 + 0.75 / 20))
    assert reuss(f, [40.0, 0.0]) == 0.0  # a void in non-zero fraction has no stiffness
    assert reuss([1.0, 0.0], [40.0, 0.0]) == pytest.approx(40.0)  # absent void ignored
    k, g = voigt_reuss_hill(f, [40.0, 20.0], [30.0, 10.0])
    assert k == pytest.approx(0.5 * (25.0 + 1.0 / (0.25 / 40 + 0.75 / 20)))
    assert g == pytest.approx(0.5 * (15.0 + 1.0 / (0.25 / 30 + 0.75 / 10)))


def test_fractions_must_sum_to_one():
    with pytest.raises(ValueError, match="fractions must sum to 1"):
        voigt([0.5, 0.4], [10.0, 20.0])
    with pytest.raises(ValueError, match="fractions must be between 0 and 1"):
        reuss([1.2, -0.2], [10.0, 20.0])


def test_hs_matches_two_phase_closed_form(rng):
    # Hashin & Shtrikman (1963) two-phase bounds, phase 1 stiffer in K and G:
    #   K+ = K1 + f2 / ((K2 - K1)^-1 + f1 (K1 + 4/3 G1)^-1)
    #   G+ = G1 + f2 / ((G2 - G1)^-1 + 2 f1 (K1 + 2 G1) / (5 G1 (K1 + 4/3 G1)))
    # and the lower bounds with the phases' roles swapped.
    n = 500
    k2, g2 = rng.uniform(1.0, 30.0, n), rng.uniform(0.5, 20.0, n)
    k1, g1 = k2 + rng.uniform(0.5, 60.0, n), g2 + rng.uniform(0.5, 40.0, n)
    f1 = rng.uniform(0.0, 1.0, n)
    f2 = 1.0 - f1

    def upper(ka, ga, kb, gb, fa, fb):  # a is the stiff phase the bound is built on
        k = ka + fb / (1.0 / (kb - ka) + fa / (ka + 4.0 / 3.0 * ga))
        g = ga + fb / (1.0 / (gb - ga) + 2.0 * fa * (ka + 2 * ga) / (5 * ga * (ka + 4 / 3 * ga)))
        return k, g

    k_up, g_up = upper(k1, g1, k2, g2, f1, f2)
    k_lo, g_lo = upper(k2, g2, k1, g1, f2, f1)
    b = hashin_shtrikman_bounds(
        np.stack([f1, f2], -1), np.stack([k1, k2], -1), np.stack([g1, g2], -1)
    )
    np.testing.assert_allclose(b.k_upper, k_up, rtol=1e-10)
    np.testing.assert_allclose(b.g_upper, g_up, rtol=1e-10)
    np.testing.assert_allclose(b.k_lower, k_lo, rtol=1e-10)
    np.testing.assert_allclose(b.g_lower, g_lo, rtol=1e-10)


def test_hs_bounds_lie_between_reuss_and_voigt(rng):
    # RPH 4.1/4.2: Reuss <= HS lower <= HS upper <= Voigt for any isotropic
    # mix, including constituents whose largest K and largest G differ (Walpole).
    n, m = 2000, 4
    f = rng.dirichlet(np.ones(m), size=n)
    k = rng.uniform(0.0, 100.0, (n, m))
    g = rng.uniform(0.0, 60.0, (n, m))
    b = hashin_shtrikman_bounds(f, k, g)
    tol = 1e-9
    assert np.all(reuss(f, k) <= b.k_lower + tol) and np.all(b.k_lower <= b.k_upper + tol)
    assert np.all(b.k_upper <= voigt(f, k) + tol)
    assert np.all(reuss(f, g) <= b.g_lower + tol) and np.all(b.g_lower <= b.g_upper + tol)
    assert np.all(b.g_upper <= voigt(f, g) + tol)


def test_hs_bulk_bounds_coincide_for_equal_shear_moduli():
    # Hill (1963): equal shear moduli make K exact, K = [sum f/(K + 4/3 G)]^-1 - 4/3 G,
    # so both HS bounds equal it. (VRH differs from this exact value: VRH is not
    # guaranteed to lie inside the HS bounds, so no test asserts that.)
    f, k, g = [0.3, 0.7], [10.0, 40.0], [5.0, 5.0]
    b = hashin_shtrikman_bounds(f, k, g)
    exact = 1.0 / (0.3 / (10 + 20 / 3) + 0.7 / (40 + 20 / 3)) - 20 / 3
    assert b.k_lower == pytest.approx(exact, rel=1e-12)
    assert b.k_upper == pytest.approx(exact, rel=1e-12)
    assert voigt_reuss_hill(f, k, g).k > b.k_upper  # the counter-example


def test_hs_ignores_absent_constituents_and_split_phases(rng):
    # A constituent in zero fraction changes nothing; a phase split into two
    # identical halves changes nothing (the bounds are functions of the mixture).
    f = np.array([0.2, 0.5, 0.3])
    k = np.array([36.6, 21.0, 76.8])
    g = np.array([45.0, 7.0, 32.0])
    base = hashin_shtrikman_bounds(f, k, g)
    absent = hashin_shtrikman_bounds(np.append(f, 0.0), np.append(k, 500.0), np.append(g, 0.0))
    split = hashin_shtrikman_bounds(
        [0.1, 0.1, 0.5, 0.3], [36.6, 36.6, 21.0, 76.8], [45.0, 45.0, 7.0, 32.0]
    )
    np.testing.assert_allclose(absent, base, rtol=1e-12)
    np.testing.assert_allclose(split, base, rtol=1e-12)


def test_hs_with_void_gives_zero_lower_bounds():
    b = hashin_shtrikman_bounds([0.7, 0.3], [36.6, 0.0], [45.0, 0.0])
    assert b.k_lower == 0.0 and b.g_lower == 0.0
    k_up, g_up = _hs_upper_with_void(36.6, 45.0, 0.3)
    assert b.k_upper == pytest.approx(k_up, rel=1e-12)
    assert b.g_upper == pytest.approx(g_up, rel=1e-12)


# ----------------------------------------------------------------------------- velocities


def test_quartz_velocities_match_handbook_table():
    # RPH mineral table lists quartz Vp about 6.05 km/s, Vs about 4.09 km/s (from memory).
    vp, vs = velocities(QUARTZ.k, QUARTZ.g, QUARTZ.density)
    assert vp == pytest.approx(6050.0, rel=0.01)
    assert vs == pytest.approx(4090.0, rel=0.01)
    # Direct arithmetic: sqrt(96.6 / 2.65) = 6.0376 km/s.
    assert vp == pytest.approx(6037.6, rel=1e-4)


def test_moduli_from_velocities_round_trips(rng):
    k = rng.uniform(0.0, 80.0, 100)
    g = rng.uniform(0.0, 50.0, 100)
    rho = rng.uniform(1.0, 3.0, 100)
    back = moduli_from_velocities(*velocities(k, g, rho), rho)
    np.testing.assert_allclose(back.k, k, rtol=1e-10, atol=1e-10)
    np.testing.assert_allclose(back.g, g, rtol=1e-10, atol=1e-10)


def test_moduli_from_velocities_refuses_negative_bulk_modulus():
    with pytest.raises(ValueError, match="vp must be at least"):
        moduli_from_velocities(2000.0, 1900.0, 2.2)


# ----------------------------------------------------------------------------- inputs and shapes


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: friable_sand(36.6, 45.0, 0.4, 0.36, 9, 20), "porosity must be at most"),
        (lambda: friable_sand(36.6, 45.0, 0.3, 1.0, 9, 20), "porosity_critical must be between"),
        (lambda: hertz_mindlin(36.6, 45.0, 0.36, 0.0, 20), "coordination must be between 1 and 20"),
        (lambda: hertz_mindlin(36.6, 45.0, 0.36, 9, -1.0), "pressure_mpa must be at least 0 MPa"),
        (lambda: hertz_mindlin(0.0, 45.0, 0.36, 9, 10.0), "k_mineral must be greater than 0"),
        (lambda: hertz_mindlin(36.6, 45.0, 0.36, 9, 10.0, slip_factor=1.5), "slip_factor"),
        (lambda: contact_cement(36.6, 45.0, 36.6, -1.0, 0.3, 0.36, 9, 1), "g_cement"),
        (lambda: gassmann(10.0, 5.0, 36.6, 40.0, 0.2), "k_fluid must be at most k_mineral"),
        (lambda: gassmann(10.0, 5.0, 36.6, 2.0, np.nan), "porosity must be finite"),
        (lambda: critical_porosity_model(21.0, 7.0, 0.7, 0.6), "porosity must be at most"),
        (lambda: velocities(30.0, 20.0, 0.0), "density must be greater than 0"),
    ],
)
def test_bad_inputs_name_the_argument(call, message):
    with pytest.raises(ValueError, match=message):
        call()


def test_models_broadcast():
    phi = np.linspace(0.05, 0.3, 5)[:, None]
    pressure = np.array([5.0, 15.0, 30.0])[None, :]
    fs = friable_sand(QUARTZ.k, QUARTZ.g, phi, PHIC, N, pressure)
    assert isinstance(fs, Moduli) and fs.k.shape == (5, 3) and fs.g.shape == (5, 3)
    kc = np.array([QUARTZ.k, CALCITE.k])[:, None, None]
    gc = np.array([QUARTZ.g, CALCITE.g])[:, None, None]
    cc = contact_cement(QUARTZ.k, QUARTZ.g, kc, gc, phi, PHIC, N, 2)
    assert cc.k.shape == (2, 5, 1)
    const = constant_cement(QUARTZ.k, QUARTZ.g, kc, gc, phi * 0.9, PHIC, 0.3, N, 1)
    assert const.g.shape == (2, 5, 1)
    sat = gassmann(fs.k, fs.g, QUARTZ.k, np.array([0.05, 2.5, 2.6]), phi)
    assert sat.k.shape == (5, 3) and sat.g.shape == (5, 3)
    f = np.broadcast_to([0.8, 0.2], (4, 2))
    b = hashin_shtrikman_bounds(f, [36.6, 21.0], [45.0, 7.0])
    assert b.k_upper.shape == (4,)
    k_each = friable_sand(QUARTZ.k, QUARTZ.g, phi, PHIC, N, pressure)
    np.testing.assert_allclose(
        k_each.k[2, 1], friable_sand(QUARTZ.k, QUARTZ.g, phi[2, 0], PHIC, N, 15.0).k
    )


def test_hashin_shtrikman_upper_dry_equals_the_general_bound():
    # Independent route: the n-phase bound of this module with a void phase.
    rng = np.random.default_rng(11)
    k = rng.uniform(20, 80, 200)
    g = rng.uniform(5, 45, 200)
    phi = rng.uniform(0, 0.5, 200)
    up = rockphysics.hashin_shtrikman_upper_dry(k, g, phi)
    ref = rockphysics.hashin_shtrikman_bounds(
        np.stack([1 - phi, phi], -1), np.stack([k, 0 * k], -1), np.stack([g, 0 * g], -1))
    np.testing.assert_allclose(up.k, ref.k_upper, rtol=1e-12)
    np.testing.assert_allclose(up.g, ref.g_upper, rtol=1e-12)
