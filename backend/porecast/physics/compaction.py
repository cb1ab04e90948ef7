"""Mechanical compaction: exponential porosity loss with burial (Athy 1930).

Porosity decays exponentially with depth (Athy 1930, AAPG Bulletin 14, 1-24)
or, equivalently for a fixed pressure regime, with vertical effective stress.
Compaction is irreversible: along a burial path the porosity follows the
*running maximum* of depth or effective stress, so uplift does not restore
porosity (elastic rebound is neglected).

Units: depth m, effective stress MPa, porosity fraction, compaction
coefficients per km or per MPa.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Literal, NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from porecast.physics._checks import FloatArray, in_range
from porecast.physics.burial import DEPTH_RANGE_M, BurialHistory

EFFECTIVE_STRESS_RANGE_MPA = (0.0, 500.0)
POROSITY_SURFACE_RANGE = (0.0, 0.9)
COEFFICIENT_PER_KM_RANGE = (0.0, 5.0)
COEFFICIENT_PER_MPA_RANGE = (0.0, 0.5)


class AthyCoefficients(NamedTuple):
    """Surface porosity (fraction) and depth coefficient (1/km) of Athy's law."""

    porosity_surface: float
    compaction_coefficient_per_km: float


#: Sclater & Christie (1980, Journal of Geophysical Research 85(B7), 3711-3739):
#: porosity-depth constants of phi = phi0 exp(-c z) for the main lithologies.
#: Values from memory, not re-read from the paper.
SCLATER_CHRISTIE: dict[str, AthyCoefficients] = {
    "shale": AthyCoefficients(0.63, 0.51),
    "sandstone": AthyCoefficients(0.49, 0.27),
    "shaly_sandstone": AthyCoefficients(0.56, 0.39),
    "chalk": AthyCoefficients(0.70, 0.71),
}


def athy_depth(
    depth_m: ArrayLike, porosity_surface: ArrayLike, compaction_coefficient_per_km: ArrayLike
) -> FloatArray:
    """Athy (1930) porosity-depth law, ``phi = phi0 exp(-c z)``.

    Parameters
    ----------
    depth_m : array_like
        Burial depth, m (0 to 15000).
    porosity_surface : array_like
        Depositional (surface) porosity phi0, fraction (0 excluded to 0.9).
    compaction_coefficient_per_km : array_like
        Depth coefficient c, 1/km (0 to 5); see :data:`SCLATER_CHRISTIE`.

    Returns
    -------
    ndarray
        Porosity, fraction.
    """
    z = in_range("depth_m", depth_m, *DEPTH_RANGE_M, unit="m")
    phi0, c = _athy_parameters(porosity_surface, compaction_coefficient_per_km, "depth")
    return _athy_depth(z, phi0, c)


def _athy_depth(z: FloatArray, phi0: FloatArray, c: FloatArray) -> FloatArray:
    """:func:`athy_depth` of checked arguments."""
    return phi0 * np.exp(-c * z * 1e-3)


def athy_stress(
    effective_stress_mpa: ArrayLike,
    porosity_surface: ArrayLike,
    compaction_coefficient_per_mpa: ArrayLike,
) -> FloatArray:
    """Athy-type porosity-effective-stress law, ``phi = phi0 exp(-beta sigma')``.

    The stress form of Athy (1930) as used in basin modelling (common
    practice); it equals :func:`athy_depth` when ``beta = c / (d sigma'/dz)``.

    Parameters
    ----------
    effective_stress_mpa : array_like
        Vertical effective stress, MPa (0 to 500).
    porosity_surface : array_like
        Depositional porosity phi0, fraction (0 excluded to 0.9).
    compaction_coefficient_per_mpa : array_like
        Stress coefficient beta, 1/MPa (0 to 0.5).

    Returns
    -------
    ndarray
        Porosity, fraction.
    """
    s = in_range("effective_stress_mpa", effective_stress_mpa, *EFFECTIVE_STRESS_RANGE_MPA,
                 unit="MPa")
    phi0, beta = _athy_parameters(porosity_surface, compaction_coefficient_per_mpa, "stress")
    return _athy_stress(s, phi0, beta)


def _athy_stress(s: FloatArray, phi0: FloatArray, beta: FloatArray) -> FloatArray:
    """:func:`athy_stress` of checked arguments."""
    return phi0 * np.exp(-beta * s)


def _athy_parameters(
    porosity_surface: ArrayLike, coefficient: ArrayLike, mode: str
) -> tuple[FloatArray, FloatArray]:
    """Checked surface porosity and compaction coefficient of the Athy law of ``mode``."""
    phi0 = in_range("porosity_surface", porosity_surface, *POROSITY_SURFACE_RANGE, low_open=True)
    if mode == "depth":
        c = in_range("compaction_coefficient_per_km", coefficient, *COEFFICIENT_PER_KM_RANGE,
                     unit="1/km")
    else:
        c = in_range("compaction_coefficient_per_mpa", coefficient, *COEFFICIENT_PER_MPA_RANGE,
                     unit="1/MPa")
    return phi0, c


