"""Rock physics: mineral mixing, elastic bounds, granular-contact models, Gassmann.

Every function here is one published equation (or one short chain of them)
over numpy arrays. Units: moduli GPa, pressure MPa, density g/cm3, velocity
m/s, porosity and volume fractions as fractions.

Main source: Mavko, Mukerji & Dvorkin, *The Rock Physics Handbook*, 2nd ed.
(Cambridge University Press, 2009), cited as "RPH". Section numbers are given
from memory: bounds and mixing in chapter 4 (section 4.1 Hashin-Shtrikman-
Walpole bounds, 4.2 Voigt and Reuss), granular media in chapter 5 (section 5.4
random sphere packs: Hertz-Mindlin, the friable-sand, contact-cement and
constant-cement models), fluid substitution in chapter 6 (section 6.3
Gassmann), Nur's critical porosity model in chapter 7.

Shale: Porecast drives its shale frame with :func:`critical_porosity_model`
(porosity from the compaction model, a shale critical porosity from the
scenario); there is no separate shale function so that the logic lives in one
place.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from ._checks import FloatArray, in_range

#: Largest allowed departure of a set of volume fractions from a sum of 1.
FRACTION_SUM_TOLERANCE = 1e-6


class Moduli(NamedTuple):
    """Bulk and shear modulus, GPa."""

    k: FloatArray
    g: FloatArray


class HashinShtrikmanBounds(NamedTuple):
    """Hashin-Shtrikman-Walpole bounds on bulk and shear modulus, GPa."""

    k_lower: FloatArray
    k_upper: FloatArray
    g_lower: FloatArray
    g_upper: FloatArray


class Velocities(NamedTuple):
    """P- and S-wave velocity, m/s."""

    vp: FloatArray
    vs: FloatArray


class Mineral(NamedTuple):
    """Elastic constants of a mineral: bulk and shear modulus (GPa), density (g/cm3)."""

    k: float
    g: float
    density: float


#: Common minerals. Values from memory of the mineral-property table in RPH
#: (Mavko et al. 2009, appendix; the table number was not checked). "clay" is
#: the mixed-clay value commonly used for shaly sands.
MINERALS: dict[str, Mineral] = {
    "quartz": Mineral(36.6, 45.0, 2.65),
    "feldspar": Mineral(37.5, 15.0, 2.62),
    "clay": Mineral(21.0, 7.0, 2.58),
    "calcite": Mineral(76.8, 32.0, 2.71),
    "dolomite": Mineral(94.9, 45.0, 2.87),
}


# --------------------------------------------------------------------------- helpers


def _at_most(name: str, value: FloatArray, limit_name: str, limit: FloatArray) -> None:
    """Refuse any element of ``value`` above the matching element of ``limit``."""
    value, limit = np.broadcast_arrays(value, limit)
    bad = value > limit
    if np.any(bad):
        v = float(value[bad].flat[0])
        lim = float(limit[bad].flat[0])
        raise ValueError(
            f"{name} must be at most {limit_name} (got {name}={v:g} where {limit_name}={lim:g})"
        )


def _fractions(name: str, fractions: ArrayLike) -> FloatArray:
    """Volume fractions, last axis = constituents, each in [0, 1], summing to 1."""
    f = in_range(name, fractions, 0.0, 1.0)
    if f.ndim == 0:
        raise ValueError(f"{name} must have a last axis listing the constituents")
    total = f.sum(axis=-1)
    off = np.abs(total - 1.0) > FRACTION_SUM_TOLERANCE
    if np.any(off):
        raise ValueError(
            f"{name} must sum to 1 along the last axis within {FRACTION_SUM_TOLERANCE:g}"
            f" (got a sum of {float(total[off].flat[0]):g})"
        )
    return f


def _scheme(scheme: int) -> int:
    if isinstance(scheme, bool) or scheme not in (1, 2):
        raise ValueError(
            "scheme must be 1 (cement at grain contacts) or 2 (cement evenly on grain"
            f" surfaces) (got {scheme!r})"
        )
    return int(scheme)


def _poisson(k: FloatArray, g: FloatArray) -> FloatArray:
    """Poisson's ratio from bulk and shear modulus (isotropic elasticity, common practice)."""
    k3 = 3.0 * k
    return (k3 - 2.0 * g) / (2.0 * (k3 + g))


def _zeta(k: FloatArray, g: FloatArray) -> FloatArray:
    """HS shear shift zeta(K, G) = G/6 (9K + 8G)/(K + 2G) (RPH section 4.1).

    The limit for G -> 0 is 0 (also when K = 0), which is what ``where`` sets.
    """
    k, g = np.broadcast_arrays(k, g)
    num = g * (9.0 * k + 8.0 * g)
    den = 6.0 * (k + 2.0 * g)
    if num.size and np.min(g) > 0.0:
        return num / den  # no G = 0 anywhere: the plain (cheaper) division
    return np.divide(num, den, out=np.zeros(num.shape), where=g > 0)


