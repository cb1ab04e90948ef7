"""Burial, thermal and pressure history of one horizon at many map locations.

A scenario gives a *template* history (:class:`BurialTemplate`): the fraction
of the maximum burial depth reached at each age, the age window of uplift, and
the surface temperature, gradient multiplier and overpressure multiplier
through time. :func:`burial_paths` scales that template per location with
maps of present depth, net uplift, present gradient and present overpressure,
and returns every quantity on one common age grid.

Modelling convention
--------------------
Every quantity is *defined* as piecewise linear in time between the merged
control ages (template ages plus the uplift start and end ages). Depth is
naturally piecewise linear; temperature ``Ts(t) + G(t) z(t)`` is a product of
linear functions inside a segment and would be quadratic there, but here it
is evaluated at the control ages and interpolated linearly. This makes maxima
fall on control ages, gives an exact time above a threshold, and gives the
Walderhaug (1996) cementation integral an exact closed form per segment
(:mod:`porecast.physics.diagenesis`). Refine the template ages where a finer
thermal path matters.

Units: ages Ma before present (decreasing to 0 along the last axis), depth m
positive down, temperature degC, gradient degC/km, pressure and stress MPa,
density g/cm3.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from porecast.physics._checks import FloatArray, as_finite, in_range

#: Standard acceleration of gravity, m/s2 (CGPM 1901; same value as scipy.constants.g).
STANDARD_GRAVITY = 9.80665

# Allowed ranges of the per-location maps and of the template (plain bounds on
# physical plausibility, not on any particular basin).
DEPTH_RANGE_M = (0.0, 15000.0)
UPLIFT_RANGE_M = (0.0, 10000.0)
GRADIENT_RANGE_C_PER_KM = (5.0, 120.0)
OVERPRESSURE_RANGE_MPA = (-100.0, 300.0)
SURFACE_TEMPERATURE_RANGE_C = (-20.0, 50.0)
GRADIENT_FACTOR_RANGE = (0.1, 5.0)
OVERPRESSURE_FACTOR_RANGE = (0.0, 5.0)
BULK_DENSITY_RANGE = (1.5, 3.0)
WATER_DENSITY_RANGE = (0.9, 1.3)
AGE_RANGE_MA = (0.0, 4600.0)


def _per_age(name: str, value: float | ArrayLike, n: int, low: float, high: float, unit: str):
    arr = in_range(name, value, low, high, unit=unit)
    if arr.ndim == 0:
        return (float(arr),) * n
    if arr.shape != (n,):
        raise ValueError(f"{name} must be a single value or one value per age ({n} values)")
    return tuple(float(v) for v in arr)


@dataclass(frozen=True)
class BurialTemplate:
    """Scenario template of a burial history, scaled per location by maps.

    Parameters
    ----------
    ages_ma : sequence of float
        Control ages, Ma, strictly decreasing, last = 0 (present).
    depth_fraction : sequence of float
        Fraction (0..1) of the location's maximum burial depth reached at each
        age during the burial phase; it must be exactly 1 at ``uplift_start_ma``
        (linear interpolation between control ages). Values at ages younger
        than ``uplift_start_ma`` are not used when there is an uplift phase.
    uplift_start_ma, uplift_end_ma : float
        Age window of uplift, Ma; depth falls linearly in time from maximum
        burial to present depth between them and stays at present depth after
        ``uplift_end_ma``. Both 0 means no uplift phase (depth fraction must
        then be 1 at present).
    surface_temperature_c : float or sequence of float
        Surface (or sea-floor) temperature, degC, one value or one per age.
    gradient_factor : float or sequence of float
        Multiplier of the present-day geothermal gradient, one value or one per
        age (1 = constant gradient).
    overpressure_factor : float or sequence of float
        Multiplier of the present-day overpressure, one value or one per age
        (e.g. 0 at deposition rising to 1 at present).

    Notes
    -----
    Values are stored as tuples of float so the template is hashable and
    immutable; the array views are :attr:`ages`, :attr:`fractions` etc.
    """

    ages_ma: tuple[float, ...]
    depth_fraction: tuple[float, ...]
    uplift_start_ma: float
    uplift_end_ma: float
    surface_temperature_c: tuple[float, ...] | float
    gradient_factor: tuple[float, ...] | float = 1.0
    overpressure_factor: tuple[float, ...] | float = 1.0

    def __post_init__(self) -> None:
        ages = in_range("ages_ma", self.ages_ma, *AGE_RANGE_MA, unit="Ma")
        if ages.ndim != 1 or ages.size < 2:
            raise ValueError("ages_ma must be a 1-D sequence of at least two ages")
        if np.any(np.diff(ages) >= 0):
            raise ValueError("ages_ma must be strictly decreasing (oldest first)")
        if ages[-1] != 0.0:
            raise ValueError(f"ages_ma must end at 0 Ma (present), got {ages[-1]:g} Ma")
        n = ages.size
        frac = _per_age("depth_fraction", self.depth_fraction, n, 0.0, 1.0, "")
        start = float(in_range("uplift_start_ma", self.uplift_start_ma, 0.0, ages[0], unit="Ma"))
        end = float(in_range("uplift_end_ma", self.uplift_end_ma, 0.0, start, unit="Ma"))
        if start == end and start != 0.0:
            raise ValueError(
                "uplift_start_ma must be greater than uplift_end_ma "
                "(both 0 means no uplift phase)"
            )
        at_start = float(np.interp(start, ages[::-1], np.asarray(frac)[::-1]))
        if at_start != 1.0:
            raise ValueError(
                f"depth_fraction must be 1 at uplift_start_ma = {start:g} Ma "
                f"(maximum burial), got {at_start:g}"
            )
        object.__setattr__(self, "ages_ma", tuple(float(a) for a in ages))
        object.__setattr__(self, "depth_fraction", frac)
        object.__setattr__(self, "uplift_start_ma", start)
        object.__setattr__(self, "uplift_end_ma", end)
        object.__setattr__(
            self,
            "surface_temperature_c",
            _per_age("surface_temperature_c", self.surface_temperature_c, n,
                     *SURFACE_TEMPERATURE_RANGE_C, "degC"),
        )
        object.__setattr__(
            self,
            "gradient_factor",
            _per_age("gradient_factor", self.gradient_factor, n, *GRADIENT_FACTOR_RANGE, ""),
        )
        object.__setattr__(
            self,
            "overpressure_factor",
            _per_age("overpressure_factor", self.overpressure_factor, n,
                     *OVERPRESSURE_FACTOR_RANGE, ""),
        )

    @property
    def has_uplift(self) -> bool:
        """True when the template has an uplift phase."""
        return self.uplift_start_ma > self.uplift_end_ma

    def control_ages(self) -> FloatArray:
        """Template ages merged with the uplift start and end ages, Ma, decreasing."""
        merged = np.union1d(self.ages_ma, (self.uplift_start_ma, self.uplift_end_ma))
        return merged[::-1].copy()

    def at_ages(self, field: str, ages_ma: ArrayLike) -> FloatArray:
        """Linear interpolation in age of one per-age field onto ``ages_ma``."""
        values = np.asarray(getattr(self, field), dtype=np.float64)
        x = np.asarray(ages_ma, dtype=np.float64)
        return np.interp(x, np.asarray(self.ages_ma)[::-1], values[::-1])


class BurialHistory(NamedTuple):
    """Burial history of many locations on a common age grid.

    Every array but ``ages_ma`` has shape ``(..., n_times)`` where ``...`` is
    the broadcast shape of the per-location inputs (usually ``(n,)``).
    """

    ages_ma: FloatArray
    """Ages, Ma, shape (n_times,), strictly decreasing to 0."""
    depth_m: FloatArray
    """Depth of the horizon below the surface, m."""
    temperature_c: FloatArray
    """Temperature, degC."""
    hydrostatic_mpa: FloatArray
    """Hydrostatic pore pressure, MPa."""
    pore_pressure_mpa: FloatArray
    """Pore pressure (hydrostatic plus overpressure), MPa."""
    overburden_mpa: FloatArray
    """Overburden (lithostatic) stress, MPa."""
    effective_stress_mpa: FloatArray
    """Vertical effective stress, overburden minus pore pressure (Terzaghi), MPa."""


def hydrostatic_pressure(depth_m: ArrayLike, water_density: ArrayLike = 1.03) -> FloatArray:
    """Hydrostatic pressure ``rho_w g z`` of a constant-density water column.

    Parameters
    ----------
    depth_m : array_like
        Depth below the water table / sea floor, m.
    water_density : array_like
        Pore-water density, g/cm3.

    Returns
    -------
    ndarray
        Pressure, MPa.
    """
    z = in_range("depth_m", depth_m, *DEPTH_RANGE_M, unit="m")
    rho = in_range("water_density", water_density, *WATER_DENSITY_RANGE, unit="g/cm3")
    # g/cm3 * m/s2 * m = 1000 kg/m3 * m/s2 * m = 1e3 Pa = 1e-3 MPa
    return rho * STANDARD_GRAVITY * z * 1e-3


def overburden_stress(depth_m: ArrayLike, overburden_density: ArrayLike = 2.30) -> FloatArray:
    """Overburden stress ``rho_b g z`` with a constant mean overburden density.

    Parameters
    ----------
    depth_m : array_like
        Depth below the surface, m.
    overburden_density : array_like
        Mean bulk density of the overburden, g/cm3.

    Returns
    -------
    ndarray
        Stress, MPa.
    """
    z = in_range("depth_m", depth_m, *DEPTH_RANGE_M, unit="m")
    rho = in_range("overburden_density", overburden_density, *BULK_DENSITY_RANGE, unit="g/cm3")
    return rho * STANDARD_GRAVITY * z * 1e-3


def terzaghi_effective_stress(
    overburden_mpa: ArrayLike, pore_pressure_mpa: ArrayLike
) -> FloatArray:
    """Vertical effective stress, Terzaghi (1943): ``sigma' = S_v - P_p``.

    Parameters
    ----------
    overburden_mpa : array_like
        Overburden stress, MPa.
    pore_pressure_mpa : array_like
        Pore pressure, MPa.

    Returns
    -------
    ndarray
        Effective stress, MPa.

    Raises
    ------
    ValueError
        If pore pressure exceeds the overburden anywhere (negative effective
        stress: the rock would fracture, no longer a valid burial state).
    """
    sv = as_finite("overburden_mpa", overburden_mpa)
    pp = as_finite("pore_pressure_mpa", pore_pressure_mpa)
    return _terzaghi(sv, pp)


def _terzaghi(sv: FloatArray, pp: FloatArray) -> FloatArray:
    """:func:`terzaghi_effective_stress` of finite float arrays (no finiteness check).

    For callers whose stresses are built from already checked inputs; the
    physical check (pore pressure at most the overburden) is kept.
    """
    sigma = sv - pp
    # One reduction answers the usual "all valid" case; the mask is built only on failure.
    if sigma.size and sigma.min() < 0.0:
        bad = sigma < 0.0
        where = np.argwhere(bad)[0]
        raise ValueError(
            "pore_pressure_mpa must not exceed overburden_mpa (effective stress must be at "
            f"least 0 MPa; {int(np.count_nonzero(bad))} value(s) below, first at index "
            f"{tuple(int(i) for i in where)}: {float(sigma[tuple(where)]):g} MPa) - check "
            "overpressure_mpa and the template overpressure_factor at shallow burial"
        )
    return sigma


def burial_paths(
    template: BurialTemplate,
    present_depth_m: ArrayLike,
    net_uplift_m: ArrayLike,
    gradient_c_per_km: ArrayLike,
    overpressure_mpa: ArrayLike,
    *,
    overburden_density: float = 2.30,
    water_density: float = 1.03,
) -> BurialHistory:
    """Scale a burial template to many locations.

    Maximum burial depth is ``present_depth_m + net_uplift_m``. Depth is
    ``depth_fraction * max_burial`` up to the uplift start, linear in time to
    the present depth between uplift start and end, and the present depth
    afterwards. Temperature ``T = Ts(t) + G gf(t) z(t) / 1000``; pore pressure
    is hydrostatic plus ``overpressure_mpa * overpressure_factor(t)``;
    effective stress is overburden minus pore pressure (Terzaghi). All are
    evaluated at the merged control ages and taken as piecewise linear between
    them (see the module notes).

    Parameters
    ----------
    template : BurialTemplate
        Scenario template.
    present_depth_m : array_like
        Present depth of the horizon, m (0 to 15000), shape (n,) or broadcastable.
    net_uplift_m : array_like
        Net uplift (erosion) since maximum burial, m (0 to 10000).
    gradient_c_per_km : array_like
        Present-day geothermal gradient, degC/km (5 to 120).
    overpressure_mpa : array_like
        Present-day overpressure above hydrostatic, MPa (-100 to 300; the
        resulting pore pressure must stay between 0 and the overburden).
    overburden_density : float
        Mean overburden bulk density, g/cm3 (1.5 to 3.0).
    water_density : float
        Pore-water density, g/cm3 (0.9 to 1.3).

    Returns
    -------
    BurialHistory
        Arrays of shape ``broadcast(inputs).shape + (n_times,)``.
    """
    if not isinstance(template, BurialTemplate):
        raise ValueError("template must be a BurialTemplate")
    z_now = in_range("present_depth_m", present_depth_m, *DEPTH_RANGE_M, unit="m")
    uplift = in_range("net_uplift_m", net_uplift_m, *UPLIFT_RANGE_M, unit="m")
    grad = in_range("gradient_c_per_km", gradient_c_per_km, *GRADIENT_RANGE_C_PER_KM,
                    unit="degC/km")
    op = in_range("overpressure_mpa", overpressure_mpa, *OVERPRESSURE_RANGE_MPA, unit="MPa")
    rho_b = float(in_range("overburden_density", overburden_density, *BULK_DENSITY_RANGE,
                           unit="g/cm3"))
    # The two density ranges do not overlap, so water is always lighter than the overburden.
    rho_w = float(in_range("water_density", water_density, *WATER_DENSITY_RANGE, unit="g/cm3"))

    z_now, uplift, grad, op = np.broadcast_arrays(z_now, uplift, grad, op)
    ages = template.control_ages()
    nt = ages.size
    # Work time-major, one contiguous row of locations per age, and return
    # (..., n_times) views of those arrays: every per-age step is then one
    # long vector operation instead of many operations across short rows.
    shape = (nt,) + z_now.shape
    z_max = z_now + uplift
    if z_max.size and z_max.max() > DEPTH_RANGE_M[1]:
        raise ValueError(
            f"present_depth_m + net_uplift_m must be at most {DEPTH_RANGE_M[1]:g} m"
        )
    start, end = template.uplift_start_ma, template.uplift_end_ma
    burial = ages >= start
    after = ages <= end
    during = ~burial & ~after
    depth = np.empty(shape)
    for i, frac in zip(np.flatnonzero(burial), template.at_ages("depth_fraction", ages[burial]),
                       strict=True):
        np.multiply(frac, z_max, out=depth[i, ...])
    depth[after] = z_now
    for i in np.flatnonzero(during):
        w = (start - ages[i]) / (start - end)
        np.multiply(z_now - z_max, w, out=depth[i, ...])
        depth[i, ...] += z_max

    ts = template.at_ages("surface_temperature_c", ages)
    gf = template.at_ages("gradient_factor", ages)
    of = template.at_ages("overpressure_factor", ages)
    # Scalar factors are folded first (1e-3: per km and kPa to MPa), so each
    # age costs three vector operations for temperature and one per pressure.
    temperature = np.empty(shape)
    pore = np.empty(shape)
    for i in range(nt):
        t = np.multiply(depth[i, ...], gf[i] * 1e-3, out=temperature[i, ...])
        t *= grad
        t += ts[i]
        np.multiply(op, of[i], out=pore[i, ...])
    hydro = depth * (rho_w * STANDARD_GRAVITY * 1e-3)
    pore += hydro
    if pore.size and pore.min() < 0.0:
        raise ValueError(
            "overpressure_mpa must not make pore pressure negative (underpressure larger "
            f"than hydrostatic; got {float(np.min(pore)):g} MPa)"
        )
    overburden = depth * (rho_b * STANDARD_GRAVITY * 1e-3)
    depth, temperature, hydro, pore, overburden = (
        np.moveaxis(a, 0, -1) for a in (depth, temperature, hydro, pore, overburden)
    )
    effective = _terzaghi(overburden, pore)
    return BurialHistory(ages, depth, temperature, hydro, pore, overburden, effective)


def maximum_depth(history: BurialHistory) -> FloatArray:
    """Maximum burial depth along each path, m, shape (...)."""
    return np.max(history.depth_m, axis=-1)


def maximum_temperature(history: BurialHistory) -> FloatArray:
    """Maximum temperature along each path, degC (exact for piecewise-linear T)."""
    return np.max(history.temperature_c, axis=-1)


def maximum_effective_stress(history: BurialHistory) -> FloatArray:
    """Maximum vertical effective stress along each path, MPa."""
    return np.max(history.effective_stress_mpa, axis=-1)


def segment_fraction_above(t_start: ArrayLike, t_end: ArrayLike, threshold: ArrayLike):
    """Fraction of a linear segment on which a value is at or above a threshold.

    The value goes linearly from ``t_start`` to ``t_end``; the result is exact
    for that line (0 when both ends are below, 1 when both are at or above).

    Parameters
    ----------
    t_start, t_end : array_like
        Values at the start and end of the segment (any unit, e.g. degC).
    threshold : array_like
        Threshold in the same unit.

    Returns
    -------
    ndarray
        Fraction of the segment duration, 0 to 1.
    """
    t0 = np.asarray(t_start, dtype=np.float64)
    t1 = np.asarray(t_end, dtype=np.float64)
    thr = np.asarray(threshold, dtype=np.float64)
    return _segment_fraction_above_clipped(t0, t1, np.maximum(t0, thr), np.maximum(t1, thr))


def _segment_fraction_above_clipped(
    t_start: FloatArray, t_end: FloatArray, clipped_start: FloatArray, clipped_end: FloatArray
) -> FloatArray:
    """:func:`segment_fraction_above` from the end values and their clipped values.

    ``clipped_start = max(t_start, threshold)`` and likewise for the end; a
    caller that needs those clipped values anyway (the Walderhaug integral)
    passes them in instead of having them computed twice. Float arrays only.
    """
    shape = np.broadcast_shapes(t_start.shape, t_end.shape, clipped_start.shape,
                                clipped_end.shape)
    d = t_end - t_start
    # (max(T1, thr) - max(T0, thr)) / (T1 - T0) covers every case of a line; a
    # flat segment is wholly above or wholly below (exact limit, no epsilon).
    if np.size(d) and np.count_nonzero(d) == np.size(d):
        # No flat segment: the plain division (about half the cost of a masked
        # one); its result already has the broadcast shape of the four inputs.
        return (clipped_end - clipped_start) / d
    # A flat segment is wholly above (clipped start = start) or wholly below.
    flat = np.broadcast_to(clipped_start == t_start, shape).astype(np.float64)
    return np.divide(clipped_end - clipped_start, d, out=flat, where=d != 0.0)


def time_above_temperature(
    age_ma: ArrayLike, temperature_c: ArrayLike, threshold_c: ArrayLike
) -> FloatArray:
    """Time spent at or above a temperature on a piecewise-linear path.

    Parameters
    ----------
    age_ma : array_like
        Ages, Ma, shape (n_times,) or (..., n_times), strictly decreasing.
    temperature_c : array_like
        Temperature at those ages, degC, shape (..., n_times).
    threshold_c : array_like
        Threshold temperature, degC, scalar or shape (...).

    Returns
    -------
    ndarray
        Time above the threshold, Myr, shape (...).
    """
    ages = check_age_axis(age_ma)
    temp = as_finite("temperature_c", temperature_c)
    if temp.ndim < 1 or temp.shape[-1] != ages.shape[-1]:
        raise ValueError("temperature_c must have one value per age along its last axis")
    thr = as_finite("threshold_c", threshold_c)
    # Segment by segment: each step works on one value per path, so the
    # temporaries stay small enough for the CPU cache on long runs of paths.
    total = np.zeros(np.broadcast_shapes(temp.shape[:-1], ages.shape[:-1], thr.shape))
    lowest = np.min(thr) if thr.size else -np.inf
    for i in range(temp.shape[-1] - 1):
        t0, t1 = temp[..., i], temp[..., i + 1]
        if t0.size and max(np.max(t0), np.max(t1)) < lowest:
            continue  # every path is below the threshold on this segment: it adds exactly 0
        frac = _segment_fraction_above_clipped(t0, t1, np.maximum(t0, thr), np.maximum(t1, thr))
        total = total + frac * (ages[..., i] - ages[..., i + 1])
    return total


def time_above(history: BurialHistory, temperature_threshold_c: ArrayLike) -> FloatArray:
    """Time each path spends at or above ``temperature_threshold_c`` (degC), Myr.

    Exact for the piecewise-linear thermal path of :func:`burial_paths`.
    """
    return time_above_temperature(history.ages_ma, history.temperature_c, temperature_threshold_c)


def onset_age(history: BurialHistory, threshold_c: ArrayLike) -> FloatArray:
    """Age at which each path first reached ``threshold_c`` (degC), Ma.

    Linear interpolation inside the segment of first crossing (exact for the
    piecewise-linear thermal path); the oldest age when the path starts at or
    above the threshold; NaN when it never reaches it.

    Returns
    -------
    ndarray
        Age, Ma, shape (...).
    """
    ages = history.ages_ma
    temp = history.temperature_c
    thr = as_finite("threshold_c", threshold_c)
    thr_b = np.broadcast_to(thr, temp.shape[:-1])
    # Index of the first age at or above the threshold, found age by age from
    # the youngest (whole-array steps; argmax along the short age axis is slower).
    n_times = temp.shape[-1]
    first = np.full(thr_b.shape, n_times, dtype=np.intp)
    for i in range(n_times - 1, -1, -1):
        np.copyto(first, i, where=temp[..., i] >= thr_b)
    ever = first < n_times
    first[~ever] = 0
    prev = np.maximum(first - 1, 0)
    t_hi = np.take_along_axis(temp, first[..., None], axis=-1)[..., 0]
    t_lo = np.take_along_axis(temp, prev[..., None], axis=-1)[..., 0]
    a_hi = ages[first]
    a_lo = ages[prev]
    # For first > 0, t_lo < thr <= t_hi, so t_hi > t_lo and the division is safe.
    crossing = first > 0
    w = np.divide(thr_b - t_lo, t_hi - t_lo, out=np.zeros(first.shape), where=crossing)
    age = a_lo - w * (a_lo - a_hi)
    return np.where(ever, age, np.nan)


def check_age_axis(age_ma: ArrayLike) -> FloatArray:
    """Return ``age_ma`` (Ma) checked: at least two ages, strictly decreasing on the last axis."""
    ages = in_range("age_ma", age_ma, *AGE_RANGE_MA, unit="Ma")
    if ages.ndim < 1 or ages.shape[-1] < 2:
        raise ValueError("age_ma must have at least two ages along its last axis")
    if np.any(np.diff(ages, axis=-1) >= 0.0):
        raise ValueError("age_ma must be strictly decreasing along the last axis (oldest first)")
    return ages
