"""Per-facies probability densities besides the Gaussian, and tests of the Gaussian fit.

Two things a facies classifier needs when a Gaussian is a poor description of a
facies' attribute cloud:

* :func:`gaussian_fit_tests` -- how badly a sample departs from a multivariate
  normal: Mardia's (1970) multivariate skewness and kurtosis tests and a
  Kolmogorov-Smirnov test of the squared Mahalanobis distances against their exact
  distribution under normality (Gnanadesikan & Kettenring 1972).
* :class:`GaussianKernelDensity` -- a Gaussian kernel density estimate (Scott 1992;
  Silverman 1986) evaluated in log space, for facies whose cloud is skewed,
  truncated or multi-modal.

Attributes are whatever the caller classifies on (intercept, gradient, impedance
in m/s*g/cm3, Vp/Vs ...); nothing here depends on their unit, because every
statistic is computed in the whitened space of the sample covariance.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from porecast.physics._checks import as_finite

FloatArray = NDArray[np.float64]

__all__ = [
    "GaussianFitTests",
    "GaussianKernelDensity",
    "gaussian_fit_tests",
    "kde_bandwidth_factor",
]

# Rows of x times kernel centres evaluated at once in GaussianKernelDensity.log_pdf:
# 2**20 float64 = 8 MB of temporaries, whatever the size of x.
_KDE_BLOCK_ELEMENTS = 2**20


class GaussianFitTests(NamedTuple):
    """Goodness of fit of a multivariate normal to one sample (or arrays of them).

    Attributes
    ----------
    skewness : float or ndarray
        Mardia's multivariate skewness b_{1,d} (0 for a normal population).
    skewness_p_value : float or ndarray
        p-value of n*b_{1,d}/6 against chi2 with d(d+1)(d+2)/6 degrees of freedom.
    kurtosis : float or ndarray
        Mardia's multivariate kurtosis b_{2,d} (d(d+2) for a normal population).
    kurtosis_p_value : float or ndarray
        Two-sided p-value of (b_{2,d} - d(d+2)) / sqrt(8 d(d+2) / n) against N(0, 1).
    ks_statistic : float or ndarray
        Kolmogorov-Smirnov distance between the squared Mahalanobis distances,
        scaled by n/(n-1)^2, and Beta(d/2, (n-d-1)/2).
    ks_p_value : float or ndarray
        p-value of that statistic.
    """

    skewness: FloatArray | float
    skewness_p_value: FloatArray | float
    kurtosis: FloatArray | float
    kurtosis_p_value: FloatArray | float
    ks_statistic: FloatArray | float
    ks_p_value: FloatArray | float


def _as_sample(name: str, samples: ArrayLike) -> FloatArray:
    arr = as_finite(name, samples)
    if arr.ndim != 2:
        raise ValueError(
            f"{name} must be an array of shape (n_samples, n_features); got shape {arr.shape}"
        )
    n, d = arr.shape
    if d < 1:
        raise ValueError(f"{name} must have at least one feature; got shape {arr.shape}")
    if n < d + 1:
        raise ValueError(
            f"{name} has {n} samples of {d} features; a covariance needs at least "
            f"n_features + 1 = {d + 1} samples"
        )
    return arr


def mardia_skewness_kurtosis(samples: ArrayLike) -> tuple[float, float]:
    """Mardia's multivariate skewness b_{1,d} and kurtosis b_{2,d}.

    Mardia (1970), Biometrika 57(3), 519-530, eqs. 2.5 and 2.6 (equation numbers from
    memory)::

        b1 = (1/n^2) sum_i sum_j [(x_i - m)' S^-1 (x_j - m)]^3
        b2 = (1/n)   sum_i       [(x_i - m)' S^-1 (x_i - m)]^2

    with m the sample mean and S the biased (divide-by-n) sample covariance. The
    double sum is evaluated without the n x n matrix: with z the whitened data,
    ``b1 = sum_{r,s,t} (mean_i z_ir z_is z_it)^2`` (same algebra, O(n d^3)).

    Parameters
    ----------
    samples : array_like of shape (n_samples, n_features)
        One facies' attribute sample, any attribute units.

    Returns
    -------
    tuple of float
        (b1, b2), dimensionless.
    """
    arr = _as_sample("samples", samples)
    n = arr.shape[0]
    centred = arr - arr.mean(axis=0)
    chol = _cholesky_or_raise(centred.T @ centred / n, "samples")
    z = _whiten(centred, chol)
    third = np.einsum("ir,is,it->rst", z, z, z, optimize=True) / n
    b1 = float(np.sum(third**2))
    b2 = float(np.mean(np.sum(z**2, axis=1) ** 2))
    return b1, b2


def gaussian_fit_tests(samples: ArrayLike) -> GaussianFitTests:
    """Tests of how well one multivariate normal describes a sample.

    * Mardia (1970) skewness: ``A = n b1 / 6`` is asymptotically chi2 with
      ``d(d+1)(d+2)/6`` degrees of freedom.
    * Mardia (1970) kurtosis: ``(b2 - d(d+2)) / sqrt(8 d(d+2)/n)`` is asymptotically
      standard normal; the p-value is two-sided.
    * Kolmogorov-Smirnov test of the squared Mahalanobis distances D_i^2 (sample
      mean, sample covariance with n-1): under normality ``n D_i^2 / (n-1)^2``
      follows Beta(d/2, (n-d-1)/2) exactly (Gnanadesikan & Kettenring 1972,
      Biometrics 28, 81-124, from memory); it tends to chi2(d) for large n. The D_i
      are weakly dependent, so the p-value is approximate (conservative in practice).

    Small p-values mean the Gaussian is a poor choice for that facies; consider
    ``density="kde"`` for it.

    Parameters
    ----------
    samples : array_like of shape (n_samples, n_features)
        One facies' attribute sample (at least n_features + 1 rows).

    Returns
    -------
    GaussianFitTests
        Statistics and p-values; the tests that need n > n_features + 1 return NaN
        when n = n_features + 1.
    """
    from scipy import stats  # imported here: scipy.stats takes ~1 s to import

    arr = _as_sample("samples", samples)
    n, d = arr.shape
    b1, b2 = mardia_skewness_kurtosis(arr)
    skew_dof = d * (d + 1) * (d + 2) / 6.0
    skew_p = float(stats.chi2.sf(n * b1 / 6.0, skew_dof))
    kurt_z = (b2 - d * (d + 2)) / np.sqrt(8.0 * d * (d + 2) / n)
    kurt_p = float(2.0 * stats.norm.sf(abs(kurt_z)))
    if n > d + 1:
        centred = arr - arr.mean(axis=0)
        chol = _cholesky_or_raise(np.cov(arr, rowvar=False, ddof=1).reshape(d, d), "samples")
        d2 = np.sum(_whiten(centred, chol) ** 2, axis=1)
        scaled = n * d2 / (n - 1) ** 2
        ks = stats.kstest(scaled, stats.beta(d / 2.0, (n - d - 1) / 2.0).cdf)
        ks_stat, ks_p = float(ks.statistic), float(ks.pvalue)
    else:
        ks_stat = ks_p = float("nan")
        skew_p = kurt_p = float("nan")
    return GaussianFitTests(b1, skew_p, b2, kurt_p, ks_stat, ks_p)


def kde_bandwidth_factor(n: int, d: int, rule: str | float) -> float:
    """Bandwidth factor of a Gaussian kernel density estimate.

    The kernel covariance is ``factor**2`` times the sample covariance (the
    convention of ``scipy.stats.gaussian_kde``).

    * Scott (1992), *Multivariate Density Estimation*: ``n**(-1/(d+4))``.
    * Silverman (1986), *Density Estimation for Statistics and Data Analysis*:
      ``(n (d+2) / 4)**(-1/(d+4))``.

    Both rules are the forms scipy.stats.gaussian_kde documents; the test suite
    checks the densities against it.

    Parameters
    ----------
    n : int
        Number of kernel centres.
    d : int
        Number of features.
    rule : {"scott", "silverman"} or float
        Rule name, or the factor itself (dimensionless, > 0).

    Returns
    -------
    float
        Dimensionless factor.
    """
    if isinstance(rule, str):
        if rule == "scott":
            return float(n ** (-1.0 / (d + 4)))
        if rule == "silverman":
            return float((n * (d + 2) / 4.0) ** (-1.0 / (d + 4)))
        raise ValueError(
            f"bandwidth must be 'scott', 'silverman' or a positive number; got {rule!r}"
        )
    factor = float(rule)
    if not np.isfinite(factor) or factor <= 0.0:
        raise ValueError(f"bandwidth must be greater than 0 (got {factor:g})")
    return factor


class GaussianKernelDensity:
    """Gaussian kernel density estimate of one facies, evaluated in log space.

    ``log f(x) = logsumexp_j [ -0.5 (x - c_j)' H^-1 (x - c_j) ] - 0.5 log det(2 pi H)
    - log m`` over m kernel centres c_j with kernel covariance H = factor^2 * S
    (S the sample covariance of the centres, n-1 normalisation), as in
    ``scipy.stats.gaussian_kde``; the log-sum-exp keeps points far from every centre
    finite instead of underflowing to log(0).

    Cost is O(m d) per evaluated point. When the sample has more than ``max_points``
    rows, ``max_points`` of them are drawn without replacement (seeded by
    ``random_state``) and become the centres; the bandwidth rule then uses m =
    ``max_points``, so the estimate is exactly the KDE of that subsample. With the
    default 2000 centres a classification costs about 2000 kernel evaluations per
    point per KDE facies -- use the Gaussian density for cubes when its fit tests
    allow it.

    Parameters
    ----------
    bandwidth : {"scott", "silverman"} or float
        Bandwidth rule or factor (see :func:`kde_bandwidth_factor`).
    max_points : int
        Most kernel centres kept (>= 2).
    random_state : int
        Seed of the subsample.

    Attributes
    ----------
    centres_ : ndarray of shape (n_centres, n_features)
    factor_ : float
    kernel_covariance_ : ndarray of shape (n_features, n_features)
    n_samples_ : int
        Rows in the sample given to ``fit`` (before subsampling).
    """

    def __init__(
        self, *, bandwidth: str | float = "scott", max_points: int = 2000, random_state: int = 0
    ) -> None:
        self.bandwidth = bandwidth
        self.max_points = max_points
        self.random_state = random_state

    def fit(self, samples: ArrayLike) -> GaussianKernelDensity:
        """Choose kernel centres and bandwidth from one facies' sample.

        Parameters
        ----------
        samples : array_like of shape (n_samples, n_features)

        Returns
        -------
        GaussianKernelDensity
            self
        """
        arr = _as_sample("samples", samples)
        if int(self.max_points) < 2:
            raise ValueError(f"max_points must be at least 2 (got {self.max_points})")
        n, d = arr.shape
        if n > self.max_points:
            rng = np.random.default_rng(self.random_state)
            arr = arr[np.sort(rng.choice(n, size=int(self.max_points), replace=False))]
        m = arr.shape[0]
        if m < d + 1:
            raise ValueError(
                f"max_points={self.max_points} keeps fewer than n_features + 1 = {d + 1} centres"
            )
        self.factor_ = kde_bandwidth_factor(m, d, self.bandwidth)
        cov = np.cov(arr, rowvar=False, ddof=1).reshape(d, d)
        self.kernel_covariance_ = cov * self.factor_**2
        chol = _cholesky_or_raise(self.kernel_covariance_, "samples")
        self._shift = arr.mean(axis=0)
        self._chol = chol
        self._z_centres = _whiten(arr - self._shift, chol)
        self._z_centres_sq = np.sum(self._z_centres**2, axis=1)
        self._log_norm = -0.5 * d * np.log(2.0 * np.pi) - np.sum(np.log(np.diag(chol))) - np.log(m)
        self.centres_ = arr
        self.n_samples_ = n
        return self

    def log_pdf(self, x: ArrayLike) -> FloatArray:
        """Log probability density at each row of x.

        Parameters
        ----------
        x : array_like of shape (n_points, n_features)
            Finite attributes, same units as the fitted sample.

        Returns
        -------
        ndarray of shape (n_points,)
            Natural log of the density (units: log of 1 / product of attribute units).
        """
        if not hasattr(self, "centres_"):
            raise ValueError("GaussianKernelDensity is not fitted; call fit(samples) first")
        arr = as_finite("x", x)
        d = self.centres_.shape[1]
        if arr.ndim != 2 or arr.shape[1] != d:
            raise ValueError(f"x must have shape (n_points, {d}); got shape {arr.shape}")
        return self._log_pdf_finite(arr)

    def _log_pdf_finite(self, arr: FloatArray) -> FloatArray:
        from scipy import special

        out = np.empty(arr.shape[0])
        m = self._z_centres.shape[0]
        rows = max(1, _KDE_BLOCK_ELEMENTS // m)
        for start in range(0, arr.shape[0], rows):
            z = _whiten(arr[start : start + rows] - self._shift, self._chol)
            # Squared whitened distances through one matrix product; the data are
            # centred on the centres' mean, which keeps the cancellation in
            # |z|^2 - 2 z.c + |c|^2 at the 1e-13 level for points near the data.
            sq = np.sum(z**2, axis=1)[:, None] - 2.0 * (z @ self._z_centres.T)
            sq += self._z_centres_sq
            out[start : start + rows] = special.logsumexp(-0.5 * sq, axis=1)
        return out + self._log_norm


def _cholesky_or_raise(cov: FloatArray, name: str) -> FloatArray:
    try:
        return np.asarray(np.linalg.cholesky(cov), dtype=np.float64)
    except np.linalg.LinAlgError:
        raise ValueError(
            f"{name}: the sample covariance is not positive definite (collinear or constant "
            "attributes)"
        ) from None


def _whiten(centred: FloatArray, chol: FloatArray) -> FloatArray:
    """Rows of ``L^-1 (x - m)`` for lower-triangular L, by forward substitution.

    One column at a time in numpy (d is a handful of attributes). scipy's
    solve_triangular took 6.7 ms per call on (100, 2) samples on a busy 2-core
    machine (LAPACK's threaded triangular solve waiting for a core), which made the
    fit tests 95 % of training a scenario's PDFs; this loop takes microseconds.
    """
    z = np.empty_like(centred)
    for a in range(chol.shape[0]):
        z[:, a] = (centred[:, a] - z[:, :a] @ chol[a, :a]) / chol[a, a]
    return z