def _shifted_harmonic(fractions: FloatArray, moduli: FloatArray, shift: ArrayLike) -> FloatArray:
    """[sum_i f_i / (M_i + s)]^-1 - s over the last axis (the HS / Reuss form).

    A constituent with f_i = 0 adds nothing. A constituent with f_i > 0 and
    M_i + s = 0 (a void or fluid when s = 0) makes the sum infinite and the
    result exactly 0 -- the true limit, not a guarded division.
    """
    return _shifted_harmonic_of(*_constituents(fractions, moduli), shift)


def _shifted_harmonic_of(
    fractions: list[FloatArray], moduli: list[FloatArray], shift: ArrayLike
) -> FloatArray:
    """:func:`_shifted_harmonic` with the constituents given one array each.

    Summing constituent by constituent keeps every step a whole-array
    operation (a sum along a short last axis is several times slower) and
    adds the terms in the same order as ``np.sum`` over that axis.
    """
    total = None
    with np.errstate(divide="ignore"):
        for f, m in zip(fractions, moduli, strict=True):
            denom = m + shift
            if np.size(denom) and np.min(denom) > 0.0:
                # No zero denominator: the plain quotient is already 0 where
                # f = 0, and about three times cheaper than a masked division.
                term = f / denom
            else:
                f, denom = np.broadcast_arrays(f, denom)
                term = np.divide(f, denom, out=np.zeros(f.shape), where=f > 0)
            total = term if total is None else total + term
    if total is None:
        raise ValueError("fractions must list at least one constituent")
    return 1.0 / total - shift


def _constituents(*arrays: FloatArray) -> list[list[FloatArray]]:
    """Per array, its slices along the last (constituent) axis, broadcast in length.

    A 0-d array or a last axis of length 1 stands for every constituent, as in
    numpy broadcasting; slicing keeps 1-D moduli as scalars (no stride-0 copies).
    """
    n = np.broadcast_shapes(*(a.shape[-1:] for a in arrays))
    count = n[0] if n else 1
    return [
        [a if a.ndim == 0 else a[..., i if a.shape[-1] > 1 else 0] for i in range(count)]
        for a in arrays
    ]


def _voigt(fractions: FloatArray, moduli: FloatArray) -> FloatArray:
    # Constituent by constituent, for the reason given in _shifted_harmonic_of.
    total = None
    for f, m in zip(*_constituents(fractions, moduli), strict=True):
        term = f * m
        total = term if total is None else total + term
    return total


def _reuss(fractions: FloatArray, moduli: FloatArray) -> FloatArray:
    return _shifted_harmonic(fractions, moduli, 0.0)


def _modified_hs_lower(
    fraction_end: FloatArray,
    k_end: FloatArray,
    g_end: FloatArray,
    k_mineral: FloatArray,
    g_mineral: FloatArray,
) -> Moduli:
    """Two-point lower HS bound between an end member and the mineral.

    The "modified" bound of Dvorkin & Nur (1996, Geophysics 61, eqs. for the
    unconsolidated model) and Avseth et al. (2000): the soft end member (a
    grain pack at its porosity) takes the place of the softest phase, with
    volume fraction ``fraction_end`` = porosity / end-member porosity.
    """
    # Two constituents passed one array each: no stacked (..., 2) copies.
    f = [fraction_end, 1.0 - fraction_end]
    k_dry = _shifted_harmonic_of(f, [k_end, k_mineral], 4.0 / 3.0 * g_end)
    g_dry = _shifted_harmonic_of(f, [g_end, g_mineral], _zeta(k_end, g_end))
    return Moduli(k_dry, g_dry)


def _check_mineral(k_mineral: ArrayLike, g_mineral: ArrayLike) -> tuple[FloatArray, FloatArray]:
    k = in_range("k_mineral", k_mineral, 0.0, unit="GPa", low_open=True)
    g = in_range("g_mineral", g_mineral, 0.0, unit="GPa", low_open=True)
    return k, g


def _check_pack(
    porosity_critical: ArrayLike, coordination: ArrayLike
) -> tuple[FloatArray, FloatArray]:
    phic = in_range("porosity_critical", porosity_critical, 0.0, 1.0, low_open=True, high_open=True)
    n = in_range("coordination", coordination, 1.0, 20.0)
    return phic, n


# --------------------------------------------------------------------------- mixing and bounds


def voigt(fractions: ArrayLike, moduli: ArrayLike) -> FloatArray:
    """Voigt (arithmetic, iso-strain) average, RPH section 4.2.

    Parameters
    ----------
    fractions : array_like, shape (..., n_constituents)
        Volume fractions, each in [0, 1], summing to 1 along the last axis.
    moduli : array_like, shape (..., n_constituents)
        Modulus of each constituent, GPa (>= 0). Also serves for density, g/cm3.

    Returns
    -------
    ndarray, shape (...)
        Voigt average, same unit as ``moduli``.
    """
    f = _fractions("fractions", fractions)
    m = in_range("moduli", moduli, 0.0, unit="GPa")
    return _voigt(f, m)


