"""Quartz cementation of sandstone after Walderhaug (1996).

Walderhaug (1996, AAPG Bulletin 80, 731-745) models quartz cement as
precipitation-rate controlled, with a rate per unit quartz surface area

    r = a 10^(b T)            mol / (cm2 s),   T in degC,

and the cement volume of 1 cm3 of rock growing as

    dVq/dt = M A r / rho_q,   A = A0 (phi0 - Vq) / phi0,   A0 = 6 (1 - C) f V / D,

where M and rho_q are the molar mass and density of quartz, phi0 the porosity
when cementation starts, f the detrital quartz fraction, C the fraction of
quartz surface covered by grain coatings and D the grain size. No cement
grows below an onset temperature (70 degC by default, common practice).

Because dVq/dt is linear in Vq,

    Vq(t) = phi0 (1 - exp(-k I(t))),   k = M A0 a / (rho_q phi0),
    I(t) = integral of 10^(b T) over the time spent at or above the onset,

and on a segment where T is linear in time the integral is exact,
``(10^(b T1) - 10^(b T0)) / (b ln10 dT/dt)`` over the part above onset (and
``dt 10^(b T)`` for constant T). :func:`quartz_cement` evaluates that closed
form segment by segment, vectorised over any number of paths; the burial
module defines the thermal path as piecewise linear between control ages, so
no time stepping is needed.

Constants and definitions (all from memory, not re-read from the paper):
``a = 1.98e-22 mol/(cm2 s)``, ``b = 0.022 /degC``; ``V = 1 cm3`` of *bulk
rock*, so ``f`` is the detrital quartz volume as a fraction of bulk rock volume
(grains plus pores) and ``A0`` is quartz surface area per cm3 of bulk rock.
Use :func:`bulk_quartz_fraction` to convert a point-count quartz fraction of
the framework grains. Cement volume is returned as a fraction of bulk rock.

Units: age Ma, temperature degC, grain size mm (converted to cm inside),
fractions and volumes as fractions.
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np
from numpy.typing import ArrayLike

from porecast.physics._checks import FloatArray, in_range
from porecast.physics.burial import _segment_fraction_above_clipped, check_age_axis

#: Walderhaug (1996) rate coefficient a, mol/(cm2 s) (from memory).
WALDERHAUG_A_MOL_PER_CM2_S = 1.98e-22
#: Walderhaug (1996) rate exponent b, 1/degC (from memory).
WALDERHAUG_B_PER_C = 0.022
#: Molar mass of SiO2, g/mol: 28.0855 + 2 x 15.9994 (standard atomic weights, from memory).
QUARTZ_MOLAR_MASS_G_PER_MOL = 60.0843
#: Density of quartz, g/cm3 (Mavko, Mukerji & Dvorkin, The Rock Physics Handbook; from memory).
QUARTZ_DENSITY_G_PER_CM3 = 2.65
#: Seconds in one million Julian years (365.25 d of 86400 s).
SECONDS_PER_MA = 3.15576e13
#: Default onset temperature of quartz cementation, degC (common practice).
DEFAULT_ONSET_C = 70.0

GRAIN_SIZE_RANGE_MM = (0.01, 5.0)
POROSITY_ONSET_RANGE = (0.0, 0.6)
ONSET_RANGE_C = (40.0, 150.0)
TEMPERATURE_RANGE_C = (-20.0, 350.0)
RATE_COEFFICIENT_RANGE = (0.0, 1e-15)
RATE_EXPONENT_RANGE = (0.0, 0.1)

_LN10 = np.log(10.0)


def walderhaug_precipitation_rate(
    temperature_c: ArrayLike,
    *,
    rate_coefficient_mol_per_cm2_s: float = WALDERHAUG_A_MOL_PER_CM2_S,
    rate_exponent_per_c: float = WALDERHAUG_B_PER_C,
) -> FloatArray:
    """Quartz precipitation rate per unit surface area, Walderhaug (1996).

    ``r = a 10^(b T)``.

    Parameters
    ----------
    temperature_c : array_like
        Temperature, degC (-20 to 350).
    rate_coefficient_mol_per_cm2_s : float
        a, mol/(cm2 s).
    rate_exponent_per_c : float
        b, 1/degC.

    Returns
    -------
    ndarray
        Rate, mol/(cm2 s).
    """
    t = in_range("temperature_c", temperature_c, *TEMPERATURE_RANGE_C, unit="degC")
    a, b = _rate_law(rate_coefficient_mol_per_cm2_s, rate_exponent_per_c)
    return a * 10.0 ** (b * t)


def walderhaug_surface_area(
    grain_size_mm: ArrayLike, quartz_fraction: ArrayLike, coating_fraction: ArrayLike
) -> FloatArray:
    """Initial quartz surface area per unit bulk volume, Walderhaug (1996).

    ``A0 = 6 (1 - C) f V / D`` with ``V = 1 cm3`` of bulk rock (grains taken
    as cubes or spheres of size D).

    Parameters
    ----------
    grain_size_mm : array_like
        Quartz grain size D, mm (0.01 to 5).
    quartz_fraction : array_like
        Detrital quartz volume f as a fraction of bulk rock volume (0 to 1).
    coating_fraction : array_like
        Fraction C of quartz surface covered by clay or other coatings (0 to 1).

    Returns
    -------
    ndarray
        Surface area, cm2 per cm3 of bulk rock.
    """
    d_mm = in_range("grain_size_mm", grain_size_mm, *GRAIN_SIZE_RANGE_MM, unit="mm")
    f = in_range("quartz_fraction", quartz_fraction, 0.0, 1.0)
    c = in_range("coating_fraction", coating_fraction, 0.0, 1.0)
    return 6.0 * (1.0 - c) * f / (d_mm * 0.1)


def bulk_quartz_fraction(framework_quartz_fraction: ArrayLike, porosity: ArrayLike) -> FloatArray:
    """Detrital quartz as a fraction of bulk rock from its fraction of the grains.

    ``f_bulk = f_grains (1 - phi)``: the Walderhaug ``f`` of this module is
    per bulk volume, a point count usually per framework grain volume.

    Parameters
    ----------
    framework_quartz_fraction : array_like
        Quartz volume as a fraction of the grain (framework) volume, 0 to 1.
    porosity : array_like
        Porosity at the same state (usually the onset of cementation), 0 to 1.

    Returns
    -------
    ndarray
        Quartz volume as a fraction of bulk rock volume.
    """
    fg = in_range("framework_quartz_fraction", framework_quartz_fraction, 0.0, 1.0)
    phi = in_range("porosity", porosity, 0.0, 1.0)
    return fg * (1.0 - phi)


def walderhaug_rate_constant(
    grain_size_mm: ArrayLike,
    quartz_fraction: ArrayLike,
    coating_fraction: ArrayLike,
    porosity_onset: ArrayLike,
    *,
    rate_coefficient_mol_per_cm2_s: float = WALDERHAUG_A_MOL_PER_CM2_S,
) -> FloatArray:
    """Rate constant k of ``Vq = phi0 (1 - exp(-k I))``, per Ma.

    ``k = M A0 a / (rho_q phi0)`` converted from seconds to Ma, so that with
    ``I`` in Ma (the integral of ``10^(b T)`` over time) ``k I`` is
    dimensionless.

    Parameters
    ----------
    grain_size_mm, quartz_fraction, coating_fraction : array_like
        See :func:`walderhaug_surface_area`.
    porosity_onset : array_like
        Porosity phi0 when cementation starts, fraction (0 excluded to 0.6);
        ``quartz_fraction + porosity_onset`` must be at most 1.
    rate_coefficient_mol_per_cm2_s : float
        a, mol/(cm2 s).

    Returns
    -------
    ndarray
        k, 1/Ma.
    """
    phi0 = in_range("porosity_onset", porosity_onset, *POROSITY_ONSET_RANGE, low_open=True)
    area = walderhaug_surface_area(grain_size_mm, quartz_fraction, coating_fraction)
    f = np.asarray(quartz_fraction, dtype=np.float64)
    if np.any(f + phi0 > 1.0):
        raise ValueError(
            "quartz_fraction must be at most 1 - porosity_onset (it is a fraction of bulk "
            "rock volume; convert a fraction of grains with bulk_quartz_fraction)"
        )
    a, _ = _rate_law(rate_coefficient_mol_per_cm2_s, WALDERHAUG_B_PER_C)
    return (
        QUARTZ_MOLAR_MASS_G_PER_MOL * area * a * SECONDS_PER_MA
        / (QUARTZ_DENSITY_G_PER_CM3 * phi0)
    )


def walderhaug_exposure(
    age_ma: ArrayLike,
    temperature_c: ArrayLike,
    *,
    onset_c: ArrayLike = DEFAULT_ONSET_C,
    rate_exponent_per_c: float = WALDERHAUG_B_PER_C,
) -> FloatArray:
    """Cumulative integral of ``10^(b T)`` over time at or above the onset.

    Exact for temperature linear in time between the given ages: on each
    segment the part at or above ``onset_c`` contributes
    ``10^(b Tc0) dt_above (exp(x) - 1) / x`` with ``Tc = max(T, onset)`` and
    ``x = b ln10 (Tc1 - Tc0)``, the closed form of Walderhaug's integral
    written so that it stays accurate when the segment is nearly isothermal.

    Parameters
    ----------
    age_ma : array_like
        Ages, Ma, shape (n_times,) or (..., n_times), strictly decreasing.
    temperature_c : array_like
        Temperature at those ages, degC, shape (..., n_times).
    onset_c : array_like
        Onset temperature, degC (40 to 150), scalar or shape (...).
    rate_exponent_per_c : float
        b, 1/degC.

    Returns
    -------
    ndarray
        I at each age, Ma (0 at the oldest age), shape (..., n_times).
    """
    ages, temp, onset, bl, shape = _exposure_inputs(
        age_ma, temperature_c, onset_c, rate_exponent_per_c
    )
    # Age-major (Fortran) order keeps each age's values contiguous.
    out = np.zeros(shape, order="F")
    for i, growth in _exposure_segments(ages, temp, onset, bl):
        # The running sum adds the segments in order, as np.cumsum would.
        np.add(out[..., i], growth, out=out[..., i + 1])
    return out


def _exposure_inputs(
    age_ma: ArrayLike, temperature_c: ArrayLike, onset_c: ArrayLike, rate_exponent_per_c: float
) -> tuple[FloatArray, FloatArray, FloatArray, float, tuple[int, ...]]:
    """Checked ages, temperatures and onset, b ln10, and the broadcast (..., n_times) shape."""
    ages = check_age_axis(age_ma)
    temp = in_range("temperature_c", temperature_c, *TEMPERATURE_RANGE_C, unit="degC")
    if temp.ndim < 1 or temp.shape[-1] != ages.shape[-1]:
        raise ValueError("temperature_c must have one value per age along its last axis")
    onset = in_range("onset_c", onset_c, *ONSET_RANGE_C, unit="degC")
    _, b = _rate_law(WALDERHAUG_A_MOL_PER_CM2_S, rate_exponent_per_c)
    shape = np.broadcast_shapes(temp.shape, ages.shape, onset.shape + (1,))
    return ages, temp, onset, b * _LN10, shape


def _exposure_segments(
    ages: FloatArray, temp: FloatArray, onset: FloatArray, bl: float
) -> Iterator[tuple[int, FloatArray | float]]:
    """Per segment i (ages i to i + 1), its contribution to the Walderhaug integral, Ma.

    The closed form of :func:`walderhaug_exposure`, evaluated segment by
    segment on one value per path at a time, so the temporaries stay small
    enough for the CPU cache on long runs of paths.
    """
    coldest_onset = np.min(onset) if onset.size else -np.inf
    for i in range(temp.shape[-1] - 1):
        t0, t1 = temp[..., i], temp[..., i + 1]
        if t0.size and max(np.max(t0), np.max(t1)) < coldest_onset:
            # Every path is below onset on this segment: its integral is exactly 0.
            yield i, 0.0
            continue
        c0 = np.maximum(t0, onset)
        c1 = np.maximum(t1, onset)
        # The clipped temperatures serve both the fraction above onset and the integral.
        above = _segment_fraction_above_clipped(t0, t1, c0, c1)
        x = (c1 - c0) * bl
        growth = above * np.divide(np.expm1(x), x, out=np.ones(np.shape(x)), where=x != 0.0)
        growth *= np.exp(c0 * bl)
        yield i, growth * (ages[..., i] - ages[..., i + 1])


def _cement_volume(porosity_onset: FloatArray, k: FloatArray, exposure: FloatArray) -> FloatArray:
    """Walderhaug cement ``Vq = phi0 (1 - exp(-k I))`` (module notes), fraction of bulk rock."""
    return -porosity_onset * np.expm1(-k * exposure)


def quartz_cement(
    age_ma: ArrayLike,
    temperature_c: ArrayLike,
    *,
    grain_size_mm: ArrayLike,
    quartz_fraction: ArrayLike,
    coating_fraction: ArrayLike,
    porosity_onset: ArrayLike,
    onset_c: ArrayLike = DEFAULT_ONSET_C,
    rate_coefficient_mol_per_cm2_s: float = WALDERHAUG_A_MOL_PER_CM2_S,
    rate_exponent_per_c: float = WALDERHAUG_B_PER_C,
) -> FloatArray:
    """Quartz cement volume along temperature paths, Walderhaug (1996).

    Exact closed form ``Vq = phi0 (1 - exp(-k I))`` for temperature linear in
    time between the given ages (see the module notes).

    Parameters
    ----------
    age_ma : array_like
        Ages, Ma, shape (n_times,) or (..., n_times), strictly decreasing
        (present = 0).
    temperature_c : array_like
        Temperature at those ages, degC, shape (..., n_times).
    grain_size_mm : array_like
        Quartz grain size, mm (0.01 to 5), scalar or shape (...).
    quartz_fraction : array_like
        Detrital quartz volume as a fraction of bulk rock (0 to 1, at most
        ``1 - porosity_onset``), scalar or shape (...).
    coating_fraction : array_like
        Fraction of quartz surface covered by coatings (0 to 1).
    porosity_onset : array_like
        Porosity when cementation starts, fraction (0 excluded to 0.6).
    onset_c : array_like
        Onset temperature of cementation, degC (40 to 150; 70 common practice).
    rate_coefficient_mol_per_cm2_s, rate_exponent_per_c : float
        Walderhaug's a (mol/(cm2 s)) and b (1/degC); defaults from the paper.

    Returns
    -------
    ndarray
        Cement volume as a fraction of bulk rock at each age, shape
        (..., n_times); 0 at the oldest age, never above ``porosity_onset``.
    """
    k = walderhaug_rate_constant(
        grain_size_mm, quartz_fraction, coating_fraction, porosity_onset,
        rate_coefficient_mol_per_cm2_s=rate_coefficient_mol_per_cm2_s,
    )
    exposure = walderhaug_exposure(
        age_ma, temperature_c, onset_c=onset_c, rate_exponent_per_c=rate_exponent_per_c
    )
    phi0 = np.asarray(porosity_onset, dtype=np.float64)[..., None]
    return _cement_volume(phi0, k[..., None], exposure)


def quartz_cement_at_present(
    age_ma: ArrayLike,
    temperature_c: ArrayLike,
    *,
    grain_size_mm: ArrayLike,
    quartz_fraction: ArrayLike,
    coating_fraction: ArrayLike,
    porosity_onset: ArrayLike,
    onset_c: ArrayLike = DEFAULT_ONSET_C,
    rate_coefficient_mol_per_cm2_s: float = WALDERHAUG_A_MOL_PER_CM2_S,
    rate_exponent_per_c: float = WALDERHAUG_B_PER_C,
) -> FloatArray:
    """Quartz cement volume at the last age of the paths (the present day), Walderhaug (1996).

    The last age of :func:`quartz_cement` (same arguments, same value),
    without building the cement at the earlier ages.

    Parameters
    ----------
    age_ma, temperature_c, grain_size_mm, quartz_fraction, coating_fraction, porosity_onset
        As for :func:`quartz_cement` (Ma, degC, mm, fractions).
    onset_c, rate_coefficient_mol_per_cm2_s, rate_exponent_per_c
        As for :func:`quartz_cement` (degC, mol/(cm2 s), 1/degC).

    Returns
    -------
    ndarray
        Cement volume as a fraction of bulk rock, shape (...).
    """
    k = walderhaug_rate_constant(
        grain_size_mm, quartz_fraction, coating_fraction, porosity_onset,
        rate_coefficient_mol_per_cm2_s=rate_coefficient_mol_per_cm2_s,
    )
    ages, temp, onset, bl, shape = _exposure_inputs(
        age_ma, temperature_c, onset_c, rate_exponent_per_c
    )
    # The same additions, in the same order, as the running sum of walderhaug_exposure.
    exposure = np.zeros(shape[:-1])
    for _, growth in _exposure_segments(ages, temp, onset, bl):
        exposure = exposure + growth
    return _cement_volume(np.asarray(porosity_onset, dtype=np.float64), k, exposure)


def _rate_law(a: float, b: float) -> tuple[float, float]:
    a_ = float(in_range("rate_coefficient_mol_per_cm2_s", a, *RATE_COEFFICIENT_RANGE,
                        unit="mol/(cm2 s)", low_open=True))
    b_ = float(in_range("rate_exponent_per_c", b, *RATE_EXPONENT_RANGE, unit="1/degC",
                        low_open=True))
    return a_, b_


__all__ = [
    "DEFAULT_ONSET_C",
    "QUARTZ_DENSITY_G_PER_CM3",
    "QUARTZ_MOLAR_MASS_G_PER_MOL",
    "SECONDS_PER_MA",
    "WALDERHAUG_A_MOL_PER_CM2_S",
    "WALDERHAUG_B_PER_C",
    "bulk_quartz_fraction",
    "quartz_cement",
    "quartz_cement_at_present",
    "walderhaug_exposure",
    "walderhaug_precipitation_rate",
    "walderhaug_rate_constant",
    "walderhaug_surface_area",
]
