"""Probability distributions of uncertain scenario inputs.

Every uncertain input of a scenario is one of these distributions. Sampling
is fully vectorised and driven by a ``numpy.random.Generator``; the scenario
layer derives one independent, reproducible stream per input from the
scenario seed and the input's field path (:func:`stream_for`), so changing one
input does not reshuffle the draws of any other.
"""

from __future__ import annotations

import zlib
from typing import NamedTuple

import numpy as np
from scipy import special, stats

from ._checks import FloatArray

#: Names of the supported distribution shapes.
KINDS = ("constant", "normal", "truncated_normal", "uniform", "triangular", "lognormal")


class Support(NamedTuple):
    """Interval holding (practically) all the probability mass."""

    low: float
    high: float


def stream_for(seed: int, path: str) -> np.random.Generator:
    """Independent random stream for one input, from the scenario seed and its field path.

    Parameters
    ----------
    seed : int
        Scenario seed (non-negative).
    path : str
        Dotted field path of the input, e.g. ``"geology.facies.gas_sand.grain_size_mm"``.

    Returns
    -------
    numpy.random.Generator
    """
    if seed < 0:
        raise ValueError(f"seed must be a non-negative integer (got {seed})")
    return np.random.default_rng(np.random.SeedSequence([seed, zlib.crc32(path.encode())]))


def sample(kind: str, params: dict[str, float], rng: np.random.Generator, size: int) -> FloatArray:
    """Draw ``size`` values of a distribution.

    Parameters
    ----------
    kind : str
        One of :data:`KINDS`.
    params : dict
        ``constant``: value; ``normal``: mean, sd; ``truncated_normal``: mean, sd,
        low, high; ``uniform``: low, high; ``triangular``: low, mode, high;
        ``lognormal``: median, sd_log (standard deviation of the natural log).
    rng : numpy.random.Generator
    size : int

    Returns
    -------
    ndarray of shape (size,)
    """
    if kind == "constant":
        return np.full(size, float(params["value"]))
    if kind == "normal":
        return normal_quantile(_open_uniform(rng, size), params["mean"], params["sd"])
    if kind == "truncated_normal":
        mean, sd = params["mean"], params["sd"]
        a = (params["low"] - mean) / sd
        b = (params["high"] - mean) / sd
        # Inverse-CDF sampling from one uniform per value (so a stream can be
        # skipped by advancing the generator; see skip()).
        lo, hi = special.ndtr(a), special.ndtr(b)
        u = rng.uniform(lo, hi, size)
        return normal_quantile(u, mean, sd, params["low"], params["high"])
    if kind == "uniform":
        return rng.uniform(params["low"], params["high"], size)
    if kind == "triangular":
        if params["low"] == params["high"]:
            return np.full(size, float(params["low"]))
        return rng.triangular(params["low"], params["mode"], params["high"], size)
    if kind == "lognormal":
        x = normal_quantile(_open_uniform(rng, size), np.log(params["median"]),
                            params["sd_log"])
        return np.exp(x, out=x)
    raise ValueError(f"distribution kind must be one of {', '.join(KINDS)} (got {kind!r})")


def _open_uniform(rng: np.random.Generator, size: int) -> FloatArray:
    """Uniforms strictly inside (0, 1): (k + 1/2) 2^-52 from the top 52 bits of one
    64-bit generator output each (``rng.random`` can return 0, and adding half its
    2^-53 step to its largest value rounds to exactly 1)."""
    raw = rng.bit_generator.random_raw(size)
    u = (raw >> np.uint64(12)).astype(np.float64)
    u += 0.5
    u *= 2.0**-52
    return u