def reuss(fractions: ArrayLike, moduli: ArrayLike) -> FloatArray:
    """Reuss (harmonic, iso-stress) average, RPH section 4.2; Wood's law for suspensions.

    Parameters
    ----------
    fractions : array_like, shape (..., n_constituents)
        Volume fractions, each in [0, 1], summing to 1 along the last axis.
    moduli : array_like, shape (..., n_constituents)
        Modulus of each constituent, GPa (>= 0); a zero modulus present in
        non-zero fraction gives exactly 0.

    Returns
    -------
    ndarray, shape (...)
        Reuss average, GPa.
    """
    f = _fractions("fractions", fractions)
    m = in_range("moduli", moduli, 0.0, unit="GPa")
    return _reuss(f, m)


def voigt_reuss_hill(fractions: ArrayLike, k: ArrayLike, g: ArrayLike) -> Moduli:
    """Voigt-Reuss-Hill average of bulk and shear modulus (Hill 1952; RPH section 4.3).

    Parameters
    ----------
    fractions : array_like, shape (..., n_constituents)
        Volume fractions summing to 1 along the last axis.
    k, g : array_like, shape (..., n_constituents)
        Bulk and shear modulus of each constituent, GPa (>= 0).

    Returns
    -------
    Moduli
        Mean of the Voigt and Reuss averages, GPa.
    """
    f = _fractions("fractions", fractions)
    kk = in_range("k", k, 0.0, unit="GPa")
    gg = in_range("g", g, 0.0, unit="GPa")
    return Moduli(0.5 * (_voigt(f, kk) + _reuss(f, kk)), 0.5 * (_voigt(f, gg) + _reuss(f, gg)))


class MineralMix(NamedTuple):
    """Effective mineral of a mixture: bulk and shear modulus (GPa), density (g/cm3)."""

    k: FloatArray
    g: FloatArray
    density: FloatArray


def mineral_mix(fractions: ArrayLike, minerals: Sequence[str]) -> MineralMix:
    """Effective mineral of a mixture of :data:`MINERALS`: Voigt-Reuss-Hill moduli, mean density.

    Moduli by :func:`voigt_reuss_hill` (Hill 1952; RPH section 4.3), density
    as the volume average (:func:`voigt`), with the fractions checked once.

    Parameters
    ----------
    fractions : array_like, shape (..., n_minerals)
        Volume fraction of each mineral, summing to 1 along the last axis.
    minerals : sequence of str
        Names in :data:`MINERALS`, one per entry of the last axis.

    Returns
    -------
    MineralMix
        ``k``, ``g`` in GPa and ``density`` in g/cm3, shape (...).
    """
    unknown = [m for m in minerals if m not in MINERALS]
    if unknown:
        raise ValueError(f"minerals must be names in MINERALS ({', '.join(MINERALS)});"
                         f" got {', '.join(map(repr, unknown))}")
    f = _fractions("fractions", fractions)
    if f.shape[-1] != len(minerals):
        raise ValueError(f"fractions must have one entry per mineral ({len(minerals)}) along"
                         f" the last axis (got {f.shape[-1]})")
    k = np.array([MINERALS[m].k for m in minerals])
    g = np.array([MINERALS[m].g for m in minerals])
    rho = np.array([MINERALS[m].density for m in minerals])
    return MineralMix(
        0.5 * (_voigt(f, k) + _reuss(f, k)), 0.5 * (_voigt(f, g) + _reuss(f, g)), _voigt(f, rho)
    )


def hashin_shtrikman_bounds(
    fractions: ArrayLike, k: ArrayLike, g: ArrayLike
) -> HashinShtrikmanBounds:
    """Hashin-Shtrikman-Walpole bounds for any number of isotropic phases (RPH section 4.1).

    With Lambda(z) = [sum f_i / (K_i + 4/3 z)]^-1 - 4/3 z and
    Gamma(z) = [sum f_i / (G_i + z)]^-1 - z:
    K+ = Lambda(G_max), K- = Lambda(G_min), G+ = Gamma(zeta(K_max, G_max)),
    G- = Gamma(zeta(K_min, G_min)), zeta(K, G) = G/6 (9K + 8G)/(K + 2G)
    (Berryman 1995 form of Walpole 1966). The extremes are taken over the
    constituents present (non-zero fraction); K_max and G_max may belong to
    different constituents. For two phases where one is stiffest in both K and
    G this reduces to the classic Hashin & Shtrikman (1963) bounds.

    Parameters
    ----------
    fractions : array_like, shape (..., n_constituents)
        Volume fractions summing to 1 along the last axis.
    k, g : array_like, shape (..., n_constituents)
        Bulk and shear modulus of each constituent, GPa (>= 0).

    Returns
    -------
    HashinShtrikmanBounds
        ``k_lower, k_upper, g_lower, g_upper``, GPa.
    """
    f = _fractions("fractions", fractions)
    kk = in_range("k", k, 0.0, unit="GPa")
    gg = in_range("g", g, 0.0, unit="GPa")
    f, kk, gg = np.broadcast_arrays(f, kk, gg)
    present = f > 0
    k_max = np.max(np.where(present, kk, -np.inf), axis=-1)
    k_min = np.min(np.where(present, kk, np.inf), axis=-1)
    g_max = np.max(np.where(present, gg, -np.inf), axis=-1)
    g_min = np.min(np.where(present, gg, np.inf), axis=-1)
    return HashinShtrikmanBounds(
        k_lower=_shifted_harmonic(f, kk, 4.0 / 3.0 * g_min),
        k_upper=_shifted_harmonic(f, kk, 4.0 / 3.0 * g_max),
        g_lower=_shifted_harmonic(f, gg, _zeta(k_min, g_min)),
        g_upper=_shifted_harmonic(f, gg, _zeta(k_max, g_max)),
    )