def mechanical_porosity(
    path: BurialHistory | ArrayLike,
    *,
    porosity_surface: ArrayLike,
    mode: Literal["stress", "depth"] = "stress",
    compaction_coefficient_per_mpa: ArrayLike | None = None,
    compaction_coefficient_per_km: ArrayLike | None = None,
) -> FloatArray:
    """Irreversible mechanical-compaction porosity at every age of a path.

    Porosity follows Athy's law of the running maximum (forward in time) of
    effective stress (``mode="stress"``) or depth (``mode="depth"``), so an
    uplifted rock keeps the porosity it had at maximum burial.

    Parameters
    ----------
    path : BurialHistory or array_like
        A burial history, or an array of shape (..., n_times) holding
        effective stress in MPa (stress mode) or depth in m (depth mode),
        oldest age first along the last axis.
    porosity_surface : array_like
        Depositional porosity phi0, fraction, scalar or shape (...).
    mode : {"stress", "depth"}
        Which Athy form to use.
    compaction_coefficient_per_mpa : array_like, optional
        beta, 1/MPa; required in stress mode, refused in depth mode.
    compaction_coefficient_per_km : array_like, optional
        c, 1/km; required in depth mode, refused in stress mode.

    Returns
    -------
    ndarray
        Porosity, fraction, shape (..., n_times).
    """
    values, law, coefficient = _burial_measure(
        path, mode, compaction_coefficient_per_mpa, compaction_coefficient_per_km
    )
    # The running maximum of a checked path needs no second check.
    phi0, coef = _athy_parameters(porosity_surface, coefficient, mode)
    return law(_running_maximum(values), _leading(phi0), _leading(coef))


def maximum_burial_porosity(
    path: BurialHistory | ArrayLike,
    *,
    porosity_surface: ArrayLike,
    mode: Literal["stress", "depth"] = "stress",
    compaction_coefficient_per_mpa: ArrayLike | None = None,
    compaction_coefficient_per_km: ArrayLike | None = None,
) -> FloatArray:
    """Mechanical-compaction porosity at the end of a path (the present day).

    Athy's law of the maximum effective stress or depth reached along the
    path: the last age of :func:`mechanical_porosity`, without computing the
    earlier ages (same arguments, same value).

    Parameters
    ----------
    path, porosity_surface, mode, compaction_coefficient_per_mpa, compaction_coefficient_per_km
        As for :func:`mechanical_porosity` (stress MPa or depth m, fraction,
        1/MPa or 1/km).

    Returns
    -------
    ndarray
        Porosity, fraction, shape (...).
    """
    values, law, coefficient = _burial_measure(
        path, mode, compaction_coefficient_per_mpa, compaction_coefficient_per_km
    )
    phi0, coef = _athy_parameters(porosity_surface, coefficient, mode)
    return law(np.max(values, axis=-1), phi0, coef)


def _burial_measure(
    path: BurialHistory | ArrayLike,
    mode: str,
    coefficient_per_mpa: ArrayLike | None,
    coefficient_per_km: ArrayLike | None,
) -> tuple[FloatArray, Callable[..., FloatArray], ArrayLike]:
    """Checked stress or depth path, the matching Athy law and its coefficient."""
    if mode == "stress":
        if coefficient_per_mpa is None or coefficient_per_km is not None:
            raise ValueError(
                "mode='stress' needs compaction_coefficient_per_mpa (1/MPa) and no "
                "compaction_coefficient_per_km"
            )
        values = path.effective_stress_mpa if isinstance(path, BurialHistory) else path
        s = in_range("effective_stress_mpa", values, *EFFECTIVE_STRESS_RANGE_MPA, unit="MPa")
        return _with_time_axis(s), _athy_stress, coefficient_per_mpa
    if mode == "depth":
        if coefficient_per_km is None or coefficient_per_mpa is not None:
            raise ValueError(
                "mode='depth' needs compaction_coefficient_per_km (1/km) and no "
                "compaction_coefficient_per_mpa"
            )
        values = path.depth_m if isinstance(path, BurialHistory) else path
        z = in_range("depth_m", values, *DEPTH_RANGE_M, unit="m")
        return _with_time_axis(z), _athy_depth, coefficient_per_km
    raise ValueError(f"mode must be 'stress' or 'depth' (got {mode!r})")


def _running_maximum(values: FloatArray) -> FloatArray:
    """Running maximum forward in time (last axis).

    One vector operation per age across all paths: np.maximum.accumulate runs
    its inner loop along the short time axis and is about ten times slower
    on (n_paths, n_times) arrays.
    """
    out = np.empty_like(values)
    if values.shape[-1] == 0:
        return out
    out[..., 0] = values[..., 0]
    for i in range(1, values.shape[-1]):
        np.maximum(out[..., i - 1], values[..., i], out=out[..., i])
    return out


def _with_time_axis(arr: FloatArray) -> FloatArray:
    if arr.ndim < 1:
        raise ValueError("path must have a time axis (last axis, oldest age first)")
    return arr


def _leading(value: ArrayLike) -> FloatArray:
    """Per-path parameter of shape (...) broadcast against (..., n_times)."""
    return np.asarray(value, dtype=np.float64)[..., None]
