"""Walderhaug (1996) quartz cementation (porecast.physics.diagenesis)."""

import numpy as np
import pytest
import scipy.constants
from scipy.integrate import solve_ivp

from porecast.physics.burial import BurialTemplate, burial_paths
from porecast.physics.diagenesis import (
    QUARTZ_DENSITY_G_PER_CM3,
    QUARTZ_MOLAR_MASS_G_PER_MOL,
    SECONDS_PER_MA,
    WALDERHAUG_A_MOL_PER_CM2_S,
    WALDERHAUG_B_PER_C,
    bulk_quartz_fraction,
    quartz_cement,
    walderhaug_exposure,
    walderhaug_precipitation_rate,
    walderhaug_rate_constant,
    walderhaug_surface_area,
)

# Clean, fine quartz sand (common practice): 90 % of grains quartz, 5 % coated,
# 0.25 mm, 30 % porosity at the onset of cementation.
CLEAN_SAND = {
    "grain_size_mm": 0.25,
    "quartz_fraction": 0.9 * (1.0 - 0.30),
    "coating_fraction": 0.05,
    "porosity_onset": 0.30,
}


def held_path(hold_c, hold_myr, ramp_myr=1.0, start_c=20.0):
    """Ramp from ``start_c`` to ``hold_c``, hold, ramp back; ages in Ma ending at 0."""
    ages = np.array([hold_myr + 2 * ramp_myr, hold_myr + ramp_myr, ramp_myr, 0.0])
    return ages, np.array([start_c, hold_c, hold_c, start_c])


def ode_cement(ages, temps, *, grain_size_mm, quartz_fraction, coating_fraction,
               porosity_onset, onset_c=70.0):
    """Solve Walderhaug's rate law dVq/dt = M A0 (1 - Vq/phi0) a 10^(bT) / rho_q numerically."""
    # Walderhaug (1996): A0 = 6 (1 - C) f V / D with V = 1 cm3 and D in cm.
    area0 = 6.0 * (1.0 - coating_fraction) * quartz_fraction / (grain_size_mm / 10.0)
    elapsed = ages[0] - ages  # Myr since the oldest age, increasing

    def rhs(tau, v):
        t = np.interp(tau, elapsed, temps)
        if t < onset_c:
            return [0.0]
        rate = WALDERHAUG_A_MOL_PER_CM2_S * 10.0 ** (WALDERHAUG_B_PER_C * t)  # mol/(cm2 s)
        area = area0 * (1.0 - v[0] / porosity_onset)
        dv_per_s = QUARTZ_MOLAR_MASS_G_PER_MOL * area * rate / QUARTZ_DENSITY_G_PER_CM3
        return [dv_per_s * SECONDS_PER_MA]

    values = [0.0]
    # Restart at every control age (kinks of T) so the solver never steps across one.
    for j in range(len(ages) - 1):
        sol = solve_ivp(rhs, (elapsed[j], elapsed[j + 1]), [values[-1]], method="DOP853",
                        rtol=1e-12, atol=1e-15, dense_output=True)
        assert sol.success
        values.append(float(sol.sol(elapsed[j + 1])[0]))
    return np.array(values)


def test_seconds_per_ma_is_a_million_julian_years():
    assert SECONDS_PER_MA == pytest.approx(1e6 * scipy.constants.Julian_year, rel=1e-15)


def test_closed_form_matches_ode_on_random_paths(rng):
    n_paths = 24
    for _ in range(n_paths):
        n_times = int(rng.integers(4, 11))
        ages = np.append(np.sort(rng.uniform(1.0, 120.0, n_times - 1))[::-1], 0.0)
        temps = rng.uniform(30.0, 160.0, n_times)
        params = {
            "grain_size_mm": rng.uniform(0.05, 1.0),
            "quartz_fraction": rng.uniform(0.2, 0.65),
            "coating_fraction": rng.uniform(0.0, 0.9),
            "porosity_onset": rng.uniform(0.1, 0.35),
            "onset_c": rng.uniform(60.0, 100.0),
        }
        closed = quartz_cement(ages, temps, **params)
        numeric = ode_cement(ages, temps, **params)
        np.testing.assert_allclose(closed, numeric, rtol=1e-6, atol=1e-12)