# --------------------------------------------------------------------------- fluid substitution


def hashin_shtrikman_upper_dry(
    k_mineral: ArrayLike, g_mineral: ArrayLike, porosity: ArrayLike
) -> Moduli:
    """Hashin-Shtrikman upper bound of a mineral with empty (dry) pores.

    The two-phase upper bound with the void as second phase (RPH section 4.1)::

        K+ = K + phi / (-1/K + (1 - phi) / (K + 4/3 G))
        G+ = G + phi / (-1/G + 2 (1 - phi)(K + 2G) / (5 G (K + 4/3 G)))

    No dry frame of this mineral is stiffer.

    Parameters
    ----------
    k_mineral, g_mineral : array_like
        Mineral bulk and shear modulus, GPa (> 0).
    porosity : array_like
        Porosity, fraction (0 to 1).

    Returns
    -------
    Moduli
        Upper-bound dry bulk and shear modulus, GPa.
    """
    k = in_range("k_mineral", k_mineral, 0.0, low_open=True, unit="GPa")
    g = in_range("g_mineral", g_mineral, 0.0, low_open=True, unit="GPa")
    phi = in_range("porosity", porosity, 0.0, 1.0)
    m = k + 4.0 / 3.0 * g
    k_up = k + phi / (-1.0 / k + (1.0 - phi) / m)
    g_up = g + phi / (-1.0 / g + 2.0 * (1.0 - phi) * (k + 2.0 * g) / (5.0 * g * m))
    return Moduli(k_up, g_up)


def gassmann(
    k_dry: ArrayLike,
    g_dry: ArrayLike,
    k_mineral: ArrayLike,
    k_fluid: ArrayLike,
    porosity: ArrayLike,
) -> Moduli:
    """Gassmann (1951) low-frequency fluid substitution (RPH section 6.3).

    K_sat = K_dry + (1 - K_dry/K_m)^2 / (phi/K_f + (1 - phi)/K_m - K_dry/K_m^2),
    evaluated as K_dry + (K_m - K_dry)^2 K_f / (phi K_m (K_m - K_f) + K_f (K_m - K_dry))
    so that an empty pore space (K_f = 0) gives exactly K_dry. G_sat = G_dry.

    Parameters
    ----------
    k_dry, g_dry : array_like
        Dry-frame bulk and shear modulus, GPa (0 <= k_dry <= k_mineral, g_dry >= 0).
    k_mineral : array_like
        Mineral bulk modulus, GPa (> 0).
    k_fluid : array_like
        Pore-fluid bulk modulus, GPa (0 <= k_fluid <= k_mineral).
    porosity : array_like
        Porosity, fraction in [0, 1].

    Returns
    -------
    Moduli
        Saturated bulk and shear modulus, GPa.
    """
    kd = in_range("k_dry", k_dry, 0.0, unit="GPa")
    gd = in_range("g_dry", g_dry, 0.0, unit="GPa")
    km = in_range("k_mineral", k_mineral, 0.0, unit="GPa", low_open=True)
    kf = in_range("k_fluid", k_fluid, 0.0, unit="GPa")
    phi = in_range("porosity", porosity, 0.0, 1.0)
    _at_most("k_dry", kd, "k_mineral", km)
    _at_most("k_fluid", kf, "k_mineral", km)
    dk = km - kd
    num = dk * dk * kf
    den = phi * km * (km - kf) + kf * dk
    # num > 0 implies den >= kf (km - kd) > 0; num = 0 (no fluid stiffness, or a
    # frame as stiff as the mineral) means no stiffening at all.
    if np.size(num) and np.min(num) > 0.0:
        increment = num / den  # every num > 0: the plain (cheaper) division is safe
    else:
        increment = np.divide(num, den, out=np.zeros(np.broadcast(num, den).shape),
                              where=num > 0)
    k_sat = kd + increment
    return Moduli(k_sat, np.broadcast_to(gd, np.broadcast_shapes(gd.shape, k_sat.shape)).copy())


