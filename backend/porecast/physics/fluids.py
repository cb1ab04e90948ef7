"""Pore-fluid properties after Batzle & Wang (1992) and Wood (1955) mixing.

Batzle, M. and Wang, Z., 1992, Seismic properties of pore fluids, Geophysics
57(11), 1396-1408 ("B&W"). Equation numbers below are those of the paper.
Arguments are in degC, MPa, ppm NaCl, degrees API, gas gravity relative to
air, and gas-oil ratio in standard m3 of gas per m3 of stock-tank oil; results
are in g/cm3, m/s and GPa. Every public function broadcasts its arguments.

Validity ranges (inputs outside raise ``ValueError``)
-----------------------------------------------------
pressure_mpa, 0.1 to 100 MPa
    The upper end is where B&W fit the water velocity (eq 28, Table 1: to
    100 degC and 100 MPa). Measured against IAPWS-95, eq 28 is off by up to
    10 % at 150 MPa below 150 degC (27 % at 250 degC) and by up to 100 % at
    200 MPa, and the oil pressure term (eq 18)
    turns over (density falling with pressure) near 90-115 MPa, so no fluid
    is offered beyond 100 MPa. 0.1 MPa is atmospheric pressure.
temperature_c, 0 to 250 degC (brine, gas), 0 to 150 degC (oil)
    B&W fit eq 28 to 100 degC; their density data reach 350 degC. Measured
    against IAPWS-95 for liquid water at 1-100 MPa, eqs 27a and 28 stay within
    0.7 % (density) and 1.5 % (velocity) up to 250 degC, but degrade quickly
    above (velocity -7 % at 350 degC), hence 250 degC. Brine is further
    refused where the pressure is below the vapour pressure of pure water
    (IAPWS-IF97 eq 30): the liquid correlations mean nothing for steam.
    Oil stops at 150 degC: liquid oil is rarely found hotter (it cracks to gas
    in the range 150-175 degC, common practice), and beyond it the T*P cross
    terms of eqs 20a and 22 take over (light gas-rich oil reaches 3300 m/s
    at 250 degC and 100 MPa, or below zero at low pressure).
salinity_ppm, 0 to 350 000 ppm
    Halite saturates near 264 000 ppm at 25 degC and above 300 000 ppm at
    the hottest temperatures accepted here (handbook solubility, from
    memory); 350 000 ppm leaves a margin above every reachable brine.
gravity / gas_gravity, 0.55 to 1.8
    0.554 is pure methane (16.04 / 28.97), the lightest hydrocarbon gas; 1.8
    leaves room for rich wet gases (pure propane is 1.52). Gas is further
    refused where the pseudo-reduced temperature is below 1.05, the lowest
    isotherm of the Standing-Katz Z chart that B&W's eq 10 approximates
    (from memory); below it heavy "gases" are liquid or two-phase, and
    eqs 10-11 were measured to return negative moduli there.
api, 5 to 80 degrees API
    Extra-heavy oil (density 1.04 g/cm3) to light condensate (0.67 g/cm3).
gor, 0 to 500 m3/m3
    Black oils to volatile oils (about 2800 scf/bbl); common practice.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from porecast.physics._checks import FloatArray, in_range

__all__ = [
    "FluidProperties",
    "brine",
    "gas",
    "gas_isothermal_modulus",
    "oil",
    "oil_gas_solubility",
    "wood",
    "mix_density",
]

TEMPERATURE_RANGE_C = (0.0, 250.0)
OIL_TEMPERATURE_RANGE_C = (0.0, 150.0)
PRESSURE_RANGE_MPA = (0.1, 100.0)
SALINITY_RANGE_PPM = (0.0, 350_000.0)
GAS_GRAVITY_RANGE = (0.55, 1.8)
API_RANGE = (5.0, 80.0)
GOR_RANGE = (0.0, 500.0)
MIN_PSEUDO_REDUCED_TEMPERATURE = 1.05
FRACTION_SUM_TOLERANCE = 1e-6

# Gas constant, J/(mol K), as printed beside B&W eq 10a (from memory).
_R_GAS = 8.31441
_KELVIN = 273.15


class FluidProperties(NamedTuple):
    """Bulk properties of a single pore fluid.

    Attributes
    ----------
    density : ndarray
        Density, g/cm3.
    velocity : ndarray
        P-wave velocity, m/s.
    modulus : ndarray
        Adiabatic bulk modulus, GPa.
    """

    density: FloatArray
    velocity: FloatArray
    modulus: FloatArray


def _modulus_gpa(density: FloatArray, velocity: FloatArray) -> FloatArray:
    """K = rho v^2 in GPa from g/cm3 and m/s (1 g/cm3 * (m/s)^2 = 1e-6 GPa)."""
    return density * velocity**2 * 1e-6


def _temperature_pressure(
    temperature_c: ArrayLike,
    pressure_mpa: ArrayLike,
    t_range: tuple[float, float] = TEMPERATURE_RANGE_C,
) -> tuple[FloatArray, FloatArray]:
    t = in_range("temperature_c", temperature_c, *t_range, unit="degC")
    p = in_range("pressure_mpa", pressure_mpa, *PRESSURE_RANGE_MPA, unit="MPa")
    return t, p


# ---------------------------------------------------------------------- brine

# w[i, j] multiplies T^i P^j (degC, MPa) in B&W eq 28. Coefficients from
# memory of B&W 1992 Table 1; the tests check them against IAPWS-95.
_W_WATER = np.array(
    [
        [1402.85, 1.524, 3.437e-3, -1.197e-5],
        [4.871, -0.0111, 1.739e-4, -1.628e-6],
        [-0.04783, 2.747e-4, -2.135e-6, 1.237e-8],
        [1.487e-4, -6.503e-7, -1.455e-8, 1.327e-10],
        [-2.197e-7, 7.987e-10, 5.230e-11, -4.614e-13],
    ]
)

# IAPWS-IF97 (IAPWS R7-97, 2012 revision) Table 34, coefficients n1..n10 of
# the saturation equation, eq 30.
_N_SAT = (
    0.11670521452767e4,
    -0.72421316703206e6,
    -0.17073846940092e2,
    0.12020824702470e5,
    -0.32325550322333e7,
    0.14915108613530e2,
    -0.48232657361591e4,
    0.40511340542057e6,
    -0.23855557567849,
    0.65017534844798e3,
)


# Water boils at 0.1 MPa, the lowest accepted pressure, at 99.6 degC (IAPWS-IF97):
# no accepted state at or below 99 degC is steam.
_STEAM_POSSIBLE_ABOVE_C = 99.0


def _water_saturation_pressure(t: FloatArray) -> FloatArray:
    """Vapour pressure of pure water, IAPWS-IF97 eq 30 (valid 0-374 degC).

    Parameters
    ----------
    t : ndarray
        Temperature, degC.

    Returns
    -------
    ndarray
        Saturation pressure, MPa.
    """
    n1, n2, n3, n4, n5, n6, n7, n8, n9, n10 = _N_SAT
    tk = np.asarray(t, dtype=np.float64) + _KELVIN
    theta = tk + n9 / (tk - n10)
    a = theta**2 + n1 * theta + n2
    b = n3 * theta**2 + n4 * theta + n5
    c = n6 * theta**2 + n7 * theta + n8
    return (2.0 * c / (-b + np.sqrt(b**2 - 4.0 * a * c))) ** 4


def _water_density(t: FloatArray, p: FloatArray) -> FloatArray:
    """Pure-water density (g/cm3) at t degC, p MPa: B&W eq 27a.

    The terms of eq 27a are grouped by powers of P and nested in T.
    """
    in_t = t * (-80.0 + t * (-3.3 + 0.00175 * t))
    in_p = p * (489.0 + t * (-2.0 + t * (0.016 - 1.3e-5 * t)) - p * (0.333 + 0.002 * t))
    return 1.0 + 1e-6 * (in_t + in_p)


def _brine_density(t: FloatArray, p: FloatArray, s: FloatArray) -> FloatArray:
    """NaCl-brine density (g/cm3), s = weight fraction: B&W eq 27b."""
    return _water_density(t, p) + s * (
        0.668
        + 0.44 * s
        + 1e-6
        * (300.0 * p - 2400.0 * p * s + t * (80.0 + 3.0 * t - 3300.0 * s - 13.0 * p + 47.0 * p * s))
    )


def _water_velocity(t: FloatArray, p: FloatArray) -> FloatArray:
    """Pure-water velocity (m/s): B&W eq 28, sum of w_ij T^i P^j (Table 1).

    Horner's rule in temperature over rows that are cubics in pressure, with
    the pressure powers computed once and the sums done in place.
    """
    p2 = p * p
    p3 = p2 * p
    velocity = np.zeros(np.broadcast(t, p).shape)
    for w in _W_WATER[::-1]:
        velocity *= t
        velocity += w[0]
        velocity += w[1] * p
        velocity += w[2] * p2
        velocity += w[3] * p3
    return velocity


def _brine_velocity(t: FloatArray, p: FloatArray, s: FloatArray) -> FloatArray:
    """NaCl-brine velocity (m/s), s = weight fraction: B&W eq 29."""
    salt = 1170.0 + t * (-9.6 + t * (0.055 - 8.5e-5 * t)) + p * (2.6 - 0.0029 * t - 0.0476 * p)
    salt_15 = 780.0 + p * (-10.0 + 0.16 * p)
    return _water_velocity(t, p) + s * (salt + np.sqrt(s) * salt_15 - 1820.0 * s)


def brine(
    temperature_c: ArrayLike, pressure_mpa: ArrayLike, salinity_ppm: ArrayLike
) -> FluidProperties:
    """Density, velocity and bulk modulus of NaCl brine, Batzle & Wang (1992).

    Density from eqs 27a-27b, velocity from eqs 28 (Table 1) and 29, and
    K = rho v^2. Salinity is converted from ppm to the weight fraction the
    paper uses (S = ppm / 1e6).

    Parameters
    ----------
    temperature_c : array_like
        Temperature, degC, 0 to 250.
    pressure_mpa : array_like
        Pore pressure, MPa, 0.1 to 100, and above the vapour pressure of
        pure water at ``temperature_c``.
    salinity_ppm : array_like
        NaCl concentration, ppm by weight (mg/kg), 0 to 350 000.

    Returns
    -------
    FluidProperties
        density g/cm3, velocity m/s, modulus GPa, broadcast over the inputs.

    Raises
    ------
    ValueError
        For non-finite or out-of-range input, or steam conditions.
    """
    t, p = _temperature_pressure(temperature_c, pressure_mpa)
    ppm = in_range("salinity_ppm", salinity_ppm, *SALINITY_RANGE_PPM, unit="ppm")
    t, p, ppm = np.broadcast_arrays(t, p, ppm)
    # Only elements hotter than _STEAM_POSSIBLE_ABOVE_C can be below the
    # vapour pressure; evaluating eq 30 on those alone keeps the check cheap.
    hot = np.flatnonzero(t > _STEAM_POSSIBLE_ABOVE_C)
    if hot.size:
        t_hot, p_hot = t.flat[hot], p.flat[hot]
        p_sat = _water_saturation_pressure(t_hot)
        steam = np.flatnonzero(p_hot < p_sat)
        if steam.size:
            i = steam[0]
            raise ValueError(
                "pressure_mpa must be above the vapour pressure of water at temperature_c"
                f" (got {p_hot[i]:g} MPa at {t_hot[i]:g} degC, vapour pressure"
                f" {p_sat[i]:.3g} MPa)"
            )
    s = ppm * 1e-6
    density = _brine_density(t, p, s)
    velocity = _brine_velocity(t, p, s)
    return FluidProperties(density, velocity, _modulus_gpa(density, velocity))


# ------------------------------------------------------------------------ gas


def _pseudo_reduced(t: FloatArray, p: FloatArray, g: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Pseudo-reduced temperature and pressure: B&W eqs 9a and 9b."""
    tpr = (t + _KELVIN) / (94.72 + 170.75 * g)
    ppr = p / (4.892 - 0.4048 * g)
    return tpr, ppr


