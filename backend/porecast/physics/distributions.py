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
        return rng.normal(params["mean"], params["sd"], size)
    if kind == "truncated_normal":
        mean, sd = params["mean"], params["sd"]
        a = (params["low"] - mean) / sd
        b = (params["high"] - mean) / sd
        # Inverse-CDF sampling; scipy's ndtri keeps it vectorised and exact.
        lo, hi = special.ndtr(a), special.ndtr(b)
        u = rng.uniform(lo, hi, size)
        return mean + sd * special.ndtri(u)
    if kind == "uniform":
        return rng.uniform(params["low"], params["high"], size)
    if kind == "triangular":
        if params["low"] == params["high"]:
            return np.full(size, float(params["low"]))
        return rng.triangular(params["low"], params["mode"], params["high"], size)
    if kind == "lognormal":
        return rng.lognormal(np.log(params["median"]), params["sd_log"], size)
    raise ValueError(f"distribution kind must be one of {', '.join(KINDS)} (got {kind!r})")


#: Kinds whose sampler turns each value into exactly one 64-bit output of the
#: bit generator (inverse-transform sampling from one uniform).
_ONE_OUTPUT_PER_VALUE = ("uniform", "truncated_normal", "triangular")


def skip(kind: str, params: dict[str, float], rng: np.random.Generator, size: int) -> bool:
    """Move ``rng`` past ``size`` draws of a distribution without computing them, if possible.

    Returns True when done: the next :func:`sample` call then returns exactly
    what it would have after drawing ``size`` values (the forward model skips
    inputs that no facies of a piece of the run reads, and saves the cost of
    the inverse normal CDF and of the generator). Returns False, leaving
    ``rng`` untouched, for the normal and lognormal laws, whose ziggurat
    sampler uses a varying number of outputs per value, or for a generator
    other than :class:`numpy.random.PCG64` (the one :func:`stream_for` makes);
    the caller must then draw.

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
