"""Burial, thermal and pressure histories (porecast.physics.burial)."""

import numpy as np
import pytest
import scipy.constants

from porecast.physics.burial import (
    STANDARD_GRAVITY,
    BurialTemplate,
    burial_paths,
    hydrostatic_pressure,
    maximum_depth,
    maximum_effective_stress,
    maximum_temperature,
    onset_age,
    overburden_stress,
    segment_fraction_above,
    time_above,
    time_above_temperature,
)

# Invented scenario: burial from 100 Ma, maximum burial at 20 Ma, uplift until 10 Ma.
TEMPLATE = BurialTemplate(
    ages_ma=(100.0, 50.0, 20.0, 0.0),
    depth_fraction=(0.0, 0.6, 1.0, 1.0),
    uplift_start_ma=20.0,
    uplift_end_ma=10.0,
    surface_temperature_c=4.0,
)


def hand_history():
    return burial_paths(TEMPLATE, 2000.0, 500.0, 35.0, 0.0)


def test_standard_gravity_matches_scipy():
    # scipy.constants.g is the CGPM standard acceleration of gravity.
    assert STANDARD_GRAVITY == scipy.constants.g


def test_hand_computed_path():
    h = hand_history()
    # Merged grid: template ages plus the uplift end age (10 Ma).
    np.testing.assert_array_equal(h.ages_ma, [100.0, 50.0, 20.0, 10.0, 0.0])
    # Max burial 2000 + 500 = 2500 m; 0.6 x 2500 = 1500 m at 50 Ma; present 2000 m from 10 Ma.
    np.testing.assert_allclose(h.depth_m, [0.0, 1500.0, 2500.0, 2000.0, 2000.0])
    # T = 4 + 35 z/1000 (hand arithmetic): 4, 56.5, 91.5, 74, 74 degC.
    np.testing.assert_allclose(h.temperature_c, [4.0, 56.5, 91.5, 74.0, 74.0])
    assert maximum_depth(h) == pytest.approx(2500.0)
    assert maximum_temperature(h) == pytest.approx(4.0 + 35.0 * 2.5)


def test_hand_computed_pressures():
    h = hand_history()
    # Hand arithmetic at 2500 m: overburden 2.30 x 9.80665 x 2.5 = 56.388 MPa,
    # hydrostatic 1.03 x 9.80665 x 2.5 = 25.252 MPa, effective 31.136 MPa.
    assert h.overburden_mpa[2] == pytest.approx(56.3882375)
    assert h.hydrostatic_mpa[2] == pytest.approx(25.25212375)
    assert maximum_effective_stress(h) == pytest.approx(56.3882375 - 25.25212375)
    np.testing.assert_allclose(h.pore_pressure_mpa, h.hydrostatic_mpa)


def test_hydrostatic_at_1000_m():
    # 1.03 g/cm3 x 9.80665 m/s2 x 1000 m = 10.1008 MPa (hand arithmetic).
    assert hydrostatic_pressure(1000.0) == pytest.approx(10.1008495)
    assert overburden_stress(1000.0, 2.30) == pytest.approx(22.555295)


def test_overpressure_follows_factor():
    template = BurialTemplate(
        ages_ma=(60.0, 30.0, 0.0),
        depth_fraction=(0.0, 0.5, 1.0),
        uplift_start_ma=0.0,
        uplift_end_ma=0.0,
        surface_temperature_c=(10.0, 8.0, 5.0),
        overpressure_factor=(0.0, 0.5, 1.0),
    )
    h = burial_paths(template, 3000.0, 0.0, 30.0, 12.0)
    np.testing.assert_allclose(h.pore_pressure_mpa - h.hydrostatic_mpa, [0.0, 6.0, 12.0])
    np.testing.assert_allclose(h.effective_stress_mpa, h.overburden_mpa - h.pore_pressure_mpa)
    # Surface temperature interpolated per age: 8 + 30 x 1.5 = 53 degC at 30 Ma.
    np.testing.assert_allclose(h.temperature_c, [10.0, 53.0, 95.0])