# Inverse normal CDF for sampling: Acklam's (2003) rational approximation, compiled
# with numba on first use. Measured here on 10^6 values: scipy.special.ndtri 15-35 ns
# per value, this 3.8 ns; the truncated normal inputs were the largest single cost of
# drawing a scenario's inputs (6 of 18 inputs in the bundled example). Normal and
# lognormal inputs are drawn the same way (inverse CDF of one uniform, 8-10 ns per
# value against 19-26 ns for numpy's ziggurat), which also lets their streams be
# skipped by jumping the generator. Its relative
# error is at most 1.15e-9 (Acklam's figure; 1.13e-9 measured against ndtri in
# tests/physics/test_distributions.py), far below anything a Monte Carlo draw can see;
# the result is clipped to [low, high] so rounding never leaves the support.
_ACKLAM_A = (-3.969683028665376e01, 2.209460984245205e02, -2.759285104469687e02,
             1.383577518672690e02, -3.066479806614716e01, 2.506628277459239e00)
_ACKLAM_B = (-5.447609879822406e01, 1.615858368580409e02, -1.556989798598866e02,
             6.680131188771972e01, -1.328068155288572e01)
_ACKLAM_C = (-7.784894002430293e-03, -3.223964580411365e-01, -2.400758277161838e00,
             -2.549732539343734e00, 4.374664141464968e00, 2.938163982698783e00)
_ACKLAM_D = (7.784695709041462e-03, 3.224671290700398e-01, 2.445134137142996e00,
             3.754408661907416e00)
_ACKLAM_SPLIT = 0.02425  # below this (and above 1 - it) the tail approximation is used


def _truncated_normal_kernel(u, mean, sd, low, high, out):  # pragma: no cover - numba
    a0, a1, a2, a3, a4, a5 = _ACKLAM_A
    b0, b1, b2, b3, b4 = _ACKLAM_B
    c0, c1, c2, c3, c4, c5 = _ACKLAM_C
    d0, d1, d2, d3 = _ACKLAM_D
    for i in range(u.size):
        p = u[i]
        if p < _ACKLAM_SPLIT or p > 1.0 - _ACKLAM_SPLIT:
            tail = p if p < 0.5 else 1.0 - p
            q = np.sqrt(-2.0 * np.log(tail))
            x = (((((c0 * q + c1) * q + c2) * q + c3) * q + c4) * q + c5) / (
                (((d0 * q + d1) * q + d2) * q + d3) * q + 1.0)
            x = x if p < 0.5 else -x
        else:
            q = p - 0.5
            r = q * q
            x = (((((a0 * r + a1) * r + a2) * r + a3) * r + a4) * r + a5) * q / (
                ((((b0 * r + b1) * r + b2) * r + b3) * r + b4) * r + 1.0)
        v = mean + sd * x
        v = low if v < low else v
        out[i] = high if v > high else v


_compiled: dict[str, object] = {}


def normal_quantile(
    u: FloatArray, mean: float, sd: float, low: float = -np.inf, high: float = np.inf
) -> FloatArray:
    """``mean + sd * Phi^-1(u)`` clipped to [low, high], for u in (0, 1).

    The inverse-CDF step of normal and truncated-normal sampling (for the latter
    ``u`` is uniform between Phi((low - mean) / sd) and Phi((high - mean) / sd));
    relative error of the quantile at most 1.15e-9 (Acklam 2003).
    """
    kernel = _compiled.get("truncated_normal")
    if kernel is None:
        import numba  # imported on first use: importing the physics stays fast

        kernel = _compiled["truncated_normal"] = numba.njit(
            cache=True, nogil=True, boundscheck=False)(_truncated_normal_kernel)
    uu = np.ascontiguousarray(u, dtype=np.float64)
    out = np.empty_like(uu)
    kernel(uu.ravel(), float(mean), float(sd), float(low), float(high), out.ravel())
    return out


#: Kinds whose sampler turns each value into exactly one 64-bit output of the
#: bit generator (inverse-transform sampling from one uniform).
_ONE_OUTPUT_PER_VALUE = ("uniform", "truncated_normal", "triangular", "normal", "lognormal")