def _z_factor(tpr: FloatArray, ppr: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Compressibility factor Z and dZ/dPpr at constant Tpr: B&W eqs 10b-10c."""
    a = 0.03 + 0.00527 * (3.5 - tpr) ** 3
    b = 0.642 * tpr - 0.007 * tpr**4 - 0.52
    c = 0.109 * (3.85 - tpr) ** 2
    f = (0.45 + 8.0 * (0.56 - 1.0 / tpr) ** 2) / tpr
    ppr_02 = ppr**0.2
    e = c * np.exp(-f * ppr * ppr_02)
    z = a * ppr + b + e
    dz_dppr = a - 1.2 * f * ppr_02 * e
    return z, dz_dppr


def _gamma0(ppr: FloatArray) -> FloatArray:
    """Heat-capacity-ratio fit gamma0 of B&W eq 11b (a function of Ppr only)."""
    return 0.85 + 5.6 / (ppr + 2.0) + 27.1 / (ppr + 3.5) ** 2 - 8.7 * np.exp(-0.65 * (ppr + 1.0))


def _gas_state(
    temperature_c: ArrayLike, pressure_mpa: ArrayLike, gravity: ArrayLike
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray, FloatArray, FloatArray]:
    """Checked, broadcast inputs plus Ppr, Z and dZ/dPpr."""
    t, p = _temperature_pressure(temperature_c, pressure_mpa)
    g = in_range("gravity", gravity, *GAS_GRAVITY_RANGE)
    t, p, g = np.broadcast_arrays(t, p, g)
    tpr, ppr = _pseudo_reduced(t, p, g)
    cold = tpr < MIN_PSEUDO_REDUCED_TEMPERATURE
    if np.any(cold):
        i = np.flatnonzero(cold)[0]
        t_min = MIN_PSEUDO_REDUCED_TEMPERATURE * (94.72 + 170.75 * g.flat[i]) - _KELVIN
        raise ValueError(
            f"temperature_c must be at least {t_min:.1f} degC for gravity {g.flat[i]:g}"
            f" (pseudo-reduced temperature at least {MIN_PSEUDO_REDUCED_TEMPERATURE:g};"
            f" got {t.flat[i]:g} degC)"
        )
    z, dz_dppr = _z_factor(tpr, ppr)
    return t, p, g, ppr, z, dz_dppr


def gas(temperature_c: ArrayLike, pressure_mpa: ArrayLike, gravity: ArrayLike) -> FluidProperties:
    """Density, velocity and adiabatic bulk modulus of hydrocarbon gas, B&W (1992).

    Pseudo-reduced state from eqs 9a-9b, Z from eqs 10b-10c, density
    rho = 28.8 G P / (Z R T) (eq 10a) and the adiabatic modulus
    K_S = P gamma0 / (1 - Ppr/Z dZ/dPpr) (eqs 11a-11b); velocity sqrt(K_S/rho).

    Parameters
    ----------
    temperature_c : array_like
        Temperature, degC, 0 to 250, and with (T + 273.15) / (94.72 +
        170.75 G) at least 1.05.
    pressure_mpa : array_like
        Pore pressure, MPa, 0.1 to 100.
    gravity : array_like
        Gas gravity, gas density over air density at standard conditions,
        0.55 to 1.8.

    Returns
    -------
    FluidProperties
        density g/cm3, velocity m/s, modulus GPa (adiabatic).

    Notes
    -----
    Measured against CoolProp's methane (G = 0.554, 20-150 degC, 10-60 MPa;
    see tests/physics/test_fluids.py) the density is within 1.5 %, but the
    adiabatic modulus is off by -19 % to +40 %: eq 11b makes gamma0 a
    function of Ppr alone, while the true heat-capacity ratio of methane
    falls with temperature (1.70 at 20 degC and 10 MPa, 1.34 at 150 degC;
    eq 11b gives 1.93 for both). The isothermal modulus
    (:func:`gas_isothermal_modulus`) is within 5 %.
    """
    t, p, g, ppr, z, dz_dppr = _gas_state(temperature_c, pressure_mpa, gravity)
    # eq 10a; 28.8 g/mol is B&W's molar mass of air, and MPa g/mol / (J/mol) = g/cm3
    density = 28.8 * g * p / (z * _R_GAS * (t + _KELVIN))
    modulus = p * _gamma0(ppr) / (1.0 - ppr / z * dz_dppr) * 1e-3
    velocity = np.sqrt(modulus / density) * 1e3
    return FluidProperties(density, velocity, modulus)


def gas_isothermal_modulus(
    temperature_c: ArrayLike, pressure_mpa: ArrayLike, gravity: ArrayLike
) -> FloatArray:
    """Isothermal bulk modulus of gas from the B&W (1992) Z factor.

    K_T = rho dP/drho at constant T = P / (1 - Ppr/Z dZ/dPpr): eq 11a without
    the gamma0 factor, i.e. the modulus implied by the eq 10 equation of state.

    Parameters
    ----------
    temperature_c : array_like
        Temperature, degC, 0 to 250, pseudo-reduced temperature at least 1.05.
    pressure_mpa : array_like
        Pore pressure, MPa, 0.1 to 100.
    gravity : array_like
        Gas gravity relative to air, 0.55 to 1.8.

    Returns
    -------
    ndarray
        Isothermal bulk modulus, GPa.
    """
    _, p, _, ppr, z, dz_dppr = _gas_state(temperature_c, pressure_mpa, gravity)
    return p / (1.0 - ppr / z * dz_dppr) * 1e-3


# ------------------------------------------------------------------------ oil


def _api_density(api: FloatArray) -> FloatArray:
    """Stock-tank oil density (g/cm3) from API gravity: the API definition."""
    return 141.5 / (api + 131.5)


def _oil_pressure_term(p: FloatArray, rho: FloatArray) -> FloatArray:
    """Density increase with pressure (g/cm3) of B&W eq 18 for reference density rho."""
    return (0.00277 * p - 1.71e-7 * p**3) * (rho - 1.15) ** 2 + 3.49e-4 * p


def _dead_oil_density(t: FloatArray, p: FloatArray, rho0: FloatArray) -> FloatArray:
    """Dead-oil density (g/cm3): pressure by B&W eq 18, then temperature by eq 19."""
    rho_p = rho0 + _oil_pressure_term(p, rho0)
    return rho_p / (0.972 + 3.81e-4 * (t + 17.78) ** 1.175)


def _dead_oil_velocity(t: FloatArray, p: FloatArray, api: FloatArray) -> FloatArray:
    """Dead-oil velocity (m/s): B&W eq 20a."""
    return (
        15450.0 / np.sqrt(77.1 + api)
        - 3.7 * t
        + 4.64 * p
        + 0.0115 * (0.36 * np.sqrt(api) - 1.0) * t * p
    )


def _gas_solubility(t: FloatArray, p: FloatArray, rho0: FloatArray, g: FloatArray) -> FloatArray:
    """Largest gas-oil ratio (m3/m3) the oil can dissolve: B&W eq 21a."""
    return 0.02123 * g * (p * np.exp(4.072 / rho0 - 0.00377 * t)) ** 1.205


def _formation_volume_factor(
    t: FloatArray, rho0: FloatArray, g: FloatArray, rg: FloatArray
) -> FloatArray:
    """Oil formation volume factor B0 (reservoir / stock-tank volume): B&W eq 23."""
    return 0.972 + 0.00038 * (2.4 * rg * np.sqrt(g / rho0) + t + 17.8) ** 1.175


def _live_oil_density(
    p: FloatArray, rho0: FloatArray, g: FloatArray, rg: FloatArray, b0: FloatArray
) -> FloatArray:
    """Live-oil density (g/cm3): B&W eq 24 plus the pressure term of eq 18.

    Eq 24, (rho0 + 0.0012 G Rg) / B0, is the density at reservoir temperature
    (B0 carries the thermal expansion) and saturation. We add the eq 18
    pressure term with that density as reference and do not apply eq 19
    again, which would count the thermal expansion twice.
    """
    rho_g = (rho0 + 0.0012 * g * rg) / b0
    return rho_g + _oil_pressure_term(p, rho_g)


def _live_oil_velocity(
    t: FloatArray, p: FloatArray, rho0: FloatArray, rg: FloatArray, b0: FloatArray
) -> FloatArray:
    """Live-oil velocity (m/s): B&W eq 22, i.e. eq 20b with the pseudo-density rho'."""
    rho_pseudo = rho0 / b0 / (1.0 + 0.001 * rg)
    return (
        2096.0 * np.sqrt(rho_pseudo / (2.6 - rho_pseudo))
        - 3.7 * t
        + 4.64 * p
        + 0.0115 * (4.12 * np.sqrt(1.08 / rho_pseudo - 1.0) - 1.0) * t * p
    )


