"""Mechanical compaction (porecast.physics.compaction)."""

import numpy as np
import pytest

from porecast.physics.burial import STANDARD_GRAVITY, BurialTemplate, burial_paths
from porecast.physics.compaction import (
    SCLATER_CHRISTIE,
    athy_depth,
    athy_stress,
    mechanical_porosity,
)

# Invented burial then uplift: maximum burial at 30 Ma, uplift until 10 Ma.
TEMPLATE = BurialTemplate(
    ages_ma=(90.0, 60.0, 30.0, 0.0),
    depth_fraction=(0.0, 0.5, 1.0, 1.0),
    uplift_start_ma=30.0,
    uplift_end_ma=10.0,
    surface_temperature_c=5.0,
)


def test_sclater_christie_sandstone_at_2_km():
    # Sclater & Christie (1980) sandstone, phi0 0.49, c 0.27/km (from memory):
    # 0.49 exp(-0.54) at 2 km (hand arithmetic).
    phi0, c = SCLATER_CHRISTIE["sandstone"]
    assert athy_depth(2000.0, phi0, c) == pytest.approx(0.49 * np.exp(-0.54), rel=1e-14)
    assert athy_depth(2000.0, phi0, c) == pytest.approx(0.2856, abs=1e-4)


def test_sclater_christie_shale_and_chalk_at_2_km():
    # Shale 0.63 exp(-1.02), chalk 0.70 exp(-1.42) (hand arithmetic).
    assert athy_depth(2000.0, *SCLATER_CHRISTIE["shale"]) == pytest.approx(0.63 * np.exp(-1.02))
    assert athy_depth(2000.0, *SCLATER_CHRISTIE["chalk"]) == pytest.approx(0.70 * np.exp(-1.42))


def test_surface_porosity_at_zero_burial():
    assert athy_stress(0.0, 0.45, 0.03) == pytest.approx(0.45)
    assert athy_depth(0.0, 0.45, 0.3) == pytest.approx(0.45)


def test_uplift_does_not_restore_porosity():
    h = burial_paths(TEMPLATE, [1500.0, 2500.0], [1000.0, 0.0], 30.0, 0.0)
    phi = mechanical_porosity(h, porosity_surface=0.45, mode="depth",
                              compaction_coefficient_per_km=0.4)
    at_max = athy_depth(2500.0, 0.45, 0.4)
    # Path 0 goes 2500 m -> 1500 m between 30 and 10 Ma: porosity stays at the maximum-burial value.
    np.testing.assert_allclose(phi[0, 2:], at_max, rtol=1e-14)
    # Reversible Athy on the present depth would give more porosity.
    assert athy_depth(1500.0, 0.45, 0.4) > phi[0, -1] + 0.05
    # Porosity never increases forward in time.
    assert np.all(np.diff(phi, axis=-1) <= 0.0)


def test_running_maximum_on_plain_array():
    stress = np.array([[0.0, 20.0, 35.0, 10.0, 30.0]])
    phi = mechanical_porosity(stress, porosity_surface=0.4, compaction_coefficient_per_mpa=0.02)
    expected = 0.4 * np.exp(-0.02 * np.array([0.0, 20.0, 35.0, 35.0, 35.0]))
    np.testing.assert_allclose(phi[0], expected, rtol=1e-14)


def test_depth_and_stress_forms_agree_for_hydrostatic_gradient():
    rho_b, rho_w = 2.30, 1.03
    h = burial_paths(TEMPLATE, np.array([1000.0, 2000.0, 3500.0]), np.array([0.0, 800.0, 300.0]),
                     32.0, 0.0, overburden_density=rho_b, water_density=rho_w)
    c_per_km = 0.27
    # Hydrostatic effective-stress gradient (rho_b - rho_w) g / 1000 MPa/m, so beta = c / gradient.
    beta = c_per_km / ((rho_b - rho_w) * STANDARD_GRAVITY)
    by_depth = mechanical_porosity(h, porosity_surface=0.49, mode="depth",
                                   compaction_coefficient_per_km=c_per_km)
    by_stress = mechanical_porosity(h, porosity_surface=0.49, mode="stress",
                                    compaction_coefficient_per_mpa=beta)
    np.testing.assert_allclose(by_stress, by_depth, rtol=1e-12)


def test_overpressure_preserves_porosity():
    template = BurialTemplate((60.0, 0.0), (0.0, 1.0), 0.0, 0.0, 5.0,
                              overpressure_factor=(0.0, 1.0))
    normal = burial_paths(template, 3000.0, 0.0, 30.0, 0.0)
    over = burial_paths(template, 3000.0, 0.0, 30.0, 15.0)
    kw = {"porosity_surface": 0.49, "compaction_coefficient_per_mpa": 0.02}
    assert mechanical_porosity(over, **kw)[-1] > mechanical_porosity(normal, **kw)[-1]


def test_per_path_parameters_broadcast():
    depth = np.array([[0.0, 1000.0, 2000.0], [0.0, 500.0, 3000.0]])
    phi = mechanical_porosity(depth, mode="depth", porosity_surface=np.array([0.49, 0.63]),
                              compaction_coefficient_per_km=np.array([0.27, 0.51]))
    assert phi[1, 2] == pytest.approx(0.63 * np.exp(-0.51 * 3.0))
    assert phi[0, 1] == pytest.approx(0.49 * np.exp(-0.27))


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: athy_depth(-5.0, 0.49, 0.27), "depth_m must be between 0 and 15000 m"),
        (lambda: athy_depth(1000.0, 49.0, 0.27), "porosity_surface must be between 0 and 0.9"),
        (lambda: athy_depth(1000.0, 0.0, 0.27), "porosity_surface must be between 0 and 0.9"),
        (lambda: athy_depth(1000.0, 0.49, -0.1), "compaction_coefficient_per_km must be between"),
        (lambda: athy_stress(-1.0, 0.49, 0.02), "effective_stress_mpa must be between 0 and 500"),
        (lambda: athy_stress(10.0, 0.49, 2.0), "compaction_coefficient_per_mpa must be between"),
        (lambda: athy_stress(np.inf, 0.49, 0.02), "effective_stress_mpa must be finite"),
        (lambda: mechanical_porosity([[0.0, 10.0]], porosity_surface=0.4, mode="volume",
                                     compaction_coefficient_per_mpa=0.02), "mode must be"),
        (lambda: mechanical_porosity([[0.0, 10.0]], porosity_surface=0.4,
                                     compaction_coefficient_per_km=0.3),
         "mode='stress' needs compaction_coefficient_per_mpa"),
        (lambda: mechanical_porosity([[0.0, 10.0]], porosity_surface=0.4, mode="depth",
                                     compaction_coefficient_per_mpa=0.02),
         "mode='depth' needs compaction_coefficient_per_km"),
        (lambda: mechanical_porosity(5.0, porosity_surface=0.4,
                                     compaction_coefficient_per_mpa=0.02), "path must have a time"),
    ],
)
def test_bad_inputs(call, message):
    with pytest.raises(ValueError, match=message):
        call()