def test_gradient_factor_scales_gradient():
    template = BurialTemplate(
        ages_ma=(50.0, 0.0),
        depth_fraction=(1.0, 1.0),
        uplift_start_ma=0.0,
        uplift_end_ma=0.0,
        surface_temperature_c=0.0,
        gradient_factor=(2.0, 1.0),
    )
    h = burial_paths(template, 1000.0, 0.0, 30.0, 0.0)
    np.testing.assert_allclose(h.temperature_c, [60.0, 30.0])


def test_no_uplift_ends_at_present_depth():
    h = burial_paths(TEMPLATE, 2000.0, 0.0, 35.0, 0.0)
    np.testing.assert_allclose(h.depth_m, [0.0, 1200.0, 2000.0, 2000.0, 2000.0])
    assert maximum_depth(h) == pytest.approx(2000.0)


def test_time_above_and_onset_hand_values():
    h = hand_history()
    # Above 80 degC: rising 56.5 -> 91.5 over 50 -> 20 Ma gives 30 x 11.5/35 Myr,
    # falling 91.5 -> 74 over 20 -> 10 Ma gives 10 x 11.5/17.5 Myr.
    expected = 30.0 * 11.5 / 35.0 + 10.0 * 11.5 / 17.5
    assert time_above(h, 80.0) == pytest.approx(expected)
    # 60 degC first reached at 50 - 30 x 3.5/35 = 47 Ma.
    assert onset_age(h, 60.0) == pytest.approx(47.0)
    assert onset_age(h, 4.0) == pytest.approx(100.0)
    assert np.isnan(onset_age(h, 100.0))


def test_time_above_matches_fine_sampling(rng):
    n_paths, n_times = 20, 9
    ages = np.sort(rng.uniform(0.0, 150.0, n_times - 1))[::-1]
    ages = np.append(ages, 0.0)
    temps = rng.uniform(20.0, 160.0, (n_paths, n_times))
    threshold = 90.0
    exact = time_above_temperature(ages, temps, threshold)
    # Midpoint sampling with 1e5 cells: each threshold crossing can be off by at
    # most one cell, so the tolerance is (crossings + 1) cells.
    n_fine = 100_000
    edges = np.linspace(ages[0], 0.0, n_fine + 1)
    mids = 0.5 * (edges[:-1] + edges[1:])
    cell = ages[0] / n_fine
    for i in range(n_paths):
        fine = np.interp(mids, ages[::-1], temps[i, ::-1])
        sampled = np.count_nonzero(fine >= threshold) * cell
        crossings = np.count_nonzero(np.diff(np.sign(temps[i] - threshold)))
        assert abs(exact[i] - sampled) <= (crossings + 1) * cell


def test_segment_fraction_above_flat_segments():
    np.testing.assert_array_equal(
        segment_fraction_above([80.0, 60.0, 70.0], [80.0, 60.0, 70.0], 70.0), [1.0, 0.0, 1.0]
    )


def test_vectorised_equals_loop(rng):
    n = 50
    depth = rng.uniform(500.0, 5000.0, n)
    uplift = rng.uniform(0.0, 1500.0, n)
    grad = rng.uniform(20.0, 50.0, n)
    op = rng.uniform(0.0, 10.0, n)
    template = BurialTemplate(
        ages_ma=(120.0, 80.0, 40.0, 25.0, 0.0),
        depth_fraction=(0.0, 0.3, 0.8, 1.0, 1.0),
        uplift_start_ma=25.0,
        uplift_end_ma=5.0,
        surface_temperature_c=(15.0, 12.0, 10.0, 8.0, 6.0),
        gradient_factor=(1.2, 1.1, 1.0, 1.0, 1.0),
        overpressure_factor=(0.0, 0.2, 0.6, 1.0, 1.0),
    )
    h = burial_paths(template, depth, uplift, grad, op)
    assert h.depth_m.shape == (n, 6)
    for i in range(n):
        hi = burial_paths(template, depth[i], uplift[i], grad[i], op[i])
        for field in h._fields[1:]:
            np.testing.assert_allclose(getattr(h, field)[i], getattr(hi, field), rtol=1e-14)
        assert time_above(h, 70.0)[i] == pytest.approx(time_above(hi, 70.0))
        ha, hb = onset_age(h, 70.0)[i], onset_age(hi, 70.0)
        assert (np.isnan(ha) and np.isnan(hb)) or ha == pytest.approx(hb)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"present_depth_m": -10.0}, r"present_depth_m must be between 0 and 15000 m"),
        ({"gradient_c_per_km": 500.0}, r"gradient_c_per_km must be between 5 and 120 degC/km"),
        ({"net_uplift_m": -1.0}, r"net_uplift_m must be between 0 and 10000 m"),
        ({"overpressure_mpa": 60.0}, r"pore_pressure_mpa must not exceed overburden_mpa"),
        ({"present_depth_m": np.nan}, r"present_depth_m must be finite"),
    ],
)
def test_bad_location_inputs(kwargs, message):
    args = {"present_depth_m": 2000.0, "net_uplift_m": 500.0, "gradient_c_per_km": 35.0,
            "overpressure_mpa": 0.0}
    args.update(kwargs)
    with pytest.raises(ValueError, match=message):
        burial_paths(TEMPLATE, **args)