def gassmann_dry(
    k_sat: ArrayLike,
    k_mineral: ArrayLike,
    k_fluid: ArrayLike,
    porosity: ArrayLike,
) -> FloatArray:
    """Inverse Gassmann: dry-frame bulk modulus from a saturated one (RPH section 6.3).

    K_dry = [K_sat (phi K_m/K_f + 1 - phi) - K_m] / [phi K_m/K_f + K_sat/K_m - 1 - phi].

    Parameters
    ----------
    k_sat : array_like
        Saturated bulk modulus, GPa, between the Reuss average of fluid and
        mineral (the suspension, K_dry = 0) and k_mineral.
    k_mineral : array_like
        Mineral bulk modulus, GPa (> 0).
    k_fluid : array_like
        Pore-fluid bulk modulus, GPa (0 < k_fluid < k_mineral).
    porosity : array_like
        Porosity, fraction in (0, 1].

    Returns
    -------
    ndarray
        Dry-frame bulk modulus, GPa.
    """
    ks = in_range("k_sat", k_sat, 0.0, unit="GPa", low_open=True)
    km = in_range("k_mineral", k_mineral, 0.0, unit="GPa", low_open=True)
    kf = in_range("k_fluid", k_fluid, 0.0, unit="GPa", low_open=True)
    phi = in_range("porosity", porosity, 0.0, 1.0, low_open=True)
    _at_most("k_sat", ks, "k_mineral", km)
    if np.any(kf >= km):
        raise ValueError("k_fluid must be less than k_mineral for the inverse Gassmann relation")
    suspension = km * kf / (phi * km + (1.0 - phi) * kf)
    if np.any(np.broadcast_to(ks < suspension, np.broadcast(ks, suspension).shape)):
        raise ValueError(
            "k_sat must be at least the Reuss average of fluid and mineral (the suspension limit)"
        )
    # Both brackets multiplied by k_fluid; the denominator is > 0 over the allowed range.
    num = ks * (phi * km + (1.0 - phi) * kf) - km * kf
    den = phi * km + ks * kf / km - kf * (1.0 + phi)
    return num / den


def patchy_saturation(
    k_dry: ArrayLike,
    g_dry: ArrayLike,
    k_mineral: ArrayLike,
    porosity: ArrayLike,
    k_fluids: ArrayLike,
    saturations: ArrayLike,
) -> Moduli:
    """Patchy saturation: Gassmann per fluid, then Hill's average of the P-wave modulus.

    1/(K + 4/3 G) = sum_i S_i / (K_sat,i + 4/3 G), with G the (fluid-independent)
    shear modulus (Hill 1963; White 1975; the patchy upper bound of Mavko &
    Mukerji 1998, Geophysics 63; RPH chapter 6 on partial saturation).

    Parameters
    ----------
    k_dry, g_dry : array_like, shape (...)
        Dry-frame bulk and shear modulus, GPa.
    k_mineral : array_like, shape (...)
        Mineral bulk modulus, GPa.
    porosity : array_like, shape (...)
        Porosity, fraction.
    k_fluids : array_like, shape (..., n_fluids)
        Bulk modulus of each pore fluid, GPa.
    saturations : array_like, shape (..., n_fluids)
        Saturation of each fluid, fractions summing to 1 along the last axis.

    Returns
    -------
    Moduli
        Patchy-saturated bulk and shear modulus, GPa.
    """
    s = _fractions("saturations", saturations)
    kd = in_range("k_dry", k_dry, 0.0, unit="GPa")
    gd = in_range("g_dry", g_dry, 0.0, unit="GPa")
    km = in_range("k_mineral", k_mineral, 0.0, unit="GPa", low_open=True)
    phi = in_range("porosity", porosity, 0.0, 1.0)
    kf = in_range("k_fluids", k_fluids, 0.0, unit="GPa")
    _at_most("k_fluids", kf, "k_mineral", km[..., None])
    k_each, _ = gassmann(kd[..., None], gd[..., None], km[..., None], kf, phi[..., None])
    shape = np.broadcast_shapes(k_each.shape, s.shape)[:-1]
    shear = np.broadcast_to(gd, shape)
    k_patchy = _shifted_harmonic(s, k_each, 4.0 / 3.0 * shear)
    return Moduli(k_patchy, shear.copy())


# --------------------------------------------------------------------------- granular media