def _oil_inputs(
    temperature_c: ArrayLike,
    pressure_mpa: ArrayLike,
    api: ArrayLike,
    gas_gravity: ArrayLike,
    *more: FloatArray,
) -> list[FloatArray]:
    t, p = _temperature_pressure(temperature_c, pressure_mpa, OIL_TEMPERATURE_RANGE_C)
    a = in_range("api", api, *API_RANGE, unit="degrees API")
    g = in_range("gas_gravity", gas_gravity, *GAS_GRAVITY_RANGE)
    return list(np.broadcast_arrays(t, p, a, g, *more))


def oil(
    temperature_c: ArrayLike,
    pressure_mpa: ArrayLike,
    api: ArrayLike,
    gor: ArrayLike,
    gas_gravity: ArrayLike,
) -> FluidProperties:
    """Density, velocity and bulk modulus of dead or live oil, Batzle & Wang (1992).

    Where ``gor`` is 0 the oil is dead: density from eqs 18-19 with the
    stock-tank density rho0 = 141.5 / (API + 131.5), velocity from eq 20a.
    Where ``gor`` > 0 the gas is taken as fully dissolved (pressure above the
    bubble point): B0 from eq 23, density from eq 24 plus the eq 18 pressure
    term, velocity from eq 22 with the pseudo-density
    rho' = rho0 / B0 / (1 + 0.001 Rg). K = rho v^2.

    Parameters
    ----------
    temperature_c : array_like
        Temperature, degC, 0 to 150.
    pressure_mpa : array_like
        Pore pressure, MPa, 0.1 to 100.
    api : array_like
        Stock-tank oil gravity, degrees API, 5 to 80.
    gor : array_like
        Gas-oil ratio Rg, standard m3 of gas per m3 of stock-tank oil, 0 to
        500. B&W give Rg in litre/litre, which is the same ratio, so no
        conversion is made (1 m3/m3 = 5.615 scf/bbl).
    gas_gravity : array_like
        Gravity of the dissolved gas relative to air, 0.55 to 1.8 (used only
        where ``gor`` > 0, but always checked).

    Returns
    -------
    FluidProperties
        density g/cm3, velocity m/s, modulus GPa.

    Raises
    ------
    ValueError
        For non-finite or out-of-range input, or a combination for which the
        correlations give a velocity at or below zero (very light, gas-rich
        oil at high temperature and low pressure).

    Notes
    -----
    The live-oil formulas do not reduce to the dead-oil ones as gor -> 0:
    at Rg = 0, rho' = rho0 / B0 < rho0, and eq 22 keeps its own T*P term. The
    velocity therefore jumps between gor = 0 and the smallest positive gor;
    measured for 30 API oil at 30 MPa: +2 m/s at 20 degC, -49 m/s at
    80 degC, -94 m/s at 150 degC (density +0.9 % at 150 degC). Gas beyond the
    solubility of eq 21a (see :func:`oil_gas_solubility`) would in reality
    be free gas; it is not refused here.
    """
    gor_arr = in_range("gor", gor, *GOR_RANGE, unit="m3/m3")
    t, p, api_arr, g, rg = _oil_inputs(temperature_c, pressure_mpa, api, gas_gravity, gor_arr)
    rho0 = _api_density(api_arr)
    b0 = _formation_volume_factor(t, rho0, g, rg)
    dead = rg == 0.0
    density = np.where(dead, _dead_oil_density(t, p, rho0), _live_oil_density(p, rho0, g, rg, b0))
    velocity = np.where(
        dead, _dead_oil_velocity(t, p, api_arr), _live_oil_velocity(t, p, rho0, rg, b0)
    )
    slow = velocity <= 0.0
    if np.any(slow):
        i = np.flatnonzero(slow)[0]
        raise ValueError(
            "temperature_c, pressure_mpa, api and gor give a non-positive oil velocity"
            f" (temperature_c {t.flat[i]:g} degC, pressure_mpa {p.flat[i]:g} MPa,"
            f" api {api_arr.flat[i]:g}, gor {rg.flat[i]:g} m3/m3): outside the range"
            " of the Batzle & Wang oil correlations"
        )
    return FluidProperties(density, velocity, _modulus_gpa(density, velocity))


