"""Calibration at wells: attributes from logs, facies from cut-offs, blind tests.

A well's logs (Vp, Vs, density, shale volume or gamma ray, water saturation)
are turned into the same seismic attributes the scenario predicts, computed at
each log sample against a *shale background*: a depth trend fitted to the
shale samples of the well, standing in for the cap rock above every sample.
Facies come from documented cut-offs; a blind test compares them with the
facies the scenario's classifier predicts from the well's attributes; the
amplitude scale factor maps seismic amplitude to reflectivity by least squares
through the origin at well ties.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from . import avo
from ._checks import FloatArray, as_finite, in_range

#: Shale cut-off on Vshale: above it a sample is shale (common practice, 0.35-0.5).
VSHALE_CUTOFF = 0.40
#: Water-saturation cut-off: a sand below it holds hydrocarbon (common practice, 0.5-0.7).
SW_CUTOFF = 0.60


class ShaleTrend(NamedTuple):
    """Linear depth trends ``value = a + b * depth`` of shale Vp, Vs and density."""

    vp: tuple[float, float]
    vs: tuple[float, float]
    density: tuple[float, float]
    depth_range_m: tuple[float, float]
    n_samples: int

    def at(self, depth_m: ArrayLike) -> tuple[FloatArray, FloatArray, FloatArray]:
        """Shale (vp m/s, vs m/s, density g/cm3) at the given depths (m)."""
        z = as_finite("depth_m", depth_m)
        return tuple(a + b * z for a, b in (self.vp, self.vs, self.density))  # type: ignore[return-value]


class Confusion(NamedTuple):
    """Blind-test result: counts, per-facies recall and precision, accuracy."""

    labels: tuple[str, ...]
    matrix: np.ndarray
    """Counts, shape (k, k): row = true facies, column = predicted facies."""
    recall: FloatArray
    """Per true facies, fraction correctly predicted (NaN when absent)."""
    precision: FloatArray
    """Per predicted facies, fraction that is right (NaN when never predicted)."""
    accuracy: float
    n_samples: int


class ScaleFactor(NamedTuple):
    """Least-squares amplitude-to-reflectivity scale ``reflectivity ~ scale * amplitude``."""

    scale: float
    r_squared: float
    residual_sd: float
    n_ties: int


def vshale_from_gamma_ray(gamma_ray_api: ArrayLike, gr_clean: float, gr_shale: float) -> FloatArray:
    """Linear gamma-ray index as shale volume (common practice), fraction 0..1.

    Parameters
    ----------
    gamma_ray_api : array_like
        Gamma ray, API units (NaN allowed for missing samples).
    gr_clean, gr_shale : float
        Gamma ray of clean sand and of pure shale, API; ``gr_clean < gr_shale``.

    Returns
    -------
    ndarray
        ``(GR - GR_clean) / (GR_shale - GR_clean)`` limited to 0..1 (the index
        is defined as a fraction; values outside the end members are the end
        members by definition, not a correction).
    """
    if not (np.isfinite(gr_clean) and np.isfinite(gr_shale) and gr_clean < gr_shale):
        raise ValueError(
            f"gr_clean ({gr_clean:g} API) must be finite and below gr_shale ({gr_shale:g} API)"
        )
    gr = np.asarray(gamma_ray_api, dtype=np.float64)
    return np.clip((gr - gr_clean) / (gr_shale - gr_clean), 0.0, 1.0)


def facies_from_cutoffs(
    vshale: ArrayLike,
    water_saturation: ArrayLike,
    *,
    shale: str,
    brine_sand: str,
    hydrocarbon_sand: str,
    vshale_cutoff: float = VSHALE_CUTOFF,
    sw_cutoff: float = SW_CUTOFF,
) -> np.ndarray:
    """Facies log from shale-volume and water-saturation cut-offs.

    Shale where ``vshale > vshale_cutoff``; otherwise hydrocarbon sand where
    ``water_saturation < sw_cutoff`` and brine sand elsewhere. Samples with a
    missing (NaN) input get the empty label ``""``.

    Parameters
    ----------
    vshale, water_saturation : array_like
        Fractions (0..1), NaN for missing samples.
    shale, brine_sand, hydrocarbon_sand : str
        Facies names of the scenario to use for each class.
    vshale_cutoff, sw_cutoff : float
        Cut-offs, fractions.

    Returns
    -------
    ndarray of str
    """
    in_range("vshale_cutoff", vshale_cutoff, 0.0, 1.0, low_open=True, high_open=True)
    in_range("sw_cutoff", sw_cutoff, 0.0, 1.0, low_open=True, high_open=True)
    v = np.asarray(vshale, dtype=np.float64)
    sw = np.asarray(water_saturation, dtype=np.float64)
    if v.shape != sw.shape:
        raise ValueError(f"vshale {v.shape} and water_saturation {sw.shape} differ in shape")
    for name, arr in (("vshale", v), ("water_saturation", sw)):
        ok = arr[np.isfinite(arr)]
        if ok.size and (ok.min() < 0 or ok.max() > 1):
            raise ValueError(f"{name} must be a fraction between 0 and 1 (got {ok.max():g})")
    width = max(len(shale), len(brine_sand), len(hydrocarbon_sand), 1)
    out = np.full(v.shape, "", dtype=f"<U{width}")
    known = np.isfinite(v) & np.isfinite(sw)
    is_shale = known & (v > vshale_cutoff)
    sand = known & ~is_shale
    out[is_shale] = shale
    out[sand & (sw < sw_cutoff)] = hydrocarbon_sand
    out[sand & (sw >= sw_cutoff)] = brine_sand
    return out


def fit_shale_trend(
    depth_m: ArrayLike, vp: ArrayLike, vs: ArrayLike, density: ArrayLike, is_shale: ArrayLike
) -> ShaleTrend:
    """Least-squares linear depth trends of shale Vp, Vs and density.

    Parameters
    ----------
    depth_m : array_like
        Depth of each log sample, m.
    vp, vs : array_like
        Velocities, m/s (NaN for missing).
    density : array_like
        Bulk density, g/cm3 (NaN for missing).
    is_shale : array_like of bool
        Which samples are shale (e.g. from :func:`facies_from_cutoffs`).

    Returns
    -------
    ShaleTrend

    Raises
    ------
    ValueError
        With fewer than 10 complete shale samples.
    """
    z = np.asarray(depth_m, dtype=np.float64)
    logs = [np.asarray(a, dtype=np.float64) for a in (vp, vs, density)]
    mask = np.asarray(is_shale, dtype=bool) & np.isfinite(z)
    for a in logs:
        mask &= np.isfinite(a)
    n = int(mask.sum())
    if n < 10:
        raise ValueError(
            f"a shale background trend needs at least 10 shale samples with Vp, Vs and density "
            f"(found {n}); check the shale cut-off or the depth interval"
        )
    zs = z[mask]
    design = np.stack([np.ones(n), zs], axis=1)
    coefs = [tuple(np.linalg.lstsq(design, a[mask], rcond=None)[0]) for a in logs]
    return ShaleTrend(coefs[0], coefs[1], coefs[2], (float(zs.min()), float(zs.max())), n)


def well_attributes(
    depth_m: ArrayLike,
    vp: ArrayLike,
    vs: ArrayLike,
    density: ArrayLike,
    trend: ShaleTrend,
    attributes: tuple[str, ...] | list[str],
) -> FloatArray:
    """The scenario's attributes at each log sample, against the shale background.

    Intercept and gradient are those of the interface between the shale trend
    (above) and the sample (below), by :func:`porecast.physics.avo.intercept_gradient`;
    acoustic impedance and Vp/Vs are those of the sample itself.

    Returns
    -------
    ndarray of shape (n_samples, n_attributes)
        NaN rows where any log is missing.
    """
    z = np.asarray(depth_m, dtype=np.float64)
    logs = [np.asarray(a, dtype=np.float64) for a in (vp, vs, density)]
    ok = np.isfinite(z)
    for a in logs:
        ok &= np.isfinite(a)
    out = np.full((z.size, len(attributes)), np.nan)
    if not ok.any():
        return out
    vp1, vs1, rho1 = trend.at(z[ok])
    vp2, vs2, rho2 = (a[ok] for a in logs)
    columns = {}
    if {"intercept", "gradient"} & set(attributes):
        ig = avo.intercept_gradient(vp1, vs1, rho1, vp2, vs2, rho2)
        columns["intercept"], columns["gradient"] = ig.intercept, ig.gradient
    if "acoustic_impedance" in attributes:
        columns["acoustic_impedance"] = avo.acoustic_impedance(vp2, rho2)
    if "vp_vs" in attributes:
        columns["vp_vs"] = avo.vp_vs_ratio(vp2, vs2)
    for j, name in enumerate(attributes):
        if name not in columns:
            raise ValueError(f"unknown attribute {name!r}")
        out[ok, j] = columns[name]
    return out


def block_logs(depth_m: ArrayLike, values: ArrayLike, window_m: float) -> FloatArray:
    """Running mean of log values over a depth window (seismic-scale blocking).

    Parameters
    ----------
    depth_m : array_like, shape (n,)
        Increasing depths, m.
    values : array_like, shape (n,) or (n, m)
        Log values; NaN samples are left out of each window's mean.
    window_m : float
        Window length, m (> 0).

    Returns
    -------
    ndarray, same shape as ``values``
    """
    in_range("window_m", window_m, 0.0, low_open=True, unit="m")
    z = as_finite("depth_m", depth_m)
    if np.any(np.diff(z) <= 0):
        raise ValueError("depth_m must be strictly increasing")
    v = np.asarray(values, dtype=np.float64)
    two_d = v.reshape(v.shape[0], -1)
    finite = np.isfinite(two_d)
    csum = np.vstack([np.zeros((1, two_d.shape[1])), np.cumsum(np.where(finite, two_d, 0), 0)])
    ccount = np.vstack([np.zeros((1, two_d.shape[1])), np.cumsum(finite, 0)])
    lo = np.searchsorted(z, z - window_m / 2, side="left")
    hi = np.searchsorted(z, z + window_m / 2, side="right")
    count = ccount[hi] - ccount[lo]
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = (csum[hi] - csum[lo]) / count
    mean[count == 0] = np.nan
    return mean.reshape(v.shape)


def confusion(
    true: ArrayLike, predicted: ArrayLike, labels: list[str] | tuple[str, ...]
) -> Confusion:
    """Confusion matrix of a blind test with per-facies recall and precision.

    Samples whose true or predicted label is not in ``labels`` (e.g. ``""``
    for missing data or an "unclassified" prediction) are left out.
    """
    t = np.asarray(true)
    p = np.asarray(predicted)
    if t.shape != p.shape:
        raise ValueError(f"true {t.shape} and predicted {p.shape} differ in shape")
    index = {name: i for i, name in enumerate(labels)}
    k = len(labels)
    ti = np.array([index.get(x, -1) for x in t.ravel()], dtype=int)
    pi = np.array([index.get(x, -1) for x in p.ravel()], dtype=int)
    keep = (ti >= 0) & (pi >= 0)
    matrix = np.zeros((k, k), dtype=np.int64)
    np.add.at(matrix, (ti[keep], pi[keep]), 1)
    rows, cols = matrix.sum(1), matrix.sum(0)
    diag = np.diag(matrix).astype(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        recall = np.where(rows > 0, diag / rows, np.nan)
        precision = np.where(cols > 0, diag / cols, np.nan)
    n = int(keep.sum())
    return Confusion(
        tuple(labels), matrix, recall, precision, float(diag.sum() / n) if n else float("nan"), n
    )


def amplitude_scale_factor(amplitude: ArrayLike, reflectivity: ArrayLike) -> ScaleFactor:
    """Least-squares scale through the origin from seismic amplitude to reflectivity.

    ``scale = sum(a r) / sum(a^2)`` minimises ``sum (r - scale a)^2`` over the
    well ties (pairs of seismic amplitude and well-derived reflectivity).
    """
    a = np.asarray(amplitude, dtype=np.float64).ravel()
    r = np.asarray(reflectivity, dtype=np.float64).ravel()
    if a.shape != r.shape:
        raise ValueError(f"amplitude {a.shape} and reflectivity {r.shape} differ in shape")
    ok = np.isfinite(a) & np.isfinite(r)
    a, r = a[ok], r[ok]
    if a.size < 2 or not np.any(a != 0):
        raise ValueError("an amplitude scale factor needs at least 2 ties with non-zero amplitude")
    scale = float(a @ r / (a @ a))
    resid = r - scale * a
    ss_tot = float(r @ r)
    r2 = 1.0 - float(resid @ resid) / ss_tot if ss_tot > 0 else float("nan")
    return ScaleFactor(scale, r2, float(np.sqrt(resid @ resid / max(a.size - 1, 1))), int(a.size))