def test_vectorised_matches_one_path_at_a_time(rng):
    n, n_times = 40, 8
    ages = np.append(np.sort(rng.uniform(1.0, 100.0, n_times - 1))[::-1], 0.0)
    temps = rng.uniform(30.0, 150.0, (n, n_times))
    grain = rng.uniform(0.1, 0.5, n)
    coat = rng.uniform(0.0, 0.5, n)
    onset = rng.uniform(65.0, 85.0, n)
    all_paths = quartz_cement(ages, temps, grain_size_mm=grain, quartz_fraction=0.6,
                              coating_fraction=coat, porosity_onset=0.3, onset_c=onset)
    assert all_paths.shape == (n, n_times)
    for i in range(n):
        one = quartz_cement(ages, temps[i], grain_size_mm=grain[i], quartz_fraction=0.6,
                            coating_fraction=coat[i], porosity_onset=0.3, onset_c=onset[i])
        np.testing.assert_allclose(all_paths[i], one, rtol=1e-14, atol=0.0)


def test_per_path_ages_broadcast_against_one_temperature_path():
    ages = np.array([[30.0, 10.0, 0.0], [60.0, 20.0, 0.0]])
    temps = np.array([20.0, 120.0, 90.0])
    both = quartz_cement(ages, temps, **CLEAN_SAND)
    assert both.shape == (2, 3)
    np.testing.assert_allclose(both[1], quartz_cement(ages[1], temps, **CLEAN_SAND), rtol=1e-15)
    assert both[1, -1] > both[0, -1]


def test_hand_computed_isothermal_cement():
    # 20 Myr at 110 degC, hand arithmetic from the definitions of Walderhaug (1996):
    # A0 = 6 x 0.95 x 0.63 / 0.025 cm = 143.64 cm2/cm3,
    # k = 60.0843 x 143.64 x 1.98e-22 x 3.15576e13 / (2.65 x 0.30) = 6.783e-5 per Ma,
    # Vq = 0.30 (1 - exp(-k x 20 x 10^(0.022 x 110))) = 0.0904 during the hold.
    ages = np.array([20.0, 0.0])
    temps = np.array([110.0, 110.0])
    cement = quartz_cement(ages, temps, **CLEAN_SAND)
    k = 60.0843 * 143.64 * 1.98e-22 * 3.15576e13 / (2.65 * 0.30)
    assert k == pytest.approx(6.783e-5, rel=1e-3)
    expected = 0.30 * (1.0 - np.exp(-k * 20.0 * 10.0 ** 2.42))
    assert cement[-1] == pytest.approx(expected, rel=1e-12)


def test_twenty_myr_at_110c_gives_several_percent(capsys):
    # Common practice: a clean fine sand held ~20 Myr near 110 degC carries
    # roughly 5-15 % quartz cement.
    ages, temps = held_path(110.0, 20.0)
    cement = quartz_cement(ages, temps, **CLEAN_SAND)[-1]
    with capsys.disabled():
        print(f"\n20 Myr at 110 degC, clean fine sand: {100 * cement:.1f} % quartz cement")
    assert 0.05 <= cement <= 0.15


def test_thirty_myr_above_100c_gives_several_percent():
    # Common practice: ~30 Myr above 100 degC gives several percent (3-15 %).
    ages, temps = held_path(100.0, 30.0)
    cement = quartz_cement(ages, temps, **CLEAN_SAND)[-1]
    assert 0.03 <= cement <= 0.15


def test_sand_uplifted_before_onset_gains_no_cement():
    template = BurialTemplate(
        ages_ma=(80.0, 40.0, 0.0),
        depth_fraction=(0.0, 1.0, 1.0),
        uplift_start_ma=40.0,
        uplift_end_ma=20.0,
        surface_temperature_c=8.0,
    )
    # Maximum burial 1800 m at 32 degC/km: 8 + 57.6 = 65.6 degC, below 70 degC.
    h = burial_paths(template, 1000.0, 800.0, 32.0, 0.0)
    assert h.temperature_c.max() < 70.0
    cement = quartz_cement(h.ages_ma, h.temperature_c, **CLEAN_SAND)
    np.testing.assert_array_equal(cement, 0.0)


def test_cement_never_decreases_in_time(rng):
    ages = np.append(np.sort(rng.uniform(1.0, 150.0, 11))[::-1], 0.0)
    temps = rng.uniform(40.0, 180.0, (200, 12))
    cement = quartz_cement(ages, temps, **CLEAN_SAND)
    assert np.all(np.diff(cement, axis=-1) >= 0.0)
    assert np.all(cement[:, 0] == 0.0)