def oil_gas_solubility(
    temperature_c: ArrayLike, pressure_mpa: ArrayLike, api: ArrayLike, gas_gravity: ArrayLike
) -> FloatArray:
    """Largest gas-oil ratio that stays dissolved, B&W (1992) eq 21a.

    Rg_max = 0.02123 G [P exp(4.072 / rho0 - 0.00377 T)]^1.205.

    Parameters
    ----------
    temperature_c : array_like
        Temperature, degC, 0 to 150.
    pressure_mpa : array_like
        Pressure, MPa, 0.1 to 100.
    api : array_like
        Stock-tank oil gravity, degrees API, 5 to 80.
    gas_gravity : array_like
        Gas gravity relative to air, 0.55 to 1.8.

    Returns
    -------
    ndarray
        Gas-oil ratio, standard m3 per m3 of stock-tank oil.
    """
    t, p, api_arr, g = _oil_inputs(temperature_c, pressure_mpa, api, gas_gravity)
    return _gas_solubility(t, p, _api_density(api_arr), g)


# --------------------------------------------------------------------- mixing


def _fractions(fractions: ArrayLike) -> FloatArray:
    f = in_range("fractions", fractions, 0.0, 1.0)
    if f.ndim == 0:
        raise ValueError("fractions must have a last axis of fluid components (got a scalar)")
    total = f.sum(axis=-1)
    off = np.abs(total - 1.0) > FRACTION_SUM_TOLERANCE
    if np.any(off):
        worst = float(np.ravel(total[off])[0]) if total.ndim else float(total)
        raise ValueError(
            f"fractions must sum to 1 along the last axis within {FRACTION_SUM_TOLERANCE:g}"
            f" (got {worst:.9g})"
        )
    return f