def hertz_mindlin(
    k_mineral: ArrayLike,
    g_mineral: ArrayLike,
    porosity_critical: ArrayLike,
    coordination: ArrayLike,
    pressure_mpa: ArrayLike,
    *,
    slip_factor: ArrayLike = 1.0,
) -> Moduli:
    """Hertz-Mindlin moduli of a dense random pack of identical spheres (RPH section 5.4).

    K = [n^2 (1 - phi_c)^2 G^2 P / (18 pi^2 (1 - nu)^2)]^(1/3) and
    G = (2 + 3f - nu (1 + 3f)) / (5 (2 - nu))
        * [3 n^2 (1 - phi_c)^2 G^2 P / (2 pi^2 (1 - nu)^2)]^(1/3)
    (Mindlin 1949). With f = 1 (no slip) the shear factor is the usual
    (5 - 4 nu)/(5 (2 - nu)); f = 0 gives frictionless grains, G = 3/5 K. The
    slip factor follows Bachrach & Avseth (2008, Geophysics 73) and Duffaut et
    al. (2010), as recalled from memory.

    Parameters
    ----------
    k_mineral, g_mineral : array_like
        Grain bulk and shear modulus, GPa (> 0).
    porosity_critical : array_like
        Porosity of the pack, fraction in (0, 1) (critical porosity, about 0.36-0.40).
    coordination : array_like
        Mean number of contacts per grain, 1 to 20 (about 9 for a random dense pack).
    pressure_mpa : array_like
        Effective (confining minus pore) pressure, MPa (>= 0).
    slip_factor : array_like, keyword-only
        Fraction of grain contacts without slip, 0 to 1 (1 = no slip).

    Returns
    -------
    Moduli
        Dry-pack bulk and shear modulus, GPa.
    """
    k, g = _check_mineral(k_mineral, g_mineral)
    phic, n = _check_pack(porosity_critical, coordination)
    p = in_range("pressure_mpa", pressure_mpa, 0.0, unit="MPa")
    f = in_range("slip_factor", slip_factor, 0.0, 1.0)
    return _hertz_mindlin(k, g, phic, n, p, f)


def _hertz_mindlin(
    k: FloatArray, g: FloatArray, phic: FloatArray, n: FloatArray, p: FloatArray, f: FloatArray
) -> Moduli:
    """:func:`hertz_mindlin` of checked arguments."""
    nu = _poisson(k, g)
    p_gpa = p * 1e-3
    base = (n * (1.0 - phic) * g) ** 2 * p_gpa / (np.pi * (1.0 - nu)) ** 2
    k_hm = np.cbrt(base / 18.0)
    shear_factor = (2.0 + 3.0 * f - nu * (1.0 + 3.0 * f)) / (5.0 * (2.0 - nu))
    g_hm = shear_factor * np.cbrt(1.5 * base)
    return Moduli(k_hm, g_hm)


def friable_sand(
    k_mineral: ArrayLike,
    g_mineral: ArrayLike,
    porosity: ArrayLike,
    porosity_critical: ArrayLike,
    coordination: ArrayLike,
    pressure_mpa: ArrayLike,
    *,
    slip_factor: ArrayLike = 1.0,
) -> Moduli:
    """Friable (unconsolidated, "soft") sand model (Dvorkin & Nur 1996; RPH section 5.4).

    The Hertz-Mindlin pack at critical porosity is joined to the mineral point
    by the modified lower Hashin-Shtrikman bound, with the pack taking volume
    fraction phi/phi_c: sorting fills the pores with smaller grains.

    Parameters
    ----------
    k_mineral, g_mineral : array_like
        Grain bulk and shear modulus, GPa (> 0).
    porosity : array_like
        Porosity, fraction in [0, porosity_critical].
    porosity_critical : array_like
        Critical porosity, fraction in (0, 1).
    coordination : array_like
        Contacts per grain at critical porosity, 1 to 20.
    pressure_mpa : array_like
        Effective pressure, MPa (>= 0).
    slip_factor : array_like, keyword-only
        Passed to :func:`hertz_mindlin` (1 = no slip).

    Returns
    -------
    Moduli
        Dry-frame bulk and shear modulus, GPa.
    """
    k, g = _check_mineral(k_mineral, g_mineral)
    phic, n = _check_pack(porosity_critical, coordination)
    phi = in_range("porosity", porosity, 0.0, 1.0)
    _at_most("porosity", phi, "porosity_critical", phic)
    p = in_range("pressure_mpa", pressure_mpa, 0.0, unit="MPa")
    f = in_range("slip_factor", slip_factor, 0.0, 1.0)
    # The pack's arguments are checked above: the Hertz-Mindlin core need not check them again.
    k_hm, g_hm = _hertz_mindlin(k, g, phic, n, p, f)
    return _modified_hs_lower(phi / phic, k_hm, g_hm, k, g)


def _cement_alpha(
    porosity: FloatArray, porosity_critical: FloatArray, coordination: FloatArray, scheme: int
) -> FloatArray:
    """Ratio of cemented-contact radius to grain radius (Dvorkin & Nur 1996)."""
    cement = (porosity_critical - porosity) / (1.0 - porosity_critical)
    if scheme == 1:
        return 2.0 * (cement / (3.0 * coordination)) ** 0.25
    return np.sqrt(2.0 * cement / 3.0)


