"""Bayesian facies classification with stationary and non-stationary Gaussian densities.

Each facies j has a density p(x | j) over the attribute vector x (intercept and
gradient, impedance and Vp/Vs, ... in whatever units the caller classifies in) and
a prior probability pi_j, constant or from a prior map. The posterior is Bayes'
rule, evaluated in log space (quadratic discriminant analysis; Hastie, Tibshirani
& Friedman 2009, *The Elements of Statistical Learning*, 2nd ed., section 4.3,
eq. 4.12, from memory)::

    log p(x | j) = -d/2 log(2 pi) - sum_a log L_j[a, a] - 1/2 |L_j^-1 (x - mu_j)|^2
    log P(j | x) = log pi_j + log p(x | j) - logsumexp_i (log pi_i + log p(x | i))

with L_j the Cholesky factor of the covariance Sigma_j, so the log-determinant comes
from the Cholesky diagonal (for interpolated covariances: from the pivots of an
LDL' factorisation, or the closed-form 2 x 2 determinant; no matrix inverse is
formed per location) and a point 1000 standard deviations from every facies
still gets finite posteriors summing to 1 (the largest term of the log-sum-exp is
exp(0)). ``|L_j^-1 (x - mu_j)|`` is the Mahalanobis (1936) distance of x to facies j;
the distance to the most likely facies is the QC figure, and the Shannon (1948)
entropy of the posterior (in nats, optionally divided by log k) the uncertainty.

Non-stationary densities (the attribute distribution of every facies changes with
burial history across the map) are fitted at the nodes of a regular grid over one
or more covariates (e.g. uplift x present depth x gradient). At a location, the
means and covariances are the multilinear interpolation of the corner nodes of its
grid cell: non-negative weights summing to 1, so the interpolated covariance is a
convex combination of positive definite matrices and stays positive definite.
Covariates outside the node range are clamped to the end nodes and counted.

Entry points (x is always an array of shape (n_points, n_features); rows are
independent, so a cube can be streamed through any of them block by block with
bounded memory and the result is the same as for one call):

* :func:`posterior`, :func:`posterior_nonstationary` -- strict: reject NaN/inf.
* :func:`classify` and ``classify`` of the model classes -- for maps and cubes:
  rows with a NaN (no data, dead traces) come back with NaN posteriors and
  ``most_likely = -1`` and are never classified.
* :class:`GaussianFacies`, :class:`NonstationaryGaussianFacies` -- fit from
  samples (Monte Carlo realisations per facies, per covariate node).

Engines. ``engine="numba"`` runs compiled kernels (compiled on first use per
(n_features, n_facies, n_axes), cached on disk; numba is imported only then, so
importing this module stays fast). ``engine="numpy"`` is the reference path the
tests validate the kernels against, and the fallback when numba is not installed.
Why numba: measured on the benchmark case (n = 10^7, d = 2, k = 6, one core) the
numpy engine (per-facies matrix products, then max/exp/sum/divide over (chunk, k)
arrays) runs at 2-3e6 samples/s, about scikit-learn's speed, because every step is
a separate pass over memory. A compiled kernel that works on 256-row blocks kept in
L1 cache makes one pass over the data; with the facies, feature and axis counts as
compile-time constants the block loops vectorise (AVX2/AVX-512). numba's own
``exp``/``log`` are scalar libm calls (~8 ns each without Intel SVML), which capped
a first kernel at ~7e6 samples/s, so the kernels carry their own vectorisable exp
(Cody & Waite 1980 range reduction, degree-11 minimax polynomial, relative error
below 2e-16) and log (atanh series), checked against numpy in the tests.
Per 10^7 rows and 6 facies on one Xeon core with AVX-512 (LLVM's default 256-bit
vectors, noisy shared machine, benchmarks/classify.py): :func:`posterior` 0.17-0.18 s,
0.12-0.13 s when it writes into a reused array (``out=``; the difference is the page
faults of a fresh 480 MB result); the one-covariate non-stationary posterior
0.33-0.36 s (interpolation and closed-form q for each of the 6e7 row-facies pairs, see
the fused path of the gridded kernel); :func:`classify` 0.31 s, non-stationary 0.48-0.57
s (a log determinant per pair for the entropy). The notes beside the kernels say what
decided these figures.
"""

from __future__ import annotations

import importlib.util
import threading
from collections.abc import Callable, Mapping, Sequence
from typing import Any, NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from porecast.physics._checks import as_finite, in_range
from porecast.physics.density import GaussianFitTests, GaussianKernelDensity, gaussian_fit_tests

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

__all__ = [
    "Classification",
    "GaussianFacies",
    "NonstationaryGaussianFacies",
    "classify",
    "log_likelihood",
    "mahalanobis",
    "posterior",
    "posterior_nonstationary",
]

# Output modes of the one private evaluation core (numba kernel and numpy path).
_POSTERIOR = 0  # P(j | x)
_LOG_POSTERIOR = 1  # log P(j | x)
_SQ_MAHALANOBIS = 2  # squared Mahalanobis distance to each facies
_LOG_LIKELIHOOD = 3  # log p(x | j), no prior

# Rows per block in the compiled kernels: k x 256 float64 buffers fit in L1 cache.
_BLOCK = 256
# Facies lanes of the fused one-covariate, two-attribute path of the gridded kernel.
_LANES = 8
# Up to this many facies _finish_block handles a row's facies in registers (see there).
_ROW_LOOP_MAX_FACIES = 7
# Rows per chunk of the numpy path: bounds its temporaries to a few MB per facies.
_NUMPY_CHUNK = 65536
# A prior map is a probability per location: rows must sum to 1 within this
# (allows float32 rounding in a stored map; the posterior renormalises anyway).
_PRIOR_SUM_TOLERANCE = 1e-6
# Covariances must be symmetric up to rounding: |S_ab - S_ba| <= tol * sqrt(S_aa S_bb).
_SYMMETRY_TOLERANCE = 1e-10

# Constants of the vectorisable exp and log (IEEE 754 double).
_LN2_HI = 6.93147180369123816490e-01  # first 32 bits of ln 2 (Cody & Waite split)
_LN2_LO = 1.90821492927058770002e-10  # ln 2 - _LN2_HI
_INV_LN2 = 1.44269504088896338700e00
_SQRT2 = 1.41421356237309504880
# exp(t) is flushed to 0 below this: the largest term of every sum is exp(0) = 1, so
# the flushed terms change a posterior by less than exp(-708) ~ 3e-308.
_EXP_FLOOR = -708.0
_MANTISSA_BITS = 0x000FFFFFFFFFFFFF
_EXPONENT_ONE = 0x3FF0000000000000
_SMALLEST_NORMAL_BITS = 0x0010000000000000
_SMALLEST_NORMAL = 2.2250738585072014e-308
_INFINITY_BITS = 0x7FF0000000000000
_HUGE_DET = 2.0**1023  # from here on 2**-e of det = 2**e m is not a normal number
_HUGE_DET_BITS = 0x7FE0000000000000
# Quadratic start for m**-1/2 on [1, 2] (Chebyshev interpolant, relative error 3.6e-3).
_RSQRT_C0 = 1.57368075
_RSQRT_C1 = -0.72223657
_RSQRT_C2 = 0.14496475
_HALF_LOG_2PI = 0.91893853320467274178
# kd = x + _ROUND_SHIFT (1.5 * 2**52) rounds x to an integer held in kd's low bits.
_ROUND_SHIFT = 6755399441055744.0
# exp(r) ~ 1 + r + r^2/2 + sum_{i=3..11} c_i r^i on |r| <= ln(2)/2: minimax (Remez
# exchange, relative error, 80-digit arithmetic), relative error 3.5e-17 with these
# double coefficients.
_EXP_C3 = 0.16666666666661964
_EXP_C4 = 0.04166666666661969
_EXP_C5 = 0.008333333336616542
_EXP_C6 = 0.0013888888921695117
_EXP_C7 = 0.00019841262499151825
_EXP_C8 = 2.4801513824369424e-05
_EXP_C9 = 2.7563909164788236e-06
_EXP_C10 = 2.7623545365341976e-07
_EXP_C11 = 2.300439975612011e-08


class Classification(NamedTuple):
    """Result of a classification, one entry per row of x.

    Attributes
    ----------
    posterior : ndarray of shape (n_points, n_facies)
        P(facies | x), rows sum to 1; NaN rows where x (or a covariate) is NaN.
    most_likely : ndarray of shape (n_points,), int64
        Index of the most likely facies; -1 where unclassified.
    mahalanobis : ndarray of shape (n_points,)
        Mahalanobis distance (dimensionless, in standard deviations) from x to the
        Gaussian of the most likely facies; NaN for no data.
    entropy : ndarray of shape (n_points,)
        Shannon entropy of the posterior in nats (0 = certain, log k = uniform), or
        divided by log k (0 to 1) when ``normalised_entropy`` was asked; NaN for no data.
    unclassified : ndarray of shape (n_points,), bool
        True for no-data rows and rows farther than ``max_mahalanobis`` from every facies.
    n_clamped : int
        Rows whose covariates lay outside the node range on at least one axis
        (clamped to the end nodes); 0 for stationary densities.
    """

    posterior: FloatArray
    most_likely: IntArray
    mahalanobis: FloatArray
    entropy: FloatArray
    unclassified: NDArray[np.bool_]
    n_clamped: int


class _Gaussians(NamedTuple):
    """Stationary Gaussians prepared for evaluation."""

    mean: FloatArray  # (k, d)
    winv: FloatArray  # (k, d, d) inverse of the lower Cholesky factor
    log_norm: FloatArray  # (k,) -d/2 log(2 pi) - sum log diag L


class _GriddedGaussians(NamedTuple):
    """Gaussians at the nodes of a covariate grid, prepared for evaluation."""

    node_values: FloatArray  # all axes' nodes, concatenated
    node_offsets: IntArray  # (n_axes + 1,) start of each axis in node_values
    strides: IntArray  # (n_axes,) C-order strides of the flattened grid
    params: FloatArray  # (n_nodes, >= k * P): per facies P = d + d(d+1)/2 values, the
    # mean then the packed lower covariance; zero padding after k * P
    n_features: int
    n_facies: int


class _Raw(NamedTuple):
    """Outputs of the evaluation core; ``counts`` as documented in ``_COUNT_*``."""

    values: FloatArray | None
    most_likely: IntArray | None
    q_win: FloatArray | None
    q_min: FloatArray | None
    entropy: FloatArray | None
    counts: IntArray


# Indices into _Raw.counts.
_COUNT_X_NAN, _COUNT_X_INF, _COUNT_COV_NAN, _COUNT_COV_INF, _COUNT_CLAMPED, _COUNT_NOT_PD = range(6)


# --------------------------------------------------------------------------------------
# Argument checks
# --------------------------------------------------------------------------------------


def _as_points(x: ArrayLike, name: str = "x") -> FloatArray:
    """x as a C-contiguous float64 array of shape (n_points, n_features).

    Finiteness is checked by the evaluation core (in the same pass as the
    arithmetic, which a separate ``isfinite`` pass would double for large cubes).
    """
    arr = np.ascontiguousarray(x, dtype=np.float64)
    if arr.ndim != 2 or arr.shape[1] < 1:
        raise ValueError(
            f"{name} must be an array of shape (n_points, n_features); got shape {arr.shape}"
        )
    return arr


def _check_means(means: ArrayLike, d: int, lead: tuple[int, ...], lead_text: str) -> FloatArray:
    arr = as_finite("means", means)
    if arr.ndim != len(lead) + 2 or arr.shape[: len(lead)] != lead or arr.shape[-1] != d:
        expected = f"({lead_text}n_facies, {d})" if lead_text else f"(n_facies, {d})"
        raise ValueError(
            f"means must have shape {expected} (n_features = {d} from x); got shape {arr.shape}"
        )
    return arr


def _check_covariances(covariances: ArrayLike, means: FloatArray) -> FloatArray:
    arr = as_finite("covariances", covariances)
    *lead, k, d = means.shape
    expected = (*lead, k, d, d)
    if arr.shape != expected:
        raise ValueError(f"covariances must have shape {expected}; got shape {arr.shape}")
    return arr


def _facies_cholesky(cov: FloatArray, where: str) -> FloatArray:
    """Lower Cholesky factor of one covariance, or ValueError naming ``where``."""
    scale = np.sqrt(np.abs(np.outer(np.diag(cov), np.diag(cov))))
    asym = np.abs(cov - cov.T)
    if np.any(asym > _SYMMETRY_TOLERANCE * scale):
        raise ValueError(f"{where} is not symmetric")
    try:
        chol = np.asarray(np.linalg.cholesky(cov), dtype=np.float64)
    except np.linalg.LinAlgError:
        raise ValueError(f"{where} is not positive definite") from None
    if not np.all(np.diag(chol) > 0.0):
        raise ValueError(f"{where} is not positive definite")
    return chol


def _prepare_gaussians(means: FloatArray, covariances: FloatArray) -> _Gaussians:
    from scipy.linalg import solve_triangular  # lazy: keeps the module import light

    k, d = means.shape
    winv = np.zeros((k, d, d))
    log_norm = np.empty(k)
    for j in range(k):
        chol = _facies_cholesky(covariances[j], f"covariances[{j}] (facies {j})")
        winv[j] = np.tril(solve_triangular(chol, np.eye(d), lower=True))
        log_norm[j] = -d * _HALF_LOG_2PI - np.sum(np.log(np.diag(chol)))
    return _Gaussians(np.ascontiguousarray(means), winv, log_norm)


def _check_axis(name: str, nodes: ArrayLike) -> FloatArray:
    arr = as_finite(name, nodes)
    if arr.ndim != 1 or arr.size < 1:
        raise ValueError(f"{name} must be a 1-D array of at least one node; got shape {arr.shape}")
    steps = np.diff(arr)
    if np.any(steps <= 0.0):
        i = int(np.argmax(steps <= 0.0)) + 1
        raise ValueError(
            f"{name} must be strictly increasing (got {name}[{i}] = {arr[i]:g} after "
            f"{name}[{i - 1}] = {arr[i - 1]:g})"
        )
    return arr