def wood(fractions: ArrayLike, moduli: ArrayLike) -> FloatArray:
    """Bulk modulus of a fine-scale fluid mixture: Wood (1955) / Reuss average.

    K = 1 / sum_i (f_i / K_i), the uniform-saturation (iso-stress) mix used
    for pore fluids (Mavko, Mukerji & Dvorkin, The Rock Physics Handbook,
    Wood's formula).

    Parameters
    ----------
    fractions : array_like, shape (..., n)
        Volume fraction of each fluid; each in [0, 1], summing to 1 along the
        last axis within 1e-6.
    moduli : array_like, shape (..., n)
        Bulk modulus of each fluid, GPa, greater than 0.

    Returns
    -------
    ndarray, shape (...)
        Mixture bulk modulus, GPa.
    """
    f = _fractions(fractions)
    k = in_range("moduli", moduli, 0.0, unit="GPa", low_open=True)
    return 1.0 / np.sum(f / k, axis=-1)


def mix_density(fractions: ArrayLike, densities: ArrayLike) -> FloatArray:
    """Density of a fluid mixture, the volume-weighted mean sum_i f_i rho_i.

    Parameters
    ----------
    fractions : array_like, shape (..., n)
        Volume fraction of each fluid; each in [0, 1], summing to 1 along the
        last axis within 1e-6.
    densities : array_like, shape (..., n)
        Density of each fluid, g/cm3, greater than 0.

    Returns
    -------
    ndarray, shape (...)
        Mixture density, g/cm3.
    """
    f = _fractions(fractions)
    rho = in_range("densities", densities, 0.0, unit="g/cm3", low_open=True)
    return np.sum(f * rho, axis=-1)