def contact_cement(
    k_mineral: ArrayLike,
    g_mineral: ArrayLike,
    k_cement: ArrayLike,
    g_cement: ArrayLike,
    porosity: ArrayLike,
    porosity_critical: ArrayLike,
    coordination: ArrayLike,
    scheme: int,
) -> Moduli:
    """Contact-cement model of Dvorkin & Nur (1996, Geophysics 61); RPH section 5.4.

    K_dry = n (1 - phi_c) M_c S_n / 6 and G_dry = 3/5 K_dry + 3 n (1 - phi_c) G_c S_tau / 20,
    M_c = K_c + 4/3 G_c, with the fitted contact stiffnesses
    S_n = A_n alpha^2 + B_n alpha + C_n and S_tau = A_tau alpha^2 + B_tau alpha + C_tau of
    Lambda_n = 2 G_c (1 - nu)(1 - nu_c) / (pi G (1 - 2 nu_c)) and Lambda_tau = G_c / (pi G).
    Porosity phi_c - phi is taken to be cement. Scheme 1 puts all cement at the
    grain contacts, alpha = 2 [(phi_c - phi) / (3 n (1 - phi_c))]^(1/4); scheme 2
    spreads it evenly on the grain surfaces, alpha = [2 (phi_c - phi) / (3 (1 - phi_c))]^(1/2).

    The polynomial-fit coefficients are written from memory; they are checked
    in the tests against the exact small-cement limit (a welded circular
    contact of radius alpha R). The fits have small non-zero intercepts C_n and
    C_tau, so at phi = phi_c the moduli are small but not exactly zero.

    Parameters
    ----------
    k_mineral, g_mineral : array_like
        Grain bulk and shear modulus, GPa (> 0).
    k_cement, g_cement : array_like
        Cement bulk and shear modulus, GPa (> 0).
    porosity : array_like
        Porosity, fraction in [0, porosity_critical].
    porosity_critical : array_like
        Porosity of the uncemented pack, fraction in (0, 1).
    coordination : array_like
        Contacts per grain, 1 to 20.
    scheme : int
        1 (cement at grain contacts) or 2 (cement evenly on grain surfaces).

    Returns
    -------
    Moduli
        Dry-frame bulk and shear modulus, GPa.
    """
    k, g = _check_mineral(k_mineral, g_mineral)
    kc = in_range("k_cement", k_cement, 0.0, unit="GPa", low_open=True)
    gc = in_range("g_cement", g_cement, 0.0, unit="GPa", low_open=True)
    phic, n = _check_pack(porosity_critical, coordination)
    phi = in_range("porosity", porosity, 0.0, 1.0)
    _at_most("porosity", phi, "porosity_critical", phic)
    alpha = _cement_alpha(phi, phic, n, _scheme(scheme))

    nu = _poisson(k, g)
    nu_c = _poisson(kc, gc)
    lam_n = 2.0 * gc * (1.0 - nu) * (1.0 - nu_c) / (np.pi * g * (1.0 - 2.0 * nu_c))
    lam_t = gc / (np.pi * g)

    # Powers lam**e written exp(e ln lam), with each logarithm taken once:
    # half the cost of six array powers, the same values to round-off.
    ln_n = np.log(lam_n)
    a_n = -0.024153 * np.exp(-1.3646 * ln_n)
    b_n = 0.20405 * np.exp(-0.89008 * ln_n)
    c_n = 0.00024649 * np.exp(-1.9864 * ln_n)
    s_n = (a_n * alpha + b_n) * alpha + c_n

    nu2 = nu * nu
    ln_t = np.log(lam_t)
    a_t = -1e-2 * (2.26 * nu2 + 2.07 * nu + 2.3) * np.exp(
        (0.079 * nu2 + 0.1754 * nu - 1.342) * ln_t
    )
    b_t = (0.0573 * nu2 + 0.0937 * nu + 0.202) * np.exp(
        (0.0274 * nu2 + 0.0529 * nu - 0.8765) * ln_t
    )
    c_t = 1e-4 * (9.654 * nu2 + 4.945 * nu + 3.1) * np.exp(
        (0.01867 * nu2 + 0.4011 * nu - 1.8186) * ln_t
    )
    s_t = (a_t * alpha + b_t) * alpha + c_t

    k_dry = n * (1.0 - phic) * (kc + 4.0 / 3.0 * gc) * s_n / 6.0
    g_dry = 0.6 * k_dry + 3.0 * n * (1.0 - phic) * gc * s_t / 20.0
    return Moduli(k_dry, g_dry)