def test_overpressure_at_deposition_is_refused():
    # A constant overpressure factor puts 5 MPa of overpressure on a horizon at
    # the surface at deposition: pore pressure above overburden.
    template = BurialTemplate((50.0, 0.0), (0.0, 1.0), 0.0, 0.0, 10.0)
    with pytest.raises(ValueError, match="effective stress must be at least 0 MPa"):
        burial_paths(template, 2000.0, 0.0, 30.0, 5.0)


def test_underpressure_below_zero_pore_pressure_is_refused():
    # 1000 m of hydrostatic water is 10.1 MPa; 20 MPa of underpressure is impossible.
    template = BurialTemplate((50.0, 0.0), (0.0, 1.0), 0.0, 0.0, 10.0,
                              overpressure_factor=(0.0, 1.0))
    with pytest.raises(ValueError, match="must not make pore pressure negative"):
        burial_paths(template, 1000.0, 0.0, 30.0, -20.0)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"ages_ma": (100.0, 20.0, 50.0, 0.0)}, "ages_ma must be strictly decreasing"),
        ({"ages_ma": (100.0, 50.0, 20.0, 5.0)}, "ages_ma must end at 0 Ma"),
        ({"depth_fraction": (0.0, 0.6, 1.2, 1.0)}, "depth_fraction must be between 0 and 1"),
        ({"depth_fraction": (0.0, 0.6, 0.9, 1.0)}, "depth_fraction must be 1 at uplift_start_ma"),
        ({"depth_fraction": (0.0, 1.0)}, "depth_fraction must be a single value or one value"),
        ({"uplift_end_ma": 30.0}, "uplift_end_ma must be between 0 and 20 Ma"),
        ({"uplift_start_ma": 150.0}, "uplift_start_ma must be between 0 and 100 Ma"),
        ({"uplift_end_ma": 20.0}, "uplift_start_ma must be greater than uplift_end_ma"),
        ({"surface_temperature_c": 80.0}, "surface_temperature_c must be between -20 and 50"),
        ({"gradient_factor": 0.0}, "gradient_factor must be between 0.1 and 5"),
    ],
)
def test_bad_template(kwargs, message):
    args = {"ages_ma": (100.0, 50.0, 20.0, 0.0), "depth_fraction": (0.0, 0.6, 1.0, 1.0),
            "uplift_start_ma": 20.0, "uplift_end_ma": 10.0, "surface_temperature_c": 4.0}
    args.update(kwargs)
    with pytest.raises(ValueError, match=message):
        BurialTemplate(**args)


def test_time_above_refuses_increasing_ages():
    with pytest.raises(ValueError, match="age_ma must be strictly decreasing"):
        time_above_temperature([0.0, 10.0], [50.0, 60.0], 55.0)


def test_template_is_hashable_and_comparable():
    same = BurialTemplate((100, 50, 20, 0), [0, 0.6, 1, 1], 20, 10, 4)
    assert same == TEMPLATE
    assert hash(same) == hash(TEMPLATE)