def test_fully_coated_grains_gain_no_cement():
    ages, temps = held_path(140.0, 50.0)
    params = dict(CLEAN_SAND, coating_fraction=1.0)
    np.testing.assert_array_equal(quartz_cement(ages, temps, **params), 0.0)


def test_cement_never_exceeds_onset_porosity():
    ages, temps = held_path(200.0, 300.0)
    cement = quartz_cement(ages, temps, **CLEAN_SAND)
    assert np.all(cement <= CLEAN_SAND["porosity_onset"])
    # Long hot burial fills the pores almost completely.
    assert cement[-1] == pytest.approx(CLEAN_SAND["porosity_onset"], rel=1e-6)


def test_onset_crossing_inside_segment_counts_only_time_above():
    # Ramp 50 -> 90 degC over 40 Myr crosses 70 degC half way; the integral of
    # 10^(bT) over the upper half is (10^(90b) - 10^(70b)) / (b ln10 x 1 degC/Myr).
    b = WALDERHAUG_B_PER_C
    exposure = walderhaug_exposure([40.0, 0.0], [50.0, 90.0])
    expected = (10 ** (90 * b) - 10 ** (70 * b)) / (b * np.log(10.0) * 1.0)
    assert exposure[-1] == pytest.approx(expected, rel=1e-13)


def test_nearly_isothermal_segment_is_accurate():
    # dT = 1e-9 degC over 10 Myr must give 10 x 10^(100b) without cancellation.
    exposure = walderhaug_exposure([10.0, 0.0], [100.0, 100.0 + 1e-9])
    assert exposure[-1] == pytest.approx(10.0 * 10 ** (100 * WALDERHAUG_B_PER_C), rel=1e-9)


def test_rate_and_area_building_blocks():
    # r = a 10^(b T): at 100 degC 1.98e-22 x 10^2.2 mol/(cm2 s) (hand arithmetic).
    assert walderhaug_precipitation_rate(100.0) == pytest.approx(1.98e-22 * 10 ** 2.2)
    # A0 = 6 x 0.95 x 0.63 / 0.025 cm.
    assert walderhaug_surface_area(0.25, 0.63, 0.05) == pytest.approx(143.64)
    assert bulk_quartz_fraction(0.9, 0.3) == pytest.approx(0.63)
    # Coarser grains have less surface and cement more slowly.
    coarse = walderhaug_rate_constant(0.5, 0.6, 0.0, 0.3)
    fine = walderhaug_rate_constant(0.1, 0.6, 0.0, 0.3)
    assert coarse == pytest.approx(fine / 5.0)


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"grain_size_mm": 0.0}, r"grain_size_mm must be between 0.01 and 5 mm"),
        ({"grain_size_mm": 25.0}, r"grain_size_mm must be between 0.01 and 5 mm"),
        ({"quartz_fraction": 1.5}, r"quartz_fraction must be between 0 and 1"),
        ({"coating_fraction": -0.1}, r"coating_fraction must be between 0 and 1"),
        ({"porosity_onset": 0.0}, r"porosity_onset must be between 0 and 0.6 \(0 excluded\)"),
        ({"porosity_onset": 30.0}, r"porosity_onset must be between 0 and 0.6"),
        ({"quartz_fraction": 0.9}, r"quartz_fraction must be at most 1 - porosity_onset"),
        ({"onset_c": 30.0}, r"onset_c must be between 40 and 150 degC"),
        ({"age_ma": [0.0, 10.0, 20.0]}, r"age_ma must be strictly decreasing"),
        ({"age_ma": [20.0, 20.0, 0.0]}, r"age_ma must be strictly decreasing"),
        ({"temperature_c": [20.0, np.nan, 20.0]}, r"temperature_c must be finite"),
        ({"temperature_c": [20.0, 90.0]}, r"temperature_c must have one value per age"),
        ({"rate_exponent_per_c": 0.0}, r"rate_exponent_per_c must be between 0 and 0.1"),
    ],
)
def test_bad_inputs(change, message):
    args = dict(CLEAN_SAND, age_ma=[30.0, 10.0, 0.0], temperature_c=[20.0, 110.0, 90.0])
    args.update(change)
    age = args.pop("age_ma")
    temp = args.pop("temperature_c")
    with pytest.raises(ValueError, match=message):
        quartz_cement(age, temp, **args)