def constant_cement(
    k_mineral: ArrayLike,
    g_mineral: ArrayLike,
    k_cement: ArrayLike,
    g_cement: ArrayLike,
    porosity: ArrayLike,
    porosity_critical: ArrayLike,
    porosity_cemented: ArrayLike,
    coordination: ArrayLike,
    scheme: int,
) -> Moduli:
    """Constant-cement model of Avseth, Dvorkin, Mavko & Rykkje (2000, Geophysics 65).

    The contact-cement frame at porosity_cemented (phi_b, the porosity reached
    by cementation) is joined to the mineral point by the modified lower
    Hashin-Shtrikman bound, the cemented pack taking volume fraction phi/phi_b:
    the cement amount is fixed and porosity below phi_b reflects sorting.

    Parameters
    ----------
    k_mineral, g_mineral : array_like
        Grain bulk and shear modulus, GPa (> 0).
    k_cement, g_cement : array_like
        Cement bulk and shear modulus, GPa (> 0).
    porosity : array_like
        Porosity, fraction in [0, porosity_cemented].
    porosity_critical : array_like
        Porosity of the uncemented pack, fraction in (0, 1).
    porosity_cemented : array_like
        Porosity after cementation, fraction in (0, porosity_critical].
    coordination : array_like
        Contacts per grain, 1 to 20.
    scheme : int
        Cement scheme of :func:`contact_cement` (1 or 2).

    Returns
    -------
    Moduli
        Dry-frame bulk and shear modulus, GPa.
    """
    k, g = _check_mineral(k_mineral, g_mineral)
    phib = in_range("porosity_cemented", porosity_cemented, 0.0, 1.0, low_open=True)
    phi = in_range("porosity", porosity, 0.0, 1.0)
    _at_most("porosity", phi, "porosity_cemented", phib)
    k_b, g_b = contact_cement(
        k, g, k_cement, g_cement, phib, porosity_critical, coordination, scheme
    )
    return _modified_hs_lower(phi / phib, k_b, g_b, k, g)


def critical_porosity_model(
    k_mineral: ArrayLike,
    g_mineral: ArrayLike,
    porosity: ArrayLike,
    porosity_critical: ArrayLike,
) -> Moduli:
    """Nur's critical porosity model, a modified Voigt average (Nur et al. 1995; RPH ch. 7).

    K_dry = K_m (1 - phi/phi_c), G_dry = G_m (1 - phi/phi_c). Porecast uses it
    for the compaction-driven shale frame.

    Parameters
    ----------
    k_mineral, g_mineral : array_like
        Mineral bulk and shear modulus, GPa (> 0).
    porosity : array_like
        Porosity, fraction in [0, porosity_critical].
    porosity_critical : array_like
        Critical porosity, fraction in (0, 1).

    Returns
    -------
    Moduli
        Dry-frame bulk and shear modulus, GPa.
    """
    k, g = _check_mineral(k_mineral, g_mineral)
    phic = in_range("porosity_critical", porosity_critical, 0.0, 1.0, low_open=True, high_open=True)
    phi = in_range("porosity", porosity, 0.0, 1.0)
    _at_most("porosity", phi, "porosity_critical", phic)
    scale = 1.0 - phi / phic
    return Moduli(k * scale, g * scale)


# --------------------------------------------------------------------------- velocities


def velocities(k_sat: ArrayLike, g_sat: ArrayLike, density: ArrayLike) -> Velocities:
    """P- and S-wave velocity of an isotropic elastic medium (common practice).

    Vp = sqrt((K + 4/3 G) / rho), Vs = sqrt(G / rho); with GPa and g/cm3 the
    square root gives km/s, returned as m/s.

    Parameters
    ----------
    k_sat, g_sat : array_like
        Bulk and shear modulus, GPa (>= 0).
    density : array_like
        Bulk density, g/cm3 (> 0).

    Returns
    -------
    Velocities
        ``vp, vs`` in m/s.
    """
    k = in_range("k_sat", k_sat, 0.0, unit="GPa")
    g = in_range("g_sat", g_sat, 0.0, unit="GPa")
    rho = in_range("density", density, 0.0, unit="g/cm3", low_open=True)
    # GPa / (g/cm3) = 1e9 Pa / 1e3 kg/m3 = 1e6 m2/s2.
    vp = 1e3 * np.sqrt((k + 4.0 / 3.0 * g) / rho)
    vs = 1e3 * np.sqrt(g / rho)
    return Velocities(vp, vs)


def moduli_from_velocities(vp: ArrayLike, vs: ArrayLike, density: ArrayLike) -> Moduli:
    """Bulk and shear modulus from velocities and density (inverse of :func:`velocities`).

    Parameters
    ----------
    vp : array_like
        P-wave velocity, m/s (> 0, at least sqrt(4/3) vs so that K >= 0).
    vs : array_like
        S-wave velocity, m/s (>= 0).
    density : array_like
        Bulk density, g/cm3 (> 0).

    Returns
    -------
    Moduli
        Bulk and shear modulus, GPa.
    """
    p = in_range("vp", vp, 0.0, unit="m/s", low_open=True)
    s = in_range("vs", vs, 0.0, unit="m/s")
    rho = in_range("density", density, 0.0, unit="g/cm3", low_open=True)
    if np.any(3.0 * p**2 < 4.0 * s**2):
        raise ValueError("vp must be at least sqrt(4/3) * vs (a negative bulk modulus otherwise)")
    g = rho * s**2 * 1e-6
    k = rho * p**2 * 1e-6 - 4.0 / 3.0 * g
    return Moduli(k, g)