def skip(kind: str, params: dict[str, float], rng: np.random.Generator, size: int) -> bool:
    """Move ``rng`` past ``size`` draws of a distribution without computing them, if possible.

    Returns True when done: the next :func:`sample` call then returns exactly
    what it would have after drawing ``size`` values (the forward model skips
    inputs that no facies of a piece of the run reads, and saves the cost of
    the inverse normal CDF and of the generator). Every sampler here uses one
    output of the generator per value; returns False, leaving ``rng``
    untouched, only for a generator other than :class:`numpy.random.PCG64`
    (the one :func:`stream_for` makes); the caller must then draw.

    Parameters
    ----------
    kind, params, rng, size
        As for :func:`sample`.

    Returns
    -------
    bool
    """
    if kind == "constant" or (kind == "triangular" and params["low"] == params["high"]):
        return True  # these samplers use no random output
    if kind in _ONE_OUTPUT_PER_VALUE and isinstance(rng.bit_generator, np.random.PCG64):
        # PCG64.advance(n) jumps the state by n 64-bit outputs, as n doubles would.
        rng.bit_generator.advance(size)
        return True
    return False


def support(kind: str, params: dict[str, float]) -> Support:
    """Interval a distribution's draws fall in.

    Normal and lognormal laws are unbounded; their support is taken as the
    central interval holding all but 1 in 15 787 draws (mean +/- 4 sd, common
    practice for range checks), so validation can refuse a normal grain-size law
    that would produce negative sizes.
    """
    if kind == "constant":
        return Support(params["value"], params["value"])
    if kind == "normal":
        return Support(params["mean"] - 4 * params["sd"], params["mean"] + 4 * params["sd"])
    if kind in ("truncated_normal", "uniform", "triangular"):
        return Support(params["low"], params["high"])
    if kind == "lognormal":
        m, s = np.log(params["median"]), params["sd_log"]
        return Support(float(np.exp(m - 4 * s)), float(np.exp(m + 4 * s)))
    raise ValueError(f"distribution kind must be one of {', '.join(KINDS)} (got {kind!r})")


def mean(kind: str, params: dict[str, float]) -> float:
    """Expected value of a distribution (used for one-at-a-time sensitivity bases)."""
    if kind == "constant":
        return float(params["value"])
    if kind == "normal":
        return float(params["mean"])
    if kind == "truncated_normal":
        mu, sd = params["mean"], params["sd"]
        a, b = (params["low"] - mu) / sd, (params["high"] - mu) / sd
        return float(stats.truncnorm.mean(a, b, loc=mu, scale=sd))
    if kind == "uniform":
        return 0.5 * (params["low"] + params["high"])
    if kind == "triangular":
        return (params["low"] + params["mode"] + params["high"]) / 3.0
    if kind == "lognormal":
        return float(params["median"] * np.exp(0.5 * params["sd_log"] ** 2))
    raise ValueError(f"distribution kind must be one of {', '.join(KINDS)} (got {kind!r})")


def quantile(kind: str, params: dict[str, float], q: float) -> float:
    """Quantile ``q`` (0..1) of a distribution (P10/P90 swings of a tornado chart)."""
    if not 0.0 <= q <= 1.0:
        raise ValueError(f"q must be between 0 and 1 (got {q:g})")
    if kind == "constant":
        return float(params["value"])
    if kind == "normal":
        return float(stats.norm.ppf(q, params["mean"], params["sd"]))
    if kind == "truncated_normal":
        mu, sd = params["mean"], params["sd"]
        a, b = (params["low"] - mu) / sd, (params["high"] - mu) / sd
        return float(stats.truncnorm.ppf(q, a, b, loc=mu, scale=sd))
    if kind == "uniform":
        return params["low"] + q * (params["high"] - params["low"])
    if kind == "triangular":
        lo, mo, hi = params["low"], params["mode"], params["high"]
        if hi == lo:
            return float(lo)
        return float(stats.triang.ppf(q, (mo - lo) / (hi - lo), loc=lo, scale=hi - lo))
    if kind == "lognormal":
        return float(stats.lognorm.ppf(q, params["sd_log"], scale=params["median"]))
    raise ValueError(f"distribution kind must be one of {', '.join(KINDS)} (got {kind!r})")