def _prepare_gridded(
    axes: Sequence[FloatArray], means: FloatArray, covariances: FloatArray
) -> _GriddedGaussians:
    """Validate node covariances and pack the grid for the evaluation core.

    means : (*grid_shape, k, d); covariances : (*grid_shape, k, d, d).
    """
    grid_shape = tuple(len(a) for a in axes)
    k, d = means.shape[-2:]
    n_nodes = int(np.prod(grid_shape))
    flat_means = means.reshape(n_nodes, k, d)
    flat_covs = covariances.reshape(n_nodes, k, d, d)
    rows, cols = np.tril_indices(d)
    n_par = d + rows.size
    # Padded to a multiple of 8 columns: the kernel's contiguous interpolation loop
    # then runs without a scalar remainder (it writes whole padded rows; measured 7%
    # on the whole one-covariate kernel for k = 6, d = 2).
    n_cols = -(-k * n_par // 8) * 8
    params = np.zeros((n_nodes, n_cols))
    for node in range(n_nodes):
        index = np.unravel_index(node, grid_shape)
        for j in range(k):
            where = f"covariances[{', '.join(str(int(i)) for i in index)}, {j}] (facies {j})"
            _facies_cholesky(flat_covs[node, j], where)
    packed = np.concatenate([flat_means, flat_covs[:, :, rows, cols]], axis=2)  # (M, k, P)
    params[:, : k * n_par] = packed.reshape(n_nodes, k * n_par)
    strides = np.ones(len(axes), dtype=np.int64)
    for a in range(len(axes) - 2, -1, -1):
        strides[a] = strides[a + 1] * grid_shape[a + 1]
    offsets = np.concatenate([[0], np.cumsum(grid_shape)]).astype(np.int64)
    return _GriddedGaussians(
        np.ascontiguousarray(np.concatenate(axes), dtype=np.float64),
        offsets,
        strides,
        np.ascontiguousarray(params),
        d,
        k,
    )


def _check_out(out: Any, n: int, k: int, inputs: Mapping[str, NDArray[Any]]) -> FloatArray:
    """``out`` as the array the result is written into, or ValueError naming the fault."""
    expected = f"a writeable C-contiguous float64 array of shape (n_points, n_facies) = ({n}, {k})"
    if not isinstance(out, np.ndarray):
        raise ValueError(f"out must be {expected}; got {type(out).__name__}")
    if out.shape != (n, k) or out.dtype != np.float64:
        raise ValueError(f"out must be {expected}; got {out.dtype} of shape {out.shape}")
    if not (out.flags.c_contiguous and out.flags.writeable):
        raise ValueError(f"out must be {expected}; got a non-contiguous or read-only array")
    for name, arr in inputs.items():
        if np.may_share_memory(out, arr):
            raise ValueError(f"out must not share memory with {name}")
    return out


def _log_priors(priors: ArrayLike | None, n: int, k: int) -> FloatArray:
    """Priors as log-probabilities of shape (1, k) or (n, k)."""
    if priors is None:
        return np.full((1, k), -np.log(k))
    arr = as_finite("priors", priors)
    if arr.shape == (k,):
        arr = arr[None, :]
    elif arr.shape != (n, k):
        raise ValueError(
            f"priors must have shape (n_facies,) = ({k},) or (n_points, n_facies) = ({n}, {k});"
            f" got shape {arr.shape}"
        )
    in_range("priors", arr, 0.0, 1.0)
    sums = arr.sum(axis=1)
    bad = np.abs(sums - 1.0) > _PRIOR_SUM_TOLERANCE
    if np.any(bad):
        row = int(np.argmax(bad))
        raise ValueError(
            f"priors must sum to 1 over the facies (fractions, not percent); got a sum of "
            f"{sums[row]:g} at row {row}"
        )
    with np.errstate(divide="ignore"):
        return np.ascontiguousarray(np.log(arr))


def _resolve_engine(engine: str) -> str:
    if engine == "auto":
        return "numba" if importlib.util.find_spec("numba") is not None else "numpy"
    if engine not in ("numba", "numpy"):
        raise ValueError(f"engine must be 'auto', 'numba' or 'numpy'; got {engine!r}")
    if engine == "numba" and importlib.util.find_spec("numba") is None:
        raise ValueError("engine='numba' needs the numba package, which is not installed")
    return engine


def _raise_for_nonfinite(counts: IntArray, *, allow_nan: bool, cov_name: str) -> None:
    """Turn the core's counts of non-finite rows into the documented errors."""
    if counts[_COUNT_NOT_PD]:
        raise ValueError(
            f"the interpolated covariance is not numerically positive definite at "
            f"{counts[_COUNT_NOT_PD]} locations; the node covariances are too close to singular"
        )
    for nan_i, inf_i, name in (
        (_COUNT_X_NAN, _COUNT_X_INF, "x"),
        (_COUNT_COV_NAN, _COUNT_COV_INF, cov_name),
    ):
        if counts[inf_i]:
            raise ValueError(
                f"{name} must be finite{' or NaN (no data)' if allow_nan else ''} "
                f"(got infinity in {counts[inf_i]} rows)"
            )
        if counts[nan_i] and not allow_nan:
            raise ValueError(
                f"{name} must be finite (got NaN in {counts[nan_i]} rows); classify() carries "
                "no-data rows through"
            )


# --------------------------------------------------------------------------------------
# The numpy engine (reference path)
# --------------------------------------------------------------------------------------


def _np_row_good(block: FloatArray) -> NDArray[np.bool_]:
    return np.all(np.isfinite(block), axis=1)


def _np_count(block: FloatArray, good: NDArray[np.bool_], counts: IntArray, first: int) -> None:
    bad = block[~good]
    counts[first] += int(np.count_nonzero(np.any(np.isnan(bad), axis=1)))
    counts[first + 1] += int(np.count_nonzero(np.any(np.isinf(bad), axis=1)))


def _np_stationary_terms(model: _Gaussians, x: FloatArray) -> tuple[FloatArray, FloatArray]:
    """log p(x | j) and the squared Mahalanobis distances, each (n, k)."""
    k = model.mean.shape[0]
    loglik = np.empty((x.shape[0], k))
    q = np.empty((x.shape[0], k))
    for j in range(k):
        z = (x - model.mean[j]) @ model.winv[j].T
        q[:, j] = np.einsum("ij,ij->i", z, z)
        loglik[:, j] = model.log_norm[j] - 0.5 * q[:, j]
    return loglik, q


def _np_corners(
    model: _GriddedGaussians, cov: FloatArray
) -> tuple[IntArray, FloatArray, NDArray[np.bool_]]:
    """Flat corner node indices (C, n), multilinear weights (C, n), clamped rows (n,)."""
    n, n_axes = cov.shape
    cells = []
    fracs = []
    clamped = np.zeros(n, dtype=bool)
    for a in range(n_axes):
        nodes = model.node_values[model.node_offsets[a] : model.node_offsets[a + 1]]
        m = nodes.size
        c = cov[:, a]
        clamped |= (c < nodes[0]) | (c > nodes[-1])
        if m == 1:
            cells.append(np.zeros(n, dtype=np.int64))
            fracs.append(np.zeros(n))
            continue
        cell = np.clip(np.searchsorted(nodes, c, side="right") - 1, 0, m - 2)
        t = np.clip((c - nodes[cell]) / (nodes[cell + 1] - nodes[cell]), 0.0, 1.0)
        cells.append(cell)
        fracs.append(t)
    n_corners = 1 << n_axes
    flat = np.zeros((n_corners, n), dtype=np.int64)
    weight = np.ones((n_corners, n))
    for corner in range(n_corners):
        for a in range(n_axes):
            bit = (corner >> a) & 1
            m = int(model.node_offsets[a + 1] - model.node_offsets[a])
            flat[corner] += np.minimum(cells[a] + bit, m - 1) * model.strides[a]
            weight[corner] *= fracs[a] if bit else 1.0 - fracs[a]
    return flat, weight, clamped


def _np_gridded_terms(
    model: _GriddedGaussians, x: FloatArray, cov: FloatArray
) -> tuple[FloatArray, FloatArray, NDArray[np.bool_], NDArray[np.bool_]]:
    """log p(x | j, covariates), squared Mahalanobis, clamped rows, non-PD rows."""
    n = x.shape[0]
    d, k = model.n_features, model.n_facies
    flat, weight, clamped = _np_corners(model, cov)
    # (n, k, P): convex combination of the corner nodes' parameters.
    n_par = d + d * (d + 1) // 2
    vals = np.einsum("cn,cnt->nt", weight, model.params[flat][:, :, : k * n_par])
    vals = vals.reshape(n, k, n_par)
    mean = vals[:, :, :d]
    rows, cols = np.tril_indices(d)
    full = np.zeros((n, k, d, d))
    full[:, :, rows, cols] = vals[:, :, d:]
    full[:, :, cols, rows] = vals[:, :, d:]
    not_pd = np.zeros(n, dtype=bool)
    try:
        chol = np.linalg.cholesky(full)
    except np.linalg.LinAlgError:
        eig_min = np.linalg.eigvalsh(full)[..., 0]
        not_pd = np.any(eig_min <= 0.0, axis=1)
        full[not_pd] = np.eye(d)
        chol = np.linalg.cholesky(full)
    diff = x[:, None, :] - mean
    z = np.linalg.solve(chol, diff[..., None])[..., 0]
    q = np.sum(z**2, axis=2)
    logdet = 2.0 * np.sum(np.log(np.diagonal(chol, axis1=2, axis2=3)), axis=2)
    loglik = -d * _HALF_LOG_2PI - 0.5 * logdet - 0.5 * q
    return loglik, q, clamped, not_pd


def _np_finish(
    joint: FloatArray,
    q: FloatArray,
    mode: int,
    want_values: bool,
    extras: bool,
) -> tuple[FloatArray | None, IntArray | None, FloatArray | None, FloatArray | None, Any]:
    """Normalise joint log-densities (n, k) in log space and derive the outputs."""
    if mode == _SQ_MAHALANOBIS:
        return q, None, None, None, None
    if mode == _LOG_LIKELIHOOD:
        return joint, None, None, None, None
    top = np.argmax(joint, axis=1)
    shifted = joint - np.take_along_axis(joint, top[:, None], axis=1)
    expo = np.exp(shifted)
    total = expo.sum(axis=1)
    log_total = np.log(total)
    prob = expo / total[:, None]
    values = None
    if want_values:
        values = prob if mode == _POSTERIOR else shifted - log_total[:, None]
    if not extras:
        return values, None, None, None, None
    with np.errstate(invalid="ignore"):
        weighted = np.where(prob > 0.0, prob * shifted, 0.0)
    entropy = np.maximum(log_total - weighted.sum(axis=1), 0.0)
    q_win = np.take_along_axis(q, top[:, None], axis=1)[:, 0]
    return values, top.astype(np.int64), q_win, q.min(axis=1), entropy


def _np_evaluate(
    model: _Gaussians | _GriddedGaussians,
    x: FloatArray,
    cov: FloatArray | None,
    log_prior: FloatArray,
    mode: int,
    want_values: bool,
    extras: bool,
    out: FloatArray | None = None,
) -> _Raw:
    n = x.shape[0]
    k = model.mean.shape[0] if isinstance(model, _Gaussians) else model.n_facies
    counts = np.zeros(6, dtype=np.int64)
    values = (np.empty((n, k)) if out is None else out) if want_values else None
    size = n if extras else 0
    most = np.empty(size, dtype=np.int64)
    q_win, q_min, entropy = np.empty(size), np.empty(size), np.empty(size)
    for start in range(0, n, _NUMPY_CHUNK):
        stop = min(n, start + _NUMPY_CHUNK)
        xb = x[start:stop]
        good = _np_row_good(xb)
        if not good.all():
            _np_count(xb, good, counts, _COUNT_X_NAN)
        if cov is not None:
            cb = cov[start:stop]
            good_cov = _np_row_good(cb)
            if not good_cov.all():
                _np_count(cb, good_cov, counts, _COUNT_COV_NAN)
            good &= good_cov
        # Bad rows are evaluated at a harmless point and overwritten afterwards.
        xb = np.where(good[:, None], xb, 0.0)
        if isinstance(model, _Gaussians):
            loglik, q = _np_stationary_terms(model, xb)
        else:
            cb = np.where(good[:, None], cb, model.node_values[model.node_offsets[:-1]])
            loglik, q, clamped, not_pd = _np_gridded_terms(model, xb, cb)
            counts[_COUNT_CLAMPED] += int(np.count_nonzero(clamped & good))
            counts[_COUNT_NOT_PD] += int(np.count_nonzero(not_pd & good))
            good &= ~not_pd
        lp = log_prior if log_prior.shape[0] == 1 else log_prior[start:stop]
        joint = loglik if mode in (_SQ_MAHALANOBIS, _LOG_LIKELIHOOD) else loglik + lp
        vals, top, qw, qm, ent = _np_finish(joint, q, mode, want_values, extras)
        bad = ~good
        if values is not None:
            values[start:stop] = vals
            values[start:stop][bad] = np.nan
        if extras:
            assert top is not None and qw is not None and qm is not None
            most[start:stop] = np.where(bad, -1, top)
            q_win[start:stop] = np.where(bad, np.nan, qw)
            q_min[start:stop] = np.where(bad, np.nan, qm)
            entropy[start:stop] = np.where(bad, np.nan, ent)
    if not extras:
        return _Raw(values, None, None, None, None, counts)
    return _Raw(values, most, q_win, q_min, entropy, counts)


# --------------------------------------------------------------------------------------
# The numba engine. Plain Python source here; _numba_kernels() compiles it on first use
# (numba is imported only then). `len(dtag)`, `len(ktag)`, `len(atag)` are the feature,
# facies and axis counts as compile-time constants (tuple lengths are part of the
# numba type), which lets LLVM unroll the small loops and vectorise over block rows.
#
# What decides the speed (measured on the benchmark case, see benchmarks/classify.py):
# * every hot loop must vectorise; LLVM's remarks (llvmlite `--pass-remarks-missed=
#   loop-vectorize`, NUMBA_DEBUGINFO=1 for line numbers) and a perf profile mapped onto
#   the kernel's machine code show which do not;
# * data-dependent indices need np.uint64 (numba's negative-index fix-up otherwise
#   turns the load or store into a scalar or gather: the output store alone cost 0.18 s
#   per 10^7 rows in the gridded kernel);
# * an inlined helper that contains loops, called inside a row loop, keeps that loop
#   scalar (measured 2x): the per-row code of _finish_block is written out in place;
# * the (row, facies) exponentials dominate, hence an own minimax exp; a division costs
#   about 7.5 cycles per 4 lanes here (one per row: the posterior multiplies by 1/total).
# --------------------------------------------------------------------------------------


def _exp1(t):  # pragma: no cover - compiled by numba
    """exp(t) for t <= 0 (NaN or below _EXP_FLOOR -> 0); inlined into vectorised loops.

    Cody & Waite (1980) reduction t = n ln 2 + r, |r| <= ln(2)/2, then a degree-11
    minimax polynomial for exp(r) (see _EXP_C3). Relative error below 2e-16 (0.9 ulp of
    1): the polynomial is within 3.5e-17 of exp(r), the rest is rounding; measured
    maximum 1.64e-16 against long-double exp on 5e6 arguments in [-708, 0]. Degree 11
    instead of the former degree-13 Taylor polynomial: 11% faster, same accuracy.
    """
    tc = t if t > _EXP_FLOOR else _EXP_FLOOR
    # n = round(t / ln 2) lands in the low mantissa bits of kd: no float-to-int conversion.
    kd = tc * _INV_LN2 + _ROUND_SHIFT
    nf = kd - _ROUND_SHIFT
    r = (tc - nf * _LN2_HI) - nf * _LN2_LO
    p = 1.0 + r * (
        1.0
        + r
        * (
            0.5
            + r
            * (
                _EXP_C3
                + r
                * (
                    _EXP_C4
                    + r
                    * (
                        _EXP_C5
                        + r
                        * (
                            _EXP_C6
                            + r
                            * (
                                _EXP_C7
                                + r * (_EXP_C8 + r * (_EXP_C9 + r * (_EXP_C10 + r * _EXP_C11)))
                            )
                        )
                    )
                )
            )
        )
    )
    # 2**n: the low bits of kd shifted into the exponent field (n >= -1021 here).
    scale = np.int64((np.float64(kd).view(np.int64) << 52) + _EXPONENT_ONE).view(np.float64)
    v = p * scale
    return v if t >= _EXP_FLOOR else 0.0


def _log_series(ex, s):  # pragma: no cover - compiled by numba
    """ex * ln 2 + 2 atanh(s) = log(2**ex * m) for s = (m - 1) / (m + 1), |s| < 0.172."""
    s2 = s * s
    series = 1.0 + s2 * (
        1.0 / 3.0
        + s2
        * (
            1.0 / 5.0
            + s2
            * (
                1.0 / 7.0
                + s2
                * (
                    1.0 / 9.0
                    + s2
                    * (
                        1.0 / 11.0
                        + s2
                        * (
                            1.0 / 13.0
                            + s2
                            * (
                                1.0 / 15.0
                                + s2 * (1.0 / 17.0 + s2 * (1.0 / 19.0 + s2 * (1.0 / 21.0)))
                            )
                        )
                    )
                )
            )
        )
    )
    return ex * _LN2_HI + (ex * _LN2_LO + 2.0 * s * series)


def _log1(y):  # pragma: no cover - compiled by numba
    """log(y) for a positive normal finite y (anything else: garbage; callers check)."""
    b = np.float64(y).view(np.int64)
    mant = np.int64((b & _MANTISSA_BITS) | _EXPONENT_ONE).view(np.float64)
    ex = np.float64((b >> 52) - 1023)
    big = mant > _SQRT2
    mant = mant * 0.5 if big else mant
    ex = ex + 1.0 if big else ex
    return _log_series(ex, (mant - 1.0) / (mant + 1.0))


def _exp_block(t, e, m):  # pragma: no cover - compiled by numba
    """e[i] = exp(t[i]) for t[i] <= 0 (NaN or below _EXP_FLOOR -> 0)."""
    for i in range(m):
        e[i] = _exp1(t[i])


def _log_block(y, out, m):  # pragma: no cover - compiled by numba
    """out[i] = log(y[i]); positive normal numbers vectorised, the rest via np.log."""
    n_odd = 0
    for i in range(m):
        v = y[i]
        b = np.float64(v).view(np.int64)
        n_odd += (b < _SMALLEST_NORMAL_BITS) | (b >= _INFINITY_BITS)
        out[i] = _log1(v)
    if n_odd > 0:
        for i in range(m):
            v = y[i]
            if not (v >= _SMALLEST_NORMAL and v < np.inf):
                out[i] = np.log(v)


def _load_block(src, width_tag, start, m, dst, good):  # pragma: no cover - numba
    """Copy rows start..start+m of a flat (n, width) array into dst (width, B).

    good[i] = 0.0 for a finite row, NaN otherwise; returns the number of bad rows.
    """
    w = len(width_tag)
    for i in range(m):
        g = 0.0
        for a in range(w):
            # Unsigned index: numba adds no negative-index fix-up, so the load stays
            # affine and the loop vectorises (the same reason for np.uint64 below).
            v = src[np.uint64((start + i) * w + a)]
            dst[a, i] = v
            g += v * 0.0
        good[i] = g
    # Pad a short last block with zeros: the arithmetic loops always run over the full
    # _BLOCK rows, so every row goes through the same vectorised code whatever its
    # position in a block (bit-identical results however a cube is chunked).
    for i in range(m, _BLOCK):
        for a in range(w):
            dst[a, i] = 0.0
        good[i] = 0.0
    n_bad = 0
    for i in range(m):
        n_bad += good[i] != 0.0
    return n_bad


def _count_bad(src, width_tag, start, m, good, counts, first):  # pragma: no cover - numba
    """Count rows holding a NaN (counts[first]) and an infinity (counts[first + 1])."""
    w = len(width_tag)
    for i in range(m):
        if good[i] != 0.0:
            has_nan = False
            has_inf = False
            for a in range(w):
                v = src[(start + i) * w + a]
                if v != v:
                    has_nan = True
                elif v == np.inf or v == -np.inf:
                    has_inf = True
            counts[first] += has_nan
            counts[first + 1] += has_inf


def _mark_bad(good, m, start, mode, out, most, q_win, q_min, entropy, ktag):  # pragma: no cover
    k = len(ktag)
    for i in range(m):
        if good[i] != 0.0:
            r = start + i
            if out.shape[0] > 0:
                for j in range(k):
                    out[r, j] = np.nan
            if most.shape[0] > 0:
                most[r] = -1
                q_win[r] = np.nan
                q_min[r] = np.nan
                entropy[r] = np.nan


def _finish_block(
    lf, qf, ef, rows, scratch, m, start, mode, out, most, q_win, q_min, entropy, ktag, zf, scaled
):  # pragma: no cover - compiled by numba
    """Normalise one block of joint log-densities and write the outputs.

    With ``scaled`` (posterior only, no extras) a pair's density is exp(lf) * zf: lf then
    leaves out a factor in (1/sqrt(2), 1] of the density (see the gridded kernel).

    lf, qf, ef: (k, B) block buffers, flat (facies j of block row i at j * _BLOCK + i),
    of the joint log-density, the squared Mahalanobis distance and the exponentials.
    """
    k = len(ktag)
    # The row loop writes the output as it goes, so the stores (to memory: 480 MB for
    # 10^7 rows of 6 facies) overlap the arithmetic: 0.21 -> 0.17 s per 10^7 rows
    # against a separate store pass per block, although LLVM emits the stores as
    # AVX-512 scatters here (it cannot prove `dst` apart from the block buffers). A full
    # block is written in place, the short last block via `scratch`, so every row still
    # goes through the same full-block loop.
    full = out.shape[0] > 0 and m == _BLOCK
    dst = out.ravel()[start * k : (start + _BLOCK) * k] if full else scratch
    inv = rows[0]
    tot = rows[1]
    if mode == _SQ_MAHALANOBIS or mode == _LOG_LIKELIHOOD:
        src = qf if mode == _SQ_MAHALANOBIS else lf
        for i in range(_BLOCK):
            for j in range(k):
                dst[i * k + j] = src[j * _BLOCK + i]
    elif k <= _ROW_LOOP_MAX_FACIES and mode == _POSTERIOR and most.shape[0] == 0:
        # The posterior alone: as below, without keeping the shifted log-densities and
        # the row sums for the extras (0.128 -> 0.117 s per 10^7 rows and 6 facies, out=
        # reused). One loop with and one without the per-pair factor: a select between
        # the two inside the loop, or a factor of ones, costs the gain again (measured).
        if scaled:
            for i in range(_BLOCK):
                mx = lf[i]
                for j in range(1, k):
                    v = lf[j * _BLOCK + i]
                    mx = v if v > mx else mx
                total = 0.0
                for j in range(k):
                    e = _exp1(lf[j * _BLOCK + i] - mx) * zf[j * _BLOCK + i]
                    ef[j * _BLOCK + i] = e
                    total += e
                r = 1.0 / total
                for j in range(k):
                    dst[i * k + j] = ef[j * _BLOCK + i] * r
        else:
            for i in range(_BLOCK):
                mx = lf[i]
                for j in range(1, k):
                    v = lf[j * _BLOCK + i]
                    mx = v if v > mx else mx
                total = 0.0
                for j in range(k):
                    e = _exp1(lf[j * _BLOCK + i] - mx)
                    ef[j * _BLOCK + i] = e
                    total += e
                r = 1.0 / total
                for j in range(k):
                    dst[i * k + j] = ef[j * _BLOCK + i] * r
    elif k <= _ROW_LOOP_MAX_FACIES:
        # All facies of a row in registers: shift by the row maximum (the largest term
        # of the sum is then exp(0) = 1), exponentiate, sum, normalise, store.
        for i in range(_BLOCK):
            mx = lf[i]
            for j in range(1, k):
                v = lf[j * _BLOCK + i]
                mx = v if v > mx else mx
            total = 0.0
            for j in range(k):
                t = lf[j * _BLOCK + i] - mx
                lf[j * _BLOCK + i] = t
                e = _exp1(t)  # never scaled here: the branch above takes those blocks
                ef[j * _BLOCK + i] = e
                total += e
            r = 1.0 / total
            inv[i] = r
            tot[i] = total
            if mode == _POSTERIOR:
                for j in range(k):
                    dst[i * k + j] = ef[j * _BLOCK + i] * r
    else:
        # Many facies: LLVM no longer unrolls the facies loops of the row loop above,
        # which then stays scalar (k = 8: 0.41 s instead of 0.24 s per 10^7 rows and 6
        # facies), so one pass over the block per facies instead.
        mxr = rows[2]
        for i in range(_BLOCK):
            mxr[i] = lf[i]
            tot[i] = 0.0
        for j in range(1, k):
            for i in range(_BLOCK):
                v = lf[j * _BLOCK + i]
                mxr[i] = v if v > mxr[i] else mxr[i]
        for j in range(k):
            for i in range(_BLOCK):
                t = lf[j * _BLOCK + i] - mxr[i]
                lf[j * _BLOCK + i] = t
                e = _exp1(t)
                e = e * zf[j * _BLOCK + i] if scaled else e
                ef[j * _BLOCK + i] = e
                tot[i] += e
        for i in range(_BLOCK):
            r = 1.0 / tot[i]
            inv[i] = r
            if mode == _POSTERIOR:
                for j in range(k):
                    dst[i * k + j] = ef[j * _BLOCK + i] * r
    if mode == _LOG_POSTERIOR:
        for i in range(_BLOCK):
            lt = _log1(tot[i])  # total lies in [1, k] (bad rows are overwritten)
            for j in range(k):
                dst[i * k + j] = lf[j * _BLOCK + i] - lt
    if out.shape[0] > 0 and not full:
        of = out.ravel()
        for t in range(m * k):
            of[np.uint64(start * k + t)] = scratch[t]
    if most.shape[0] == 0 or mode == _SQ_MAHALANOBIS or mode == _LOG_LIKELIHOOD:
        return
    # Most likely facies = the first whose shifted log-density is 0 (the first maximum,
    # as np.argmax); entropy = log(total) - sum_j p_j t_j. Computed over the full block
    # (FMA contraction must not depend on a row's position), then copied out.
    logt = tot
    for i in range(_BLOCK):
        logt[i] = _log1(tot[i])
    hv = rows[2]
    qb = rows[3]
    qm = rows[4]
    best = rows[5]  # facies index as a float
    if k <= _ROW_LOOP_MAX_FACIES:
        for i in range(_BLOCK):
            bi = 0
            h = 0.0
            qbi = qf[i]
            qmi = qbi
            found = lf[i] == 0.0
            for j in range(k):
                t = lf[j * _BLOCK + i]
                e = ef[j * _BLOCK + i]
                h += e * t if e > 0.0 else 0.0
                q = qf[j * _BLOCK + i]
                first = (t == 0.0) & (not found)
                bi = j if first else bi
                qbi = q if first else qbi
                found = found | first
                qmi = q if q < qmi else qmi
            hv[i] = logt[i] - h * inv[i]
            best[i] = bi
            qb[i] = qbi
            qm[i] = qmi
    else:
        # Per facies passes again (a row loop over many facies stays scalar: k = 10
        # classify 0.41 s against 0.35 s per 10^7 rows and 6 facies).
        h = rows[2]
        for i in range(_BLOCK):
            h[i] = 0.0
            qb[i] = qf[i]
            qm[i] = qf[i]
            best[i] = 0.0 if lf[i] == 0.0 else -1.0  # -1: maximum not seen yet
        for j in range(1, k):
            for i in range(_BLOCK):
                t = lf[j * _BLOCK + i]
                q = qf[j * _BLOCK + i]
                first = (t == 0.0) & (best[i] < 0.0)
                best[i] = j if first else best[i]
                qb[i] = q if first else qb[i]
                qm[i] = q if q < qm[i] else qm[i]
        for j in range(k):
            for i in range(_BLOCK):
                t = lf[j * _BLOCK + i]
                e = ef[j * _BLOCK + i]
                h[i] += e * t if e > 0.0 else 0.0
        for i in range(_BLOCK):
            hv[i] = logt[i] - h[i] * inv[i]
    for i in range(m):
        r = start + i
        entropy[r] = hv[i] if hv[i] > 0.0 else 0.0  # >= 0 exactly; only rounding below
        most[r] = np.int64(best[i])
        q_win[r] = qb[i]
        q_min[r] = qm[i]


def _stationary_kernel(
    x, mean, winv, log_norm, log_prior, mode, out, most, q_win, q_min, entropy, counts, dtag, ktag
):  # pragma: no cover - compiled by numba
    """Evaluation core for stationary Gaussians (see _evaluate for the contract)."""
    d = len(dtag)
    k = len(ktag)
    n = x.shape[0]
    xf = x.ravel()
    xs = np.empty((d, _BLOCK))
    lf = np.empty(k * _BLOCK)  # (k, B) layout: one contiguous row per facies
    qf = np.empty(k * _BLOCK)
    ef = np.empty(k * _BLOCK)
    rows = np.empty((6, _BLOCK))
    scratch = np.empty(k * _BLOCK)
    good = np.empty(_BLOCK)
    ones = np.ones(k * _BLOCK)  # no per-pair factor (see _finish_block)
    prior_rows = log_prior.shape[0] > 1
    with_prior = mode == _POSTERIOR or mode == _LOG_POSTERIOR
    # Normalising constant and a constant log prior, folded per facies.
    c = np.empty(k)
    for j in range(k):
        c[j] = log_norm[j] + (log_prior[0, j] if with_prior and not prior_rows else 0.0)
    for start in range(0, n, _BLOCK):
        m = min(_BLOCK, n - start)
        n_bad = _load_block(xf, dtag, start, m, xs, good)
        for j in range(k):
            o = j * _BLOCK
            cj = c[j]
            for i in range(_BLOCK):
                q = 0.0
                for a in range(d):
                    z = 0.0
                    for b in range(a + 1):
                        z += winv[j, a, b] * (xs[b, i] - mean[j, b])
                    q += z * z
                qf[o + i] = q
                lf[o + i] = cj - 0.5 * q
            if with_prior and prior_rows:
                for i in range(m):
                    lf[o + i] += log_prior[np.uint64(start + i), j]
        _finish_block(
            lf, qf, ef, rows, scratch, m, start, mode, out, most, q_win, q_min, entropy, ktag,
            ones, False,
        )
        if n_bad > 0:
            _count_bad(xf, dtag, start, m, good, counts, 0)
            _mark_bad(good, m, start, mode, out, most, q_win, q_min, entropy, ktag)


def _gridded_kernel(
    x,
    cov,
    node_values,
    node_offsets,
    strides,
    params,
    log_prior,
    mode,
    out,
    most,
    q_win,
    q_min,
    entropy,
    counts,
    dtag,
    ktag,
    atag,
    lanes,
):  # pragma: no cover - compiled by numba
    """Evaluation core for Gaussians interpolated on a covariate grid."""
    d = len(dtag)
    k = len(ktag)
    n_axes = len(atag)
    n_corners = 1 << n_axes
    n = x.shape[0]
    xf = x.ravel()
    cf = cov.ravel()
    pf = params.ravel()
    xs = np.empty((d, _BLOCK))
    cs = np.empty((n_axes, _BLOCK))
    cell = np.empty((n_axes, _BLOCK), dtype=np.int64)
    frac = np.empty((n_axes, _BLOCK))
    cflat = np.empty((n_corners, _BLOCK), dtype=np.int64)
    cw = np.empty((n_corners, _BLOCK))
    n_par = d + d * (d + 1) // 2  # mean, packed lower covariance
    npk = k * n_par
    n_cols = params.shape[1]  # npk, padded to a multiple of 8
    # Interpolated parameters, row-major without padding: facies j of block row i at
    # vals[(i * k + j) * n_par]. Rows are written n_cols wide (a multiple of 8, so the
    # loop has no scalar remainder; measured 7% on the gridded kernel): the padding
    # spills into the next row, which is written after it, hence the slack at the end.
    vals = np.empty(_BLOCK * npk + n_cols)
    # Per (row, facies) pair u = i * k + j, the (B, k) layout of the output.
    xr = np.empty((d, _BLOCK * k))
    cr = np.empty(_BLOCK * k)
    dets = np.empty(_BLOCK * k)
    lp = np.empty(_BLOCK * k)  # joint log-density and q per pair
    qp = np.empty(_BLOCK * k)
    lf = np.empty(k * _BLOCK)  # the same in the (k, B) layout
    qf = np.empty(k * _BLOCK)
    ef = np.empty(k * _BLOCK)
    rows = np.empty((6, _BLOCK))
    scratch = np.empty(k * _BLOCK)
    # Scratch rows of the general factorisation: strict lower L, pivots D, 1/D, y.
    l_row = 0
    dg_row = l_row + d * (d - 1) // 2
    inv_row = dg_row + d
    y_row = inv_row + d
    work = np.empty((y_row + d, _BLOCK))
    prod = np.empty(_BLOCK)
    logp = np.empty(_BLOCK)
    clamp = np.empty(_BLOCK)
    edge = np.empty(_BLOCK)
    width = np.empty(_BLOCK)
    good = np.empty(_BLOCK)
    good_cov = np.empty(_BLOCK)
    prior_rows = log_prior.shape[0] > 1
    with_prior = mode == _POSTERIOR or mode == _LOG_POSTERIOR
    lpf = log_prior.ravel()
    c0 = -d * _HALF_LOG_2PI
    for i in range(_BLOCK):
        for j in range(k):
            cr[i * k + j] = c0 + (lpf[j] if with_prior and not prior_rows else 0.0)
    # One covariate, two attributes, at most _LANES facies (the common case): the fused
    # path. Its tables hold each parameter of all facies side by side, padded to _LANES
    # facies (padding lanes: zero mean, unit covariance): per cell c (between nodes c and
    # c + 1) and parameter p, facies j at (c * 5 + p) * _LANES + j, the value at the
    # cell's left node (tab_a) and its change to the right node (tab_d). A row then
    # interpolates (one FMA per parameter) and evaluates all its facies with contiguous
    # _LANES-wide loads and arithmetic, in one loop: no interleaved loads of a (row,
    # facies, parameter) buffer and no second pass over it. Measured per 10^7 rows and
    # 6 facies (11 nodes, out= reused): 0.41 s for the general path, 0.33 s fused.
    fused = d == 2 and n_axes == 1 and k <= _LANES and node_values.shape[0] > 1
    n_tab = node_values.shape[0] if fused else 0
    n_cell = max(n_tab - 1, 0)
    tab_a = np.zeros(n_cell * 5 * _LANES)
    tab_d = np.zeros(n_cell * 5 * _LANES)
    for c in range(n_cell):
        for p in range(5):
            for j in range(_LANES):
                pad = 1.0 if p == 2 or p == 4 else 0.0
                left = pf[np.uint64(c * n_cols + j * 5 + p)] if j < k else pad
                right = pf[np.uint64((c + 1) * n_cols + j * 5 + p)] if j < k else pad
                tab_a[(c * 5 + p) * _LANES + j] = left
                tab_d[(c * 5 + p) * _LANES + j] = right - left
    # Evenly spaced nodes (as scenarios usually declare them): the cell is the integer
    # part of (value - first node) / spacing, not a count over every interior node.
    even = n_tab > 1
    if even:
        spacing = (node_values[n_tab - 1] - node_values[0]) / (n_tab - 1)
        for s in range(n_tab):
            off = node_values[s] - (node_values[0] + s * spacing)
            even = even and abs(off) <= 1e-12 * (node_values[n_tab - 1] - node_values[0])
    det8 = np.empty(_BLOCK * _LANES)
    num8 = np.empty(_BLOCK * _LANES)
    crf = np.empty(k * _BLOCK)
    zf = np.ones(k * _BLOCK)
    scaled = fused and mode == _POSTERIOR and most.shape[0] == 0
    for i in range(_BLOCK):
        for j in range(k):
            crf[j * _BLOCK + i] = cr[i * k + j]
    tt = np.empty(_BLOCK)
    # The lane loop's trip count comes in as an argument (lanes = _LANES): a bound LLVM
    # knows (even min(_LANES, n)) leaves the loop scalar, 0.18 against 0.08 s per 10^7
    # rows measured in isolation.
    nl = lanes
    for start in range(0, n, _BLOCK):
        m = min(_BLOCK, n - start)
        n_bad_x = _load_block(xf, dtag, start, m, xs, good)
        n_bad_c = _load_block(cf, atag, start, m, cs, good_cov)
        if n_bad_c > 0:
            _count_bad(cf, atag, start, m, good_cov, counts, 2)
            for i in range(m):
                # NaN covariates would reach the grid lookup: park them on the first node.
                if good_cov[i] != 0.0:
                    for a in range(n_axes):
                        cs[a, i] = node_values[node_offsets[a]]
        if n_bad_x > 0:
            _count_bad(xf, dtag, start, m, good, counts, 0)
        for i in range(_BLOCK):
            good[i] += good_cov[i]
            clamp[i] = 0.0
        if fused:
            # Cell and fraction as in the general branch below (branch- and gather-free,
            # so the loops vectorise), then each row with all its facies side by side.
            nn = node_offsets[1]
            first = node_values[0]
            last = node_values[nn - 1]
            if even:
                last_cell = np.float64(nn - 2)
                for i in range(_BLOCK):
                    cv = cs[0, i]
                    pos = (cv - first) / spacing
                    pos = 0.0 if pos < 0.0 else pos
                    pos = last_cell + 1.0 if pos > last_cell + 1.0 else pos
                    c = np.floor(pos)
                    c = last_cell if c > last_cell else c
                    cell[0, i] = np.int64(c)
                    clamp[i] = (cv < first) | (cv > last)
                    tt[i] = pos - c
            else:
                width0 = node_values[1] - first
                for i in range(_BLOCK):
                    cell[0, i] = 0
                    edge[i] = first
                    width[i] = width0
                for s in range(1, nn - 1):
                    node = node_values[s]
                    step = node - node_values[s - 1]
                    grow = (node_values[s + 1] - node) - step
                    for i in range(_BLOCK):
                        passed = cs[0, i] >= node
                        cell[0, i] += passed
                        edge[i] += step if passed else 0.0
                        width[i] += grow if passed else 0.0
                for i in range(_BLOCK):
                    t = (cs[0, i] - edge[i]) / width[i]
                    below = t < 0.0
                    above = t > 1.0
                    clamp[i] = below | above
                    t = 0.0 if below else t
                    t = 1.0 if above else t
                    tt[i] = t
            # q numerator and determinant of every facies of each row (see above).
            for i in range(_BLOCK):
                t = tt[i]
                x0 = xs[0, i]
                x1 = xs[1, i]
                r0 = cell[0, i] * (5 * _LANES)
                o = i * _LANES
                for j in range(nl):
                    dx = x0 - (tab_a[np.uint64(r0 + j)] + t * tab_d[np.uint64(r0 + j)])
                    dy = x1 - (tab_a[np.uint64(r0 + _LANES + j)] + t * tab_d[np.uint64(r0 + _LANES + j)])
                    s00 = tab_a[np.uint64(r0 + 2 * _LANES + j)] + t * tab_d[np.uint64(r0 + 2 * _LANES + j)]
                    s10 = tab_a[np.uint64(r0 + 3 * _LANES + j)] + t * tab_d[np.uint64(r0 + 3 * _LANES + j)]
                    s11 = tab_a[np.uint64(r0 + 4 * _LANES + j)] + t * tab_d[np.uint64(r0 + 4 * _LANES + j)]
                    det = s00 * s11 - s10 * s10
                    det8[o + j] = det if s00 > 0.0 else -1.0  # -1: not positive definite
                    num8[o + j] = s11 * dx * dx - 2.0 * s10 * dx * dy + s00 * dy * dy
        elif n_axes == 1:
            # One covariate: the cell index counts the interior nodes passed (one
            # vectorised pass per node); then per row the fraction t between the cell's
            # end nodes and (1 - t) * node row + t * next node row, all facies at once
            # (a node's parameters are one contiguous row: contiguous loads and FMAs).
            nn = node_offsets[1]
            top = nn - 1
            for i in range(_BLOCK):
                cell[0, i] = 0
            for s in range(1, nn - 1):
                node = node_values[s]
                for i in range(_BLOCK):
                    cell[0, i] += cs[0, i] >= node
            for i in range(_BLOCK):
                c = cell[0, i]
                cv = cs[0, i]
                up = c + 1
                up = top if up > top else up
                lo = node_values[c]
                t = (cv - lo) / (node_values[up] - lo) if nn > 1 else cv - lo
                below = t < 0.0
                above = t > 0.0 if nn == 1 else t > 1.0
                clamp[i] = below | above
                t = 0.0 if below or nn == 1 else t
                t = 1.0 if above and nn > 1 else t
                w0 = 1.0 - t
                o = i * npk
                r0 = c * n_cols
                r1 = up * n_cols
                for p in range(n_cols):
                    vals[o + p] = w0 * pf[np.uint64(r0 + p)] + t * pf[np.uint64(r1 + p)]
        else:
            # Grid cell and fractional position along each axis. Branch- and gather-free:
            # each interior node the value has passed moves the cell's left edge and
            # width (frac and edges as accumulated sums, so the loops vectorise).
            for a in range(n_axes):
                lo = node_offsets[a]
                nn = node_offsets[a + 1] - lo
                if nn > 1:
                    left0 = node_values[lo]
                    width0 = node_values[lo + 1] - left0
                    for i in range(_BLOCK):
                        cell[a, i] = 0
                        edge[i] = left0
                        width[i] = width0
                for s in range(1, nn - 1):
                    node = node_values[lo + s]
                    step = node - node_values[lo + s - 1]
                    grow = (node_values[lo + s + 1] - node) - step
                    for i in range(_BLOCK):
                        passed = cs[a, i] >= node
                        cell[a, i] += passed
                        edge[i] += step if passed else 0.0
                        width[i] += grow if passed else 0.0
                if nn == 1:
                    node = node_values[lo]
                    for i in range(_BLOCK):
                        cv = cs[a, i]
                        clamp[i] += (cv < node) | (cv > node)
                        cell[a, i] = 0
                        frac[a, i] = 0.0
                else:
                    for i in range(_BLOCK):
                        t = (cs[a, i] - edge[i]) / width[i]
                        below = t < 0.0
                        above = t > 1.0
                        clamp[i] += below | above
                        t = 0.0 if below else t
                        t = 1.0 if above else t
                        frac[a, i] = t
            # Flat index and multilinear weight of every corner of the cell.
            for cn in range(n_corners):
                for i in range(_BLOCK):
                    cflat[cn, i] = 0
                    cw[cn, i] = 1.0
                for a in range(n_axes):
                    bit = (cn >> a) & 1
                    top = node_offsets[a + 1] - node_offsets[a] - 1
                    st = strides[a]
                    for i in range(_BLOCK):
                        up = cell[a, i] + bit
                        up = top if up > top else up
                        cflat[cn, i] += up * st
                        t = frac[a, i]
                        cw[cn, i] *= t if bit == 1 else 1.0 - t
            # Convex combination of the corner nodes' parameters, all facies at once.
            # (A loop per facies and parameter gathering by node index stays scalar:
            # LLVM cannot bound indexed loads for its alias checks; measured 2x.)
            for i in range(_BLOCK):
                o = i * npk
                w0 = cw[0, i]
                r0 = cflat[0, i] * n_cols
                for p in range(n_cols):
                    vals[o + p] = w0 * pf[np.uint64(r0 + p)]
                for cn in range(1, n_corners):
                    w = cw[cn, i]
                    rc = cflat[cn, i] * n_cols
                    for p in range(n_cols):
                        vals[o + p] += w * pf[np.uint64(rc + p)]
        n_fix = 0
        if fused:
            # q and the log determinant, all lanes at once (padding lanes: det = 1),
            # straight into the (k, B) layout of _finish_block.
            for i in range(_BLOCK):
                for j in range(k):
                    lf[j * _BLOCK + i] = det8[i * _LANES + j]
                    qf[j * _BLOCK + i] = num8[i * _LANES + j]
            if scaled:
                # The posterior alone needs no log determinant: with det = 2**e m, m in
                # [1, 2), the density is exp(c - q/2 - e ln(2)/2) * m**-1/2, so lf keeps
                # the exact power of two and _finish_block multiplies by zf = m**-1/2
                # (in (0.707, 1]: the shift by the row maximum still keeps the largest
                # term near 1, as in log space). m**-1/2 by a quadratic start (relative
                # error 3.6e-3) and three Newton steps (4.7e-19), and 1/det =
                # 2**-e zf**2: no division and no log per pair (0.08 -> 0.03 s per 10^7
                # rows and 6 facies, measured). det at or above 2**1023 or not normal
                # takes the exact route below.
                for u in range(k * _BLOCK):
                    det = lf[u]
                    bits = np.float64(det).view(np.int64)
                    n_fix += (bits < _SMALLEST_NORMAL_BITS) | (bits >= _HUGE_DET_BITS)
                    mant = np.int64((bits & _MANTISSA_BITS) | _EXPONENT_ONE).view(np.float64)
                    y = _RSQRT_C0 + mant * (_RSQRT_C1 + mant * _RSQRT_C2)
                    half = 0.5 * mant
                    y = y * (1.5 - half * y * y)
                    y = y * (1.5 - half * y * y)
                    y = y * (1.5 - half * y * y)
                    biased = bits >> 52
                    ex = np.float64(biased - 1023)
                    inv_det = y * y * np.int64((2046 - biased) << 52).view(np.float64)
                    q = qf[u] * inv_det
                    qf[u] = q
                    zf[u] = y
                    lf[u] = crf[u] - 0.5 * (ex * _LN2_HI + ex * _LN2_LO) - 0.5 * q
            else:
                for u in range(k * _BLOCK):
                    det = lf[u]
                    bits = np.float64(det).view(np.int64)
                    n_fix += (bits < _SMALLEST_NORMAL_BITS) | (bits >= _INFINITY_BITS)
                    q = qf[u] / det
                    qf[u] = q
                    lf[u] = crf[u] - 0.5 * _log1(det) - 0.5 * q
            if n_fix > 0:
                # Over- or underflowed determinants, or lost positive definiteness by
                # rounding: as below, from the row's interpolated parameters.
                for i in range(_BLOCK):
                    t = tt[i]
                    for j in range(k):
                        r0 = cell[0, i] * (5 * _LANES) + j
                        s00 = tab_a[r0 + 2 * _LANES] + t * tab_d[r0 + 2 * _LANES]
                        s10 = tab_a[r0 + 3 * _LANES] + t * tab_d[r0 + 3 * _LANES]
                        s11 = tab_a[r0 + 4 * _LANES] + t * tab_d[r0 + 4 * _LANES]
                        dd = s00 * s11 - s10 * s10
                        if dd >= _SMALLEST_NORMAL and dd < _HUGE_DET and s00 > 0.0:
                            continue
                        zf[j * _BLOCK + i] = 1.0  # lf exact here
                        acc = np.log(s00) + np.log(s11 - s10 * s10 / s00)
                        dx = xs[0, i] - (tab_a[r0] + t * tab_d[r0])
                        dy = xs[1, i] - (tab_a[r0 + _LANES] + t * tab_d[r0 + _LANES])
                        nq = s11 * dx * dx - 2.0 * s10 * dx * dy + s00 * dy * dy
                        q = nq / dd
                        qf[j * _BLOCK + i] = q
                        lf[j * _BLOCK + i] = crf[j * _BLOCK + i] - 0.5 * acc - 0.5 * q
                        if (acc - acc) != 0.0 and good[i] == 0.0:
                            counts[5] += 1
                            good[i] = np.nan
                            n_bad_x += 1
            if with_prior and prior_rows:
                for j in range(k):
                    for i in range(m):
                        lf[j * _BLOCK + i] += lpf[np.uint64((start + i) * k + j)]
            n_clamped = 0  # summed here, not in counts: a store per row keeps the loop scalar
            for i in range(m):
                n_clamped += (clamp[i] > 0.0) & (good[i] == 0.0)
            counts[4] += n_clamped
            _finish_block(
                lf, qf, ef, rows, scratch, m, start, mode, out, most, q_win, q_min, entropy, ktag,
                zf, scaled,
            )
            if n_bad_x + n_bad_c > 0:
                _mark_bad(good, m, start, mode, out, most, q_win, q_min, entropy, ktag)
            continue
        if d == 2:
            # Closed form for two attributes, over all (row, facies) pairs at once: a
            # pair's five parameters are consecutive in vals, so the loop vectorises
            # with interleaved loads (a loop per facies reads them at stride 5 k and
            # ran as gathers, 0.22 s per 10^7 rows). q = (S11 dx^2 - 2 S10 dx dy +
            # S00 dy^2) / det with det = S00 S11 - S10^2; qf holds the numerator first.
            for i in range(_BLOCK):
                for a in range(d):
                    v = xs[a, i]
                    for j in range(k):
                        xr[a, i * k + j] = v
            for u in range(_BLOCK * k):
                v = 5 * u
                dx = xr[0, u] - vals[v]
                dy = xr[1, u] - vals[v + 1]
                s00 = vals[v + 2]
                s10 = vals[v + 3]
                s11 = vals[v + 4]
                det = s00 * s11 - s10 * s10
                dets[u] = det if s00 > 0.0 else -1.0  # -1: not positive definite
                qp[u] = s11 * dx * dx - 2.0 * s10 * dx * dy + s00 * dy * dy
            # Division and log det in a second loop: one loop for both ran 30% slower
            # (register pressure). Sharing one division between q and the log series
            # (via det = 2**e * m) measured no faster, so both are plain here.
            for u in range(_BLOCK * k):
                det = dets[u]
                bits = np.float64(det).view(np.int64)
                n_fix += (bits < _SMALLEST_NORMAL_BITS) | (bits >= _INFINITY_BITS)
                q = qp[u] / det
                qp[u] = q
                lp[u] = cr[u] - 0.5 * _log1(det) - 0.5 * q
        else:
            # LDL' factorisation (no square roots): S = L D L', q = sum y_a^2 / D_a
            # with L y = x - mean, det S = prod D_a; scratch rows in `work`.
            for j in range(k):
                for i in range(_BLOCK):
                    base = (i * k + j) * n_par
                    det = 1.0
                    for a in range(d):
                        for b in range(a):
                            acc = vals[base + d + a * (a + 1) // 2 + b]
                            for cc in range(b):
                                acc -= (
                                    work[l_row + a * (a - 1) // 2 + cc, i]
                                    * work[l_row + b * (b - 1) // 2 + cc, i]
                                    * work[dg_row + cc, i]
                                )
                            work[l_row + a * (a - 1) // 2 + b, i] = acc * work[inv_row + b, i]
                        acc = vals[base + d + a * (a + 1) // 2 + a]
                        for cc in range(a):
                            lac = work[l_row + a * (a - 1) // 2 + cc, i]
                            acc -= lac * lac * work[dg_row + cc, i]
                        work[dg_row + a, i] = acc
                        work[inv_row + a, i] = 1.0 / acc
                        det *= acc
                    q = 0.0
                    for a in range(d):
                        acc = xs[a, i] - vals[base + a]
                        for b in range(a):
                            acc -= work[l_row + a * (a - 1) // 2 + b, i] * work[y_row + b, i]
                        work[y_row + a, i] = acc
                        q += acc * acc * work[inv_row + a, i]
                    qp[i * k + j] = q
                    prod[i] = det
                _log_block(prod, logp, _BLOCK)
                for i in range(_BLOCK):
                    u = i * k + j
                    dets[u] = prod[i]
                    lp[u] = cr[u] - 0.5 * logp[i] - 0.5 * qp[u]
                    n_fix += (logp[i] - logp[i]) != 0.0
        if n_fix > 0:
            # The determinant over- or underflowed, or the matrix lost positive
            # definiteness by rounding: sum the logs of the pivots, flag the latter.
            for i in range(_BLOCK):
                for j in range(k):
                    u = i * k + j
                    det = dets[u]
                    if not (det >= _SMALLEST_NORMAL and det < np.inf):
                        base = u * n_par
                        if d == 2:
                            s00 = vals[base + 2]
                            s10 = vals[base + 3]
                            s11 = vals[base + 4]
                            acc = np.log(s00) + np.log(s11 - s10 * s10 / s00)
                            dx = xr[0, u] - vals[base]
                            dy = xr[1, u] - vals[base + 1]
                            nq = s11 * dx * dx - 2.0 * s10 * dx * dy + s00 * dy * dy
                            qp[u] = nq / (s00 * s11 - s10 * s10)
                        else:
                            acc = _ldl_logdet(vals, base, dtag)
                        lp[u] = cr[u] - 0.5 * acc - 0.5 * qp[u]
                        if (acc - acc) != 0.0 and good[i] == 0.0:
                            counts[5] += 1
                            good[i] = np.nan
                            n_bad_x += 1
        if with_prior and prior_rows:
            for u in range(m * k):
                lp[u] += lpf[np.uint64(start * k + u)]
        n_clamped = 0
        for i in range(m):
            n_clamped += (clamp[i] > 0.0) & (good[i] == 0.0)
        counts[4] += n_clamped
        # To the (k, B) layout of _finish_block (interleaved loads; finishing in the
        # (B, k) layout instead ran as gathers and scatters for k = 7: 0.69 against
        # 0.54 s per 10^7 rows and 6 facies).
        for i in range(_BLOCK):
            for j in range(k):
                lf[j * _BLOCK + i] = lp[i * k + j]
                qf[j * _BLOCK + i] = qp[i * k + j]
        _finish_block(
            lf, qf, ef, rows, scratch, m, start, mode, out, most, q_win, q_min, entropy, ktag,
            zf, False,
        )
        if n_bad_x + n_bad_c > 0:
            _mark_bad(good, m, start, mode, out, most, q_win, q_min, entropy, ktag)


def _ldl_logdet(vals, base, dtag):  # pragma: no cover - compiled by numba
    """Sum of the logs of the LDL' pivots of one packed covariance (NaN if not PD)."""
    d = len(dtag)
    piv = np.empty(d)
    low = np.empty(d * d)
    acc_log = 0.0
    for a in range(d):
        for b in range(a):
            acc = vals[base + d + a * (a + 1) // 2 + b]
            for cc in range(b):
                acc -= low[a * d + cc] * low[b * d + cc] * piv[cc]
            low[a * d + b] = acc / piv[b]
        acc = vals[base + d + a * (a + 1) // 2 + a]
        for cc in range(a):
            acc -= low[a * d + cc] * low[a * d + cc] * piv[cc]
        piv[a] = acc
        acc_log += np.log(acc)
    return acc_log


_NUMBA_FUNCTIONS = (
    "_exp1",
    "_log_series",
    "_log1",
    "_exp_block",
    "_log_block",
    "_load_block",
    "_count_bad",
    "_mark_bad",
    "_finish_block",
    "_ldl_logdet",
    "_stationary_kernel",
    "_gridded_kernel",
)
_numba_lock = threading.Lock()
_numba_ready = False


def _numba_kernels() -> tuple[Callable[..., None], Callable[..., None]]:
    """Compile (lazily, once per process; cached on disk) and return the two kernels.

    The module-level Python functions are replaced by their numba dispatchers under
    the same names, so the kernels resolve their helpers to compiled code.
    """
    global _numba_ready
    module = globals()
    with _numba_lock:
        if not _numba_ready:
            import numba

            options: dict[str, Any] = {
                "cache": True,
                "nogil": True,
                # FMA contraction only (25% faster, measured): no reassociation (it would
                # undo the Cody-Waite split of ln 2) and IEEE NaN/inf semantics (no-data
                # rows rely on them). Contraction may differ between a loop's vector body
                # and its scalar remainder, so the arithmetic loops run over full blocks
                # (see _load_block) and a row's result never depends on the chunking.
                "fastmath": {"contract"},
                "boundscheck": False,
                "error_model": "numpy",
            }
            for name in _NUMBA_FUNCTIONS:
                # Helpers are inlined at the numba IR level: called as functions they
                # ran 2.5x slower (measured), as the array arguments block vectorisation.
                extra: dict[str, Any] = {} if name.endswith("_kernel") else {"inline": "always"}
                module[name] = numba.njit(**options, **extra)(module[name])
            _numba_ready = True
    return module["_stationary_kernel"], module["_gridded_kernel"]


def _nb_evaluate(
    model: _Gaussians | _GriddedGaussians,
    x: FloatArray,
    cov: FloatArray | None,
    log_prior: FloatArray,
    mode: int,
    want_values: bool,
    extras: bool,
    out: FloatArray | None = None,
) -> _Raw:
    stationary, gridded = _numba_kernels()
    n = x.shape[0]
    if isinstance(model, _Gaussians):
        k, d = model.mean.shape
    else:
        k, d = model.n_facies, model.n_features
    if not want_values:
        out = np.empty((0, k))
    elif out is None:
        out = np.empty((n, k))
    size = n if extras else 0
    most = np.empty(size, dtype=np.int64)
    q_win, q_min, entropy = np.empty(size), np.empty(size), np.empty(size)
    counts = np.zeros(6, dtype=np.int64)
    dtag, ktag = (0,) * d, (0,) * k
    if isinstance(model, _Gaussians):
        stationary(
            x,
            model.mean,
            model.winv,
            model.log_norm,
            log_prior,
            mode,
            out,
            most,
            q_win,
            q_min,
            entropy,
            counts,
            dtag,
            ktag,
        )
    else:
        assert cov is not None
        gridded(
            x,
            cov,
            model.node_values,
            model.node_offsets,
            model.strides,
            model.params,
            log_prior,
            mode,
            out,
            most,
            q_win,
            q_min,
            entropy,
            counts,
            dtag,
            ktag,
            (0,) * cov.shape[1],
            _LANES,
        )
    if not extras:
        return _Raw(out if want_values else None, None, None, None, None, counts)
    return _Raw(out if want_values else None, most, q_win, q_min, entropy, counts)


def _evaluate(
    model: _Gaussians | _GriddedGaussians,
    x: FloatArray,
    cov: FloatArray | None,
    log_prior: FloatArray,
    mode: int,
    *,
    want_values: bool = True,
    extras: bool = False,
    engine: str = "auto",
    out: FloatArray | None = None,
) -> _Raw:
    """The one evaluation core every public function and method goes through.

    It forms the joint log-density log pi_j + log p(x | j) for each row and facies,
    normalises it with a log-sum-exp (shift by the row maximum) and returns, per
    ``mode``, the posterior, the log-posterior, the squared Mahalanobis distances or
    the log-likelihoods, plus (``extras``) the most likely facies, its squared
    Mahalanobis distance, the smallest squared distance and the entropy in nats.
    Rows with a non-finite value come back as NaN / -1 and are counted in
    ``counts`` (x NaN rows, x inf rows, covariate NaN rows, covariate inf rows,
    clamped rows, rows where the interpolated covariance lost definiteness).
    ``out`` (checked by the caller, see _check_out) receives the values instead of a
    new array.
    """
    if _resolve_engine(engine) == "numba":
        return _nb_evaluate(model, x, cov, log_prior, mode, want_values, extras, out)
    return _np_evaluate(model, x, cov, log_prior, mode, want_values, extras, out)


def _classification(
    raw: _Raw, k: int, max_mahalanobis: float | None, normalised: bool
) -> Classification:
    assert raw.most_likely is not None and raw.q_win is not None
    assert raw.q_min is not None and raw.entropy is not None and raw.values is not None
    most = raw.most_likely
    no_data = most < 0
    unclassified = no_data.copy()
    if max_mahalanobis is not None:
        with np.errstate(invalid="ignore"):
            unclassified |= raw.q_min > float(max_mahalanobis) ** 2
        most = np.where(unclassified, -1, most)
    entropy = raw.entropy
    if normalised:
        entropy = entropy / np.log(k) if k > 1 else np.where(no_data, np.nan, 0.0)
    return Classification(
        raw.values,
        most,
        np.sqrt(raw.q_win),
        entropy,
        unclassified,
        int(raw.counts[_COUNT_CLAMPED]),
    )


def _check_max_mahalanobis(max_mahalanobis: float | None) -> float | None:
    if max_mahalanobis is None:
        return None
    return float(in_range("max_mahalanobis", max_mahalanobis, 0.0, low_open=True))


# --------------------------------------------------------------------------------------
# Public functions
# --------------------------------------------------------------------------------------


def _stationary_inputs(
    x: ArrayLike, means: ArrayLike, covariances: ArrayLike
) -> tuple[FloatArray, _Gaussians]:
    xa = _as_points(x)
    mu = _check_means(means, xa.shape[1], (), "")
    cov = _check_covariances(covariances, mu)
    return xa, _prepare_gaussians(mu, cov)


def _nonstationary_inputs(
    x: ArrayLike, covariate: ArrayLike, nodes: ArrayLike, means: ArrayLike, covariances: ArrayLike
) -> tuple[FloatArray, FloatArray, _GriddedGaussians]:
    xa = _as_points(x)
    node_arr = _check_axis("nodes", nodes)
    m = node_arr.size
    mu = _check_means(means, xa.shape[1], (m,), f"n_nodes={m}, ")
    cov = _check_covariances(covariances, mu)
    ca = np.ascontiguousarray(covariate, dtype=np.float64)
    if ca.shape != (xa.shape[0],):
        raise ValueError(
            f"covariate must have shape (n_points,) = ({xa.shape[0]},) to match x; "
            f"got shape {ca.shape}"
        )
    return xa, ca.reshape(-1, 1), _prepare_gridded([node_arr], mu, cov)


def posterior(
    x: ArrayLike,
    means: ArrayLike,
    covariances: ArrayLike,
    priors: ArrayLike | None = None,
    *,
    engine: str = "auto",
    out: NDArray[np.float64] | None = None,
) -> FloatArray:
    """Posterior facies probabilities under stationary Gaussian densities.

    Bayes' rule with Gaussian class densities (quadratic discriminant analysis;
    Hastie et al. 2009, section 4.3), evaluated in log space with a log-sum-exp.

    Parameters
    ----------
    x : array_like of shape (n_points, n_features)
        Attributes at each location, finite, in the units of ``means``.
    means : array_like of shape (n_facies, n_features)
        Mean attribute vector of each facies.
    covariances : array_like of shape (n_facies, n_features, n_features)
        Symmetric positive definite covariance of each facies (attribute units squared).
    priors : array_like of shape (n_facies,) or (n_points, n_facies), optional
        Prior probability of each facies (fractions summing to 1), constant or per
        location from a prior map. Default: uniform.
    engine : {"auto", "numba", "numpy"}
        Compiled kernel or numpy reference path ("auto": numba when installed).
    out : ndarray of shape (n_points, n_facies), optional
        Writeable C-contiguous float64 array to write the posterior into (and return),
        e.g. one buffer reused for every block of a cube: a fresh result array is paid
        for in page faults (about 0.05 s per 10^7 rows of 6 facies). Its contents are
        undefined when an error is raised.

    Returns
    -------
    ndarray of shape (n_points, n_facies)
        P(facies | x); each row sums to 1 (``out`` when given).

    Raises
    ------
    ValueError
        On shapes that do not match (naming the argument, expected and received
        shapes), non-finite values, or a covariance that is not symmetric positive
        definite (naming the facies index).
    """
    xa, model = _stationary_inputs(x, means, covariances)
    k = model.mean.shape[0]
    log_prior = _log_priors(priors, xa.shape[0], k)
    if out is not None:
        out = _check_out(out, xa.shape[0], k, {"x": xa, "priors": log_prior})
    raw = _evaluate(model, xa, None, log_prior, _POSTERIOR, engine=engine, out=out)
    _raise_for_nonfinite(raw.counts, allow_nan=False, cov_name="covariate")
    assert raw.values is not None
    return raw.values


def log_likelihood(
    x: ArrayLike, means: ArrayLike, covariances: ArrayLike, *, engine: str = "auto"
) -> FloatArray:
    """Gaussian log probability density of each row under each facies.

    ``log N(x; mu_j, Sigma_j) = -d/2 log(2 pi) - log det(L_j) - |L_j^-1 (x - mu_j)|^2 / 2``
    with L_j the Cholesky factor of Sigma_j.

    Parameters
    ----------
    x : array_like of shape (n_points, n_features)
    means : array_like of shape (n_facies, n_features)
    covariances : array_like of shape (n_facies, n_features, n_features)
    engine : {"auto", "numba", "numpy"}

    Returns
    -------
    ndarray of shape (n_points, n_facies)
        Natural log of the density (log of 1 / product of attribute units).
    """
    xa, model = _stationary_inputs(x, means, covariances)
    k = model.mean.shape[0]
    raw = _evaluate(model, xa, None, np.zeros((1, k)), _LOG_LIKELIHOOD, engine=engine)
    _raise_for_nonfinite(raw.counts, allow_nan=False, cov_name="covariate")
    assert raw.values is not None
    return raw.values


def mahalanobis(
    x: ArrayLike, means: ArrayLike, covariances: ArrayLike, *, engine: str = "auto"
) -> FloatArray:
    """Mahalanobis (1936) distance of each row to each facies.

    ``D_j(x) = sqrt((x - mu_j)' Sigma_j^-1 (x - mu_j)) = |L_j^-1 (x - mu_j)|``.

    Parameters
    ----------
    x : array_like of shape (n_points, n_features)
    means : array_like of shape (n_facies, n_features)
    covariances : array_like of shape (n_facies, n_features, n_features)
    engine : {"auto", "numba", "numpy"}

    Returns
    -------
    ndarray of shape (n_points, n_facies)
        Distances in standard deviations (dimensionless).
    """
    xa, model = _stationary_inputs(x, means, covariances)
    k = model.mean.shape[0]
    raw = _evaluate(model, xa, None, np.zeros((1, k)), _SQ_MAHALANOBIS, engine=engine)
    _raise_for_nonfinite(raw.counts, allow_nan=False, cov_name="covariate")
    assert raw.values is not None
    return np.sqrt(raw.values)


def posterior_nonstationary(
    x: ArrayLike,
    covariate: ArrayLike,
    nodes: ArrayLike,
    means: ArrayLike,
    covariances: ArrayLike,
    priors: ArrayLike | None = None,
    *,
    engine: str = "auto",
    out: NDArray[np.float64] | None = None,
) -> FloatArray:
    """Posterior facies probabilities with Gaussians that drift with one covariate.

    At a location with covariate value c between nodes[i] and nodes[i+1], each
    facies' mean and covariance are ``(1 - t) * node i + t * node i+1`` with
    ``t = (c - nodes[i]) / (nodes[i+1] - nodes[i])``: a convex combination, so the
    covariance stays positive definite. Outside the node range the end node is used
    (clamped). Then Bayes' rule as in :func:`posterior`.

    Parameters
    ----------
    x : array_like of shape (n_points, n_features)
        Finite attributes.
    covariate : array_like of shape (n_points,)
        Finite covariate value at each location (e.g. maximum burial depth, m), in
        the unit of ``nodes``.
    nodes : array_like of shape (n_nodes,)
        Strictly increasing covariate values at which the Gaussians are given.
    means : array_like of shape (n_nodes, n_facies, n_features)
    covariances : array_like of shape (n_nodes, n_facies, n_features, n_features)
        Symmetric positive definite at every node.
    priors : array_like of shape (n_facies,) or (n_points, n_facies), optional
        Facies priors (fractions summing to 1); default uniform.
    engine : {"auto", "numba", "numpy"}
    out : ndarray of shape (n_points, n_facies), optional
        Array to write the posterior into, as for :func:`posterior`.

    Returns
    -------
    ndarray of shape (n_points, n_facies)
        P(facies | x, covariate); rows sum to 1 (``out`` when given).

    Raises
    ------
    ValueError
        On mismatched shapes, non-finite values, nodes not strictly increasing, or a
        node covariance that is not symmetric positive definite (naming node and facies).
    """
    xa, ca, model = _nonstationary_inputs(x, covariate, nodes, means, covariances)
    log_prior = _log_priors(priors, xa.shape[0], model.n_facies)
    if out is not None:
        inputs = {"x": xa, "covariate": ca, "priors": log_prior}
        out = _check_out(out, xa.shape[0], model.n_facies, inputs)
    raw = _evaluate(model, xa, ca, log_prior, _POSTERIOR, engine=engine, out=out)
    _raise_for_nonfinite(raw.counts, allow_nan=False, cov_name="covariate")
    assert raw.values is not None
    return raw.values


def classify(
    x: ArrayLike,
    means: ArrayLike,
    covariances: ArrayLike,
    priors: ArrayLike | None = None,
    *,
    covariate: ArrayLike | None = None,
    nodes: ArrayLike | None = None,
    max_mahalanobis: float | None = None,
    normalised_entropy: bool = False,
    engine: str = "auto",
) -> Classification:
    """Classify a map or a block of a cube: posterior, winner, QC distance, entropy.

    Without ``covariate``/``nodes`` the Gaussians are stationary (shapes as in
    :func:`posterior`); with them, they drift with the covariate (shapes as in
    :func:`posterior_nonstationary`). Rows holding NaN in x or the covariate (no
    data, dead traces) are carried through: NaN posterior, ``most_likely = -1``,
    ``unclassified = True``. Infinity is refused.

    Parameters
    ----------
    x : array_like of shape (n_points, n_features)
    means, covariances : array_like
        Facies Gaussians, stationary or per node.
    priors : array_like of shape (n_facies,) or (n_points, n_facies), optional
        Facies priors (fractions summing to 1); default uniform.
    covariate : array_like of shape (n_points,), optional
        Covariate per location, in the unit of ``nodes``.
    nodes : array_like of shape (n_nodes,), optional
        Strictly increasing covariate nodes.
    max_mahalanobis : float, optional
        Rows farther than this many standard deviations (Mahalanobis distance) from
        every facies are flagged unclassified and get ``most_likely = -1``.
    normalised_entropy : bool
        Report entropy / log(n_facies) (0 to 1) instead of nats.
    engine : {"auto", "numba", "numpy"}

    Returns
    -------
    Classification
    """
    limit = _check_max_mahalanobis(max_mahalanobis)
    if (covariate is None) != (nodes is None):
        raise ValueError("covariate and nodes must be given together (or neither)")
    model: _Gaussians | _GriddedGaussians
    if covariate is None:
        xa, smodel = _stationary_inputs(x, means, covariances)
        model, ca, k = smodel, None, smodel.mean.shape[0]
    else:
        assert nodes is not None
        xa, ca, gmodel = _nonstationary_inputs(x, covariate, nodes, means, covariances)
        model, k = gmodel, gmodel.n_facies
    log_prior = _log_priors(priors, xa.shape[0], k)
    raw = _evaluate(model, xa, ca, log_prior, _POSTERIOR, extras=True, engine=engine)
    _raise_for_nonfinite(raw.counts, allow_nan=True, cov_name="covariate")
    return _classification(raw, k, limit, normalised_entropy)


# --------------------------------------------------------------------------------------
# Fitting from samples
# --------------------------------------------------------------------------------------


def _fit_gaussian(
    sample: FloatArray, reg_covariance: float, where: str, ddof: int = 1
) -> tuple[FloatArray, FloatArray]:
    """Sample mean and covariance, normalised by n - ddof.

    ddof = 1 is the unbiased estimate (numpy.cov's default), ddof = 0 the maximum
    likelihood one (what scikit-learn 1.9's QuadraticDiscriminantAnalysis stores).

    With ``reg_covariance = r > 0`` the covariance is shrunk towards its own
    diagonal, ``(1 - r) S + r diag(S)``: positive definite whenever no attribute is
    constant, and (unlike adding r times the identity) independent of the units
    of the attributes.
    """
    n, d = sample.shape
    if n < d + 1:
        raise ValueError(
            f"{where} has {n} samples of {d} features; a covariance needs at least "
            f"n_features + 1 = {d + 1} samples"
        )
    mean = sample.mean(axis=0)
    centred = sample - mean
    cov = centred.T @ centred / (n - ddof)
    variances = np.diag(cov)
    if np.any(variances <= 0.0):
        a = int(np.argmax(variances <= 0.0))
        raise ValueError(
            f"{where}: attribute {a} is constant, so its covariance is singular (no "
            "regularisation helps; drop the attribute or check the sample)"
        )
    if reg_covariance > 0.0:
        cov = (1.0 - reg_covariance) * cov + reg_covariance * np.diag(variances)
    else:
        # numpy's matrix_rank rule: singular values below s_max * max(n, d) * eps.
        rank = np.linalg.matrix_rank(centred / np.sqrt(variances))
        if rank < d:
            raise ValueError(
                f"{where}: the samples are collinear (rank {rank} < {d} features), so the "
                "covariance is singular; set reg_covariance > 0 to shrink it towards its "
                "diagonal"
            )
    _facies_cholesky(cov, f"{where}: the sample covariance")
    return mean, cov


def _check_fit_priors(priors: Any, counts: FloatArray) -> FloatArray:
    """Facies priors from the setting: None (uniform), "frequencies" or an array."""
    k = counts.shape[-1]
    if priors is None:
        return np.full(k, 1.0 / k)
    if isinstance(priors, str):
        if priors != "frequencies":
            raise ValueError(f"priors must be None, 'frequencies' or an array; got {priors!r}")
        total = counts.reshape(-1, k).sum(axis=0)
        return total / total.sum()
    return np.exp(_log_priors(priors, 1, k)[0])


def _fit_tests(sample: FloatArray) -> GaussianFitTests:
    """Gaussian fit tests, NaN when the raw sample covariance is singular.

    That happens only for a sample accepted thanks to ``reg_covariance`` (collinear
    attributes), where the tests are undefined.
    """
    try:
        return gaussian_fit_tests(sample)
    except ValueError:
        return GaussianFitTests(*([float("nan")] * len(GaussianFitTests._fields)))


def _check_reg(reg_covariance: float) -> float:
    return float(in_range("reg_covariance", reg_covariance, 0.0, 1.0, high_open=True))


def _check_ddof(ddof: int) -> int:
    if ddof not in (0, 1):
        raise ValueError(f"covariance_ddof must be 0 or 1 (got {ddof!r})")
    return int(ddof)


class GaussianFacies:
    """Stationary Bayesian facies classifier: one density per facies.

    Each facies gets a Gaussian (sample mean and covariance) or, per facies, a Gaussian
    kernel density (:class:`porecast.physics.density.GaussianKernelDensity`). The
    Gaussian's goodness of fit is reported per facies in ``goodness_of_fit_`` so
    the user sees when "gaussian" is a poor choice.

    Parameters
    ----------
    priors : None, "frequencies" or array_like of shape (n_facies,)
        Default priors: None = uniform (Monte Carlo sample counts carry no
        geological meaning), "frequencies" = sample counts, or fractions summing to
        1. Every predicting method also accepts a per-call ``priors`` of shape
        (n_facies,) or (n_points, n_facies) (a prior map).
    reg_covariance : float
        Shrinkage of each covariance towards its diagonal, 0 <= r < 1 (default 0).
    covariance_ddof : {1, 0}
        Covariance normalised by n - 1 (unbiased, default) or n (maximum likelihood,
        as scikit-learn 1.9's QuadraticDiscriminantAnalysis).
    density : "gaussian", "kde" or mapping facies name -> "gaussian" | "kde"
        Density model per facies.
    kde_bandwidth : {"scott", "silverman"} or float
        Bandwidth rule of the KDE facies.
    kde_max_points : int
        Kernel centres kept per KDE facies (subsampled beyond that).
    random_state : int
        Seed of the KDE subsample.
    engine : {"auto", "numba", "numpy"}
        Evaluation engine for the Gaussian facies.

    Attributes
    ----------
    classes_ : ndarray of shape (n_facies,)
        Facies names (mapping keys in order, or sorted labels of y).
    means_ : ndarray of shape (n_facies, n_features)
    covariances_ : ndarray of shape (n_facies, n_features, n_features)
    priors_ : ndarray of shape (n_facies,)
    n_samples_ : ndarray of shape (n_facies,)
    n_features_in_ : int
    densities_ : tuple of str
        "gaussian" or "kde" per facies.
    kdes_ : dict
        Facies index -> fitted GaussianKernelDensity, for the KDE facies.
    goodness_of_fit_ : GaussianFitTests
        Fields are arrays of shape (n_facies,): Mardia skewness and kurtosis with
        p-values, Kolmogorov-Smirnov test of the squared Mahalanobis distances.
    """

    def __init__(
        self,
        *,
        priors: Any = None,
        reg_covariance: float = 0.0,
        covariance_ddof: int = 1,
        density: str | Mapping[Any, str] = "gaussian",
        kde_bandwidth: str | float = "scott",
        kde_max_points: int = 2000,
        random_state: int = 0,
        engine: str = "auto",
    ) -> None:
        self.priors = priors
        self.reg_covariance = reg_covariance
        self.covariance_ddof = covariance_ddof
        self.density = density
        self.kde_bandwidth = kde_bandwidth
        self.kde_max_points = kde_max_points
        self.random_state = random_state
        self.engine = engine

    def fit(
        self, samples: Mapping[Any, ArrayLike] | ArrayLike, y: ArrayLike | None = None
    ) -> GaussianFacies:
        """Fit one density per facies.

        Parameters
        ----------
        samples : mapping facies name -> array_like of shape (n_i, n_features), or
            array_like of shape (n_samples, n_features) together with ``y``.
        y : array_like of shape (n_samples,), optional
            Facies label of each row of ``samples``.

        Returns
        -------
        GaussianFacies
            self
        """
        reg = _check_reg(self.reg_covariance)
        ddof = _check_ddof(self.covariance_ddof)
        _resolve_engine(self.engine)
        names, groups = _split_samples(samples, y)
        if len(names) < 2:
            raise ValueError(f"need samples of at least 2 facies to classify; got {len(names)}")
        d = groups[0].shape[1]
        k = len(names)
        means = np.empty((k, d))
        covs = np.empty((k, d, d))
        tests = []
        for j, (name, group) in enumerate(zip(names, groups, strict=True)):
            where = f"facies {name!r} (index {j})"
            if group.shape[1] != d:
                raise ValueError(f"{where} has {group.shape[1]} features; the first facies has {d}")
            means[j], covs[j] = _fit_gaussian(group, reg, where, ddof)
            tests.append(_fit_tests(group))
        counts = np.array([g.shape[0] for g in groups], dtype=float)
        self.priors_ = _check_fit_priors(self.priors, counts)
        self.densities_ = _densities(self.density, names)
        self.kdes_ = {
            j: GaussianKernelDensity(
                bandwidth=self.kde_bandwidth,
                max_points=self.kde_max_points,
                random_state=self.random_state,
            ).fit(groups[j])
            for j in range(k)
            if self.densities_[j] == "kde"
        }
        self.classes_ = np.array(names)
        self.means_ = means
        self.covariances_ = covs
        self.n_samples_ = counts.astype(np.int64)
        self.n_features_in_ = d
        self.goodness_of_fit_ = GaussianFitTests(*(np.array(f) for f in zip(*tests, strict=True)))
        self._model = _prepare_gaussians(means, covs)
        return self

    def _check_fitted(self) -> None:
        if not hasattr(self, "_model"):
            raise ValueError(f"this {type(self).__name__} is not fitted; call fit() first")

    def _raw(
        self,
        x: ArrayLike,
        priors: ArrayLike | None,
        mode: int,
        *,
        want_values: bool,
        extras: bool,
        allow_nan: bool,
    ) -> _Raw:
        self._check_fitted()
        xa = _as_points(x)
        if xa.shape[1] != self.n_features_in_:
            raise ValueError(
                f"x must have shape (n_points, {self.n_features_in_}); got shape {xa.shape}"
            )
        k = len(self.classes_)
        if mode in (_SQ_MAHALANOBIS, _LOG_LIKELIHOOD):
            log_prior = np.zeros((1, k))
        else:
            log_prior = _log_priors(self.priors_ if priors is None else priors, xa.shape[0], k)
        if self.kdes_ and mode != _SQ_MAHALANOBIS:
            raw = self._raw_mixed(xa, log_prior, mode, want_values, extras)
        else:
            raw = _evaluate(
                self._model,
                xa,
                None,
                log_prior,
                mode,
                want_values=want_values,
                extras=extras,
                engine=self.engine,
            )
        _raise_for_nonfinite(raw.counts, allow_nan=allow_nan, cov_name="covariates")
        return raw

    def _raw_mixed(
        self, xa: FloatArray, log_prior: FloatArray, mode: int, want_values: bool, extras: bool
    ) -> _Raw:
        """Numpy path with KDE columns: Gaussian terms, KDE log-densities, one normalisation."""
        n, k = xa.shape[0], len(self.classes_)
        counts = np.zeros(6, dtype=np.int64)
        values = np.full((n, k), np.nan) if want_values else None
        most = np.full(n, -1, dtype=np.int64)
        q_win, q_min, entropy = (np.full(n, np.nan) for _ in range(3))
        for start in range(0, n, _NUMPY_CHUNK):
            stop = min(n, start + _NUMPY_CHUNK)
            xb = xa[start:stop]
            good = _np_row_good(xb)
            if not good.all():
                _np_count(xb, good, counts, _COUNT_X_NAN)
            rows = np.flatnonzero(good)
            loglik, q = _np_stationary_terms(self._model, xb[rows])
            for j, kde in self.kdes_.items():
                loglik[:, j] = kde._log_pdf_finite(xb[rows])
            lp = log_prior if log_prior.shape[0] == 1 else log_prior[start:stop][rows]
            joint = loglik if mode == _LOG_LIKELIHOOD else loglik + lp
            vals, top, qw, qm, ent = _np_finish(joint, q, mode, want_values, extras)
            if values is not None:
                values[start + rows] = vals
            if extras:
                assert top is not None
                most[start + rows] = top
                q_win[start + rows] = qw
                q_min[start + rows] = qm
                entropy[start + rows] = ent
        return _Raw(
            values,
            most if extras else None,
            q_win if extras else None,
            q_min if extras else None,
            entropy if extras else None,
            counts,
        )

    def log_posterior(self, x: ArrayLike, priors: ArrayLike | None = None) -> FloatArray:
        """Log posterior log P(facies | x), shape (n_points, n_facies); x must be finite."""
        raw = self._raw(x, priors, _LOG_POSTERIOR, want_values=True, extras=False, allow_nan=False)
        assert raw.values is not None
        return raw.values

    def predict_proba(self, x: ArrayLike, priors: ArrayLike | None = None) -> FloatArray:
        """Posterior P(facies | x), shape (n_points, n_facies); x must be finite."""
        raw = self._raw(x, priors, _POSTERIOR, want_values=True, extras=False, allow_nan=False)
        assert raw.values is not None
        return raw.values

    def predict(self, x: ArrayLike, priors: ArrayLike | None = None) -> NDArray[Any]:
        """Most likely facies name for each row of x (finite), shape (n_points,)."""
        raw = self._raw(x, priors, _POSTERIOR, want_values=False, extras=True, allow_nan=False)
        assert raw.most_likely is not None
        return self.classes_[raw.most_likely]

    def mahalanobis(self, x: ArrayLike) -> FloatArray:
        """Mahalanobis distance of each row to each facies' Gaussian, (n_points, n_facies).

        For KDE facies this is the distance to the Gaussian of the same mean and
        covariance (the QC measure stays comparable between facies).
        """
        raw = self._raw(x, None, _SQ_MAHALANOBIS, want_values=True, extras=False, allow_nan=False)
        assert raw.values is not None
        return np.sqrt(raw.values)

    def classify(
        self,
        x: ArrayLike,
        priors: ArrayLike | None = None,
        *,
        max_mahalanobis: float | None = None,
        normalised_entropy: bool = False,
    ) -> Classification:
        """Classify rows of x; NaN rows are carried through as no data.

        Parameters
        ----------
        x : array_like of shape (n_points, n_features)
        priors : array_like of shape (n_facies,) or (n_points, n_facies), optional
            Overrides ``priors_`` for this call.
        max_mahalanobis : float, optional
            Flag rows farther than this (standard deviations) from every facies.
        normalised_entropy : bool
            Entropy divided by log(n_facies).

        Returns
        -------
        Classification
        """
        limit = _check_max_mahalanobis(max_mahalanobis)
        raw = self._raw(x, priors, _POSTERIOR, want_values=True, extras=True, allow_nan=True)
        return _classification(raw, len(self.classes_), limit, normalised_entropy)


def _split_samples(
    samples: Mapping[Any, ArrayLike] | ArrayLike, y: ArrayLike | None
) -> tuple[list[Any], list[FloatArray]]:
    if isinstance(samples, Mapping):
        if y is not None:
            raise ValueError("give either a mapping of samples per facies or samples with y")
        names = list(samples.keys())
        groups = [_sample_array(f"samples[{name!r}]", samples[name]) for name in names]
        return names, groups
    if y is None:
        raise ValueError("samples given as one array need the facies labels y")
    arr = _sample_array("samples", samples)
    labels = np.asarray(y)
    if labels.shape != (arr.shape[0],):
        raise ValueError(
            f"y must have shape (n_samples,) = ({arr.shape[0]},); got shape {labels.shape}"
        )
    names = list(np.unique(labels))
    return names, [arr[labels == name] for name in names]


def _sample_array(name: str, value: ArrayLike) -> FloatArray:
    arr = as_finite(name, value)
    if arr.ndim != 2:
        raise ValueError(f"{name} must have shape (n_samples, n_features); got shape {arr.shape}")
    return arr


def _densities(density: str | Mapping[Any, str], names: Sequence[Any]) -> tuple[str, ...]:
    allowed = ("gaussian", "kde")
    if isinstance(density, str):
        chosen = {name: density for name in names}
    else:
        unknown = set(density) - set(names)
        if unknown:
            raise ValueError(f"density names unknown facies {sorted(map(str, unknown))}")
        chosen = {name: density.get(name, "gaussian") for name in names}
    for name, value in chosen.items():
        if value not in allowed:
            raise ValueError(
                f"density for facies {name!r} must be 'gaussian' or 'kde'; got {value!r}"
            )
    return tuple(chosen[name] for name in names)


class NonstationaryGaussianFacies:
    """Bayesian facies classifier whose Gaussians drift over a grid of covariates.

    Fitted from samples at every node of a regular (not necessarily evenly spaced)
    grid over one or more covariates, e.g. uplift (m) x present depth (m) x
    geothermal gradient (degC/km). At a location the facies means and covariances
    are the multilinear interpolation of the 2**n_axes corner nodes of its grid
    cell (a convex combination, so covariances stay positive definite); covariates
    outside the node range are clamped to the end nodes, and ``n_clamped_``
    reports how many locations that happened to in the last call.

    Parameters
    ----------
    priors : None, "frequencies" or array_like of shape (n_facies,)
        Default priors (None = uniform; "frequencies" = sample counts summed over
        nodes); per-call ``priors`` of shape (n_facies,) or (n_points, n_facies)
        override them.
    reg_covariance : float
        Shrinkage of each node covariance towards its diagonal, 0 <= r < 1.
    covariance_ddof : {1, 0}
        Covariance normalised by n - 1 (default) or n.
    engine : {"auto", "numba", "numpy"}

    Attributes
    ----------
    classes_ : ndarray of shape (n_facies,)
    axes_ : tuple of str
        Covariate names in grid order.
    node_axes_ : dict
        Covariate name -> node values (strictly increasing).
    grid_shape_ : tuple of int
    means_ : ndarray of shape (*grid_shape, n_facies, n_features)
    covariances_ : ndarray of shape (*grid_shape, n_facies, n_features, n_features)
    priors_ : ndarray of shape (n_facies,)
    n_samples_ : ndarray of shape (*grid_shape, n_facies)
    n_features_in_ : int
    goodness_of_fit_ : GaussianFitTests
        Fields are arrays of shape (*grid_shape, n_facies).
    n_clamped_ : int or None
        Locations clamped in the last predicting call.
    """

    def __init__(
        self,
        *,
        priors: Any = None,
        reg_covariance: float = 0.0,
        covariance_ddof: int = 1,
        engine: str = "auto",
    ) -> None:
        self.priors = priors
        self.reg_covariance = reg_covariance
        self.covariance_ddof = covariance_ddof
        self.engine = engine

    def fit(
        self,
        samples: Any,
        node_axes: Mapping[str, ArrayLike],
        *,
        classes: Sequence[Any] | None = None,
    ) -> NonstationaryGaussianFacies:
        """Fit a Gaussian per facies at every grid node.

        Parameters
        ----------
        samples : one of
            * ndarray of shape (*grid_shape, n_facies, n_samples, n_features): the
              same number of samples at every node and facies;
            * object ndarray of shape (*grid_shape, n_facies) whose elements are
              arrays of shape (n_i, n_features) (sample counts may differ);
            * mapping facies name -> ndarray of shape (*grid_shape, n_samples,
              n_features) or object ndarray of shape grid_shape as above.
        node_axes : mapping covariate name -> array_like of shape (n_nodes_a,)
            Strictly increasing node values per covariate, in grid order (the
            order of the mapping); grid_shape = (n_nodes_a for each axis).
        classes : sequence, optional
            Facies names for array samples (default 0 .. n_facies - 1).

        Returns
        -------
        NonstationaryGaussianFacies
            self
        """
        reg = _check_reg(self.reg_covariance)
        ddof = _check_ddof(self.covariance_ddof)
        _resolve_engine(self.engine)
        if not isinstance(node_axes, Mapping) or len(node_axes) == 0:
            raise ValueError("node_axes must be a non-empty mapping name -> node values")
        axes = {str(name): _check_axis(f"node_axes[{name!r}]", v) for name, v in node_axes.items()}
        grid_shape = tuple(a.size for a in axes.values())
        names, get = _grid_samples(samples, grid_shape, classes)
        k = len(names)
        if k < 2:
            raise ValueError(f"need samples of at least 2 facies to classify; got {k}")
        d = get(tuple(0 for _ in grid_shape), 0).shape[1]
        means = np.empty((*grid_shape, k, d))
        covs = np.empty((*grid_shape, k, d, d))
        counts = np.empty((*grid_shape, k))
        fields: list[list[Any]] = [[] for _ in GaussianFitTests._fields]
        for index in np.ndindex(*grid_shape):
            at = ", ".join(f"{a}={axes[a][i]:g}" for a, i in zip(axes, index, strict=True))
            for j in range(k):
                group = get(index, j)
                where = f"facies {names[j]!r} (index {j}) at node ({at})"
                if group.shape[1] != d:
                    raise ValueError(f"{where} has {group.shape[1]} features; expected {d}")
                means[index + (j,)], covs[index + (j,)] = _fit_gaussian(group, reg, where, ddof)
                counts[index + (j,)] = group.shape[0]
                for f, v in zip(fields, _fit_tests(group), strict=True):
                    f.append(v)
        self.priors_ = _check_fit_priors(self.priors, counts)
        self.classes_ = np.array(names)
        self.axes_ = tuple(axes)
        self.node_axes_ = axes
        self.grid_shape_ = grid_shape
        self.means_ = means
        self.covariances_ = covs
        self.n_samples_ = counts.astype(np.int64)
        self.n_features_in_ = d
        self.goodness_of_fit_ = GaussianFitTests(
            *(np.array(f).reshape(*grid_shape, k) for f in fields)
        )
        self.n_clamped_: int | None = None
        self._model = _prepare_gridded(list(axes.values()), means, covs)
        return self

    def _check_fitted(self) -> None:
        if not hasattr(self, "_model"):
            raise ValueError(f"this {type(self).__name__} is not fitted; call fit() first")

    def _raw(
        self,
        x: ArrayLike,
        covariates: Mapping[str, ArrayLike],
        priors: ArrayLike | None,
        mode: int,
        *,
        want_values: bool,
        extras: bool,
        allow_nan: bool,
    ) -> _Raw:
        self._check_fitted()
        xa = _as_points(x)
        if xa.shape[1] != self.n_features_in_:
            raise ValueError(
                f"x must have shape (n_points, {self.n_features_in_}); got shape {xa.shape}"
            )
        ca = self._covariate_matrix(covariates, xa.shape[0])
        k = len(self.classes_)
        if mode in (_SQ_MAHALANOBIS, _LOG_LIKELIHOOD):
            log_prior = np.zeros((1, k))
        else:
            log_prior = _log_priors(self.priors_ if priors is None else priors, xa.shape[0], k)
        raw = _evaluate(
            self._model,
            xa,
            ca,
            log_prior,
            mode,
            want_values=want_values,
            extras=extras,
            engine=self.engine,
        )
        _raise_for_nonfinite(raw.counts, allow_nan=allow_nan, cov_name="covariates")
        self.n_clamped_ = int(raw.counts[_COUNT_CLAMPED])
        return raw

    def _covariate_matrix(self, covariates: Mapping[str, ArrayLike], n: int) -> FloatArray:
        if not isinstance(covariates, Mapping):
            raise ValueError(f"covariates must be a mapping with the keys {list(self.axes_)}")
        missing = [a for a in self.axes_ if a not in covariates]
        extra = [str(a) for a in covariates if a not in self.axes_]
        if missing or extra:
            raise ValueError(
                f"covariates must have exactly the keys {list(self.axes_)}; missing {missing}, "
                f"unexpected {extra}"
            )
        out = np.empty((n, len(self.axes_)))
        for a, name in enumerate(self.axes_):
            col = np.asarray(covariates[name], dtype=np.float64)
            if col.shape != (n,):
                raise ValueError(
                    f"covariates[{name!r}] must have shape (n_points,) = ({n},); got shape "
                    f"{col.shape}"
                )
            out[:, a] = col
        return out

    def log_posterior(
        self, x: ArrayLike, covariates: Mapping[str, ArrayLike], priors: ArrayLike | None = None
    ) -> FloatArray:
        """Log posterior, shape (n_points, n_facies); x and covariates must be finite."""
        raw = self._raw(
            x, covariates, priors, _LOG_POSTERIOR, want_values=True, extras=False, allow_nan=False
        )
        assert raw.values is not None
        return raw.values

    def predict_proba(
        self, x: ArrayLike, covariates: Mapping[str, ArrayLike], priors: ArrayLike | None = None
    ) -> FloatArray:
        """Posterior P(facies | x, covariates), shape (n_points, n_facies).

        Parameters
        ----------
        x : array_like of shape (n_points, n_features)
            Finite attributes.
        covariates : mapping covariate name -> array_like of shape (n_points,)
            Finite covariate values (units of ``node_axes_``), one entry per axis.
        priors : array_like of shape (n_facies,) or (n_points, n_facies), optional

        Returns
        -------
        ndarray of shape (n_points, n_facies)
        """
        raw = self._raw(
            x, covariates, priors, _POSTERIOR, want_values=True, extras=False, allow_nan=False
        )
        assert raw.values is not None
        return raw.values

    def predict(
        self, x: ArrayLike, covariates: Mapping[str, ArrayLike], priors: ArrayLike | None = None
    ) -> NDArray[Any]:
        """Most likely facies name per row, shape (n_points,)."""
        raw = self._raw(
            x, covariates, priors, _POSTERIOR, want_values=False, extras=True, allow_nan=False
        )
        assert raw.most_likely is not None
        return self.classes_[raw.most_likely]

    def mahalanobis(self, x: ArrayLike, covariates: Mapping[str, ArrayLike]) -> FloatArray:
        """Mahalanobis distance to each facies' interpolated Gaussian, (n_points, n_facies)."""
        raw = self._raw(
            x, covariates, None, _SQ_MAHALANOBIS, want_values=True, extras=False, allow_nan=False
        )
        assert raw.values is not None
        return np.sqrt(raw.values)

    def classify(
        self,
        x: ArrayLike,
        covariates: Mapping[str, ArrayLike],
        priors: ArrayLike | None = None,
        *,
        max_mahalanobis: float | None = None,
        normalised_entropy: bool = False,
    ) -> Classification:
        """Classify rows; NaN in x or a covariate marks a no-data row.

        Parameters
        ----------
        x : array_like of shape (n_points, n_features)
        covariates : mapping covariate name -> array_like of shape (n_points,)
        priors : array_like of shape (n_facies,) or (n_points, n_facies), optional
        max_mahalanobis : float, optional
            Flag rows farther than this (standard deviations) from every facies.
        normalised_entropy : bool
            Entropy divided by log(n_facies).

        Returns
        -------
        Classification
            ``n_clamped`` counts the rows clamped to the node range.
        """
        limit = _check_max_mahalanobis(max_mahalanobis)
        raw = self._raw(
            x, covariates, priors, _POSTERIOR, want_values=True, extras=True, allow_nan=True
        )
        return _classification(raw, len(self.classes_), limit, normalised_entropy)


def _grid_samples(
    samples: Any, grid_shape: tuple[int, ...], classes: Sequence[Any] | None
) -> tuple[list[Any], Callable[[tuple[int, ...], int], FloatArray]]:
    """Facies names and an accessor (node index, facies index) -> (n_i, d) sample."""
    n_axes = len(grid_shape)

    def per_facies(name: str, value: Any) -> Callable[[tuple[int, ...]], FloatArray]:
        arr = np.asarray(value)
        if arr.dtype == object:
            if arr.shape != grid_shape:
                raise ValueError(
                    f"{name} must be an object array of shape grid_shape = {grid_shape}; "
                    f"got shape {arr.shape}"
                )
            return lambda index: _sample_array(f"{name}[{index}]", arr[index])
        arr = as_finite(name, arr)
        if arr.ndim != n_axes + 2 or arr.shape[:n_axes] != grid_shape:
            raise ValueError(
                f"{name} must have shape (*grid_shape, n_samples, n_features) with grid_shape "
                f"= {grid_shape}; got shape {arr.shape}"
            )
        return lambda index: arr[index]

    if isinstance(samples, Mapping):
        if classes is not None:
            raise ValueError("classes is only for array samples; a mapping names its facies")
        names = list(samples.keys())
        getters = [per_facies(f"samples[{n!r}]", samples[n]) for n in names]
        return names, lambda index, j: getters[j](index)
    arr = np.asarray(samples)
    if arr.dtype == object:
        if arr.ndim != n_axes + 1 or arr.shape[:n_axes] != grid_shape:
            raise ValueError(
                f"samples must be an object array of shape (*grid_shape, n_facies) with "
                f"grid_shape = {grid_shape}; got shape {arr.shape}"
            )
        k = arr.shape[-1]
        get = lambda index, j: _sample_array(f"samples[{index + (j,)}]", arr[index + (j,)])  # noqa: E731
    else:
        arr = as_finite("samples", arr)
        if arr.ndim != n_axes + 3 or arr.shape[:n_axes] != grid_shape:
            raise ValueError(
                f"samples must have shape (*grid_shape, n_facies, n_samples, n_features) with "
                f"grid_shape = {grid_shape}; got shape {arr.shape}"
            )
        k = arr.shape[n_axes]
        get = lambda index, j: arr[index + (j,)]  # noqa: E731
    names = list(range(k)) if classes is None else list(classes)
    if len(names) != k:
        raise ValueError(f"classes must name {k} facies; got {len(names)}")
    return names, get
