"""Risk summary of prospect outlines from facies-probability maps.

The classifier gives, on a 2-D map grid, the posterior probability of every
facies (array of shape (ny, nx, k), NaN where there is no data). This module
turns it into the numbers an exploration manager reads per prospect outline:

* the probability that the outline holds hydrocarbon facies at all,
* the expected hydrocarbon area (exact: sum of P(hc) times cell area),
* the P90 / P50 / P10 hydrocarbon area, from p-field simulation
  (Srivastava 1992; Froidevaux 1993): spatially correlated uniform fields U
  are drawn from a stationary Gaussian random field and a cell counts as
  hydrocarbon where ``U < P(hc)``, so every cell honours its own probability
  while neighbouring cells win or lose together,
* the same across scenarios side by side (:func:`scenario_table`).

The Gaussian field comes from circulant embedding with FFT (Dietrich & Newsam
1997) on the bounding box of the outline. A correlation length long compared
with the outline can make the embedding inexact; then a small outline (up to
:data:`DENSE_LIMIT_CELLS` cells) is simulated exactly from the eigenvectors of
its full covariance matrix, and a larger one by the approximate embedding of
Chan & Wood (1997), whose correlation error is measured and returned as
``covariance_error`` (refused above :data:`MAX_COVARIANCE_ERROR`).

Quantile convention (petroleum-industry exceedance convention, common
practice): **P90 is the low case** -- 90 % probability that the hydrocarbon
area is at least that large, i.e. the 10th percentile of the simulated areas;
**P10 is the high case** (90th percentile); P50 is the median. Hence
P90 <= P50 <= P10. The string :data:`QUANTILE_CONVENTION` travels with every
result.

Map geometry: nodes are cell centres; node (row i, column j) lies at
``(x0, y0) + j * dx * e_col + i * dy * e_row`` where ``e_col = (cos r, sin r)``
and ``e_row = (-sin r, cos r)`` for a grid rotation ``r`` counter-clockwise
from the map x axis (east). Distances in m, areas in m2 (km2 only in
:func:`scenario_table`, named so in the keys).

References
----------
Srivastava, R. M. (1992). Reservoir characterization with probability field
simulation. SPE 24753, SPE Annual Technical Conference, Washington DC.
Froidevaux, R. (1993). Probability field simulation. In Soares, A. (ed.),
Geostatistics Troia '92, Kluwer, 73-84.
Dietrich, C. R. & Newsam, G. N. (1997). Fast and exact simulation of stationary
Gaussian processes through circulant embedding of the covariance matrix. SIAM
J. Sci. Comput. 18(4), 1088-1107.
Chan, G. & Wood, A. T. A. (1997). Algorithm AS 312: An algorithm for simulating
stationary Gaussian random fields. Applied Statistics 46(1), 171-181.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Any, NamedTuple

import numpy as np
import scipy.fft
from numpy.typing import ArrayLike, NDArray
from scipy import special

from ._checks import FloatArray, as_finite, in_range

#: How P10/P50/P90 are to be read; repeated in every result.
QUANTILE_CONVENTION = (
    "P90 = low case (90 % probability of at least that area, 10th percentile); "
    "P50 = median; P10 = high case (10 % probability of at least that area, 90th percentile)"
)
#: Covariance models of the p-field, as functions of lag h / correlation length L.
COVARIANCE_MODELS = ("exponential", "gaussian")
#: Largest tolerated |sum of a facies posterior - 1| in a cell. Covers float32 storage
#: of the classifier output (about 1e-7 relative per value, k values per cell).
POSTERIOR_SUM_TOLERANCE = 1e-5
#: Fewest realisations accepted for P10/P50/P90 (fewer give quantiles too noisy to report).
MIN_REALISATIONS = 100
#: Largest circulant embedding tried, in cells (complex128: 64 MB per field pair).
MAX_EMBEDDING_CELLS = 2**22
#: Padding factors tried for the circulant embedding (1 = minimal embedding).
EMBEDDING_PADDING_FACTORS = (1, 2, 4)
#: Largest accepted error of the simulated covariance (fraction of the sill) when the
#: embedding needs the approximate route of Chan & Wood (1997); beyond it the field
#: would misrepresent the requested correlation and the run is refused.
MAX_COVARIANCE_ERROR = 0.1
#: Correlation error of an approximate embedding that is accepted without further work:
#: it is ten times below the sampling error 1/sqrt(n) of any correlation estimated
#: from n <= 10 000 realisations.
NEGLIGIBLE_COVARIANCE_ERROR = 1e-3
#: Largest field, in cells, simulated by the exact dense route when the circulant
#: embedding is not exact enough (an eigendecomposition of a matrix of that order).
DENSE_LIMIT_CELLS = 2500
#: Values drawn per random batch (bounds memory, independent of the result).
_BATCH_VALUES = 2**21


class ProspectRisk(NamedTuple):
    """Risk summary of one prospect outline (areas in m2).

    ``p90_area_m2`` is the low case and ``p10_area_m2`` the high case
    (see :data:`QUANTILE_CONVENTION`).
    """

    probability_hc: float
    expected_area_m2: float
    p10_area_m2: float
    p50_area_m2: float
    p90_area_m2: float
    n_cells: int
    n_nodata: int
    realised_areas: FloatArray
    convention: str = QUANTILE_CONVENTION
    covariance_error: float = 0.0


class GaussianFields(NamedTuple):
    """Realisations of a stationary standard Gaussian random field."""

    fields: FloatArray
    covariance_error: float
    method: str


class ScenarioTable(NamedTuple):
    """Risk numbers of several scenarios x prospects, as plain data.

    ``rows`` holds one dict per (scenario, prospect) with keys ``scenario``,
    ``prospect``, ``probability_hc``, ``expected_area_km2``, ``p90_area_km2``,
    ``p50_area_km2``, ``p10_area_km2``, ``n_cells``, ``n_nodata``; ``scenarios`` and
    ``prospects`` keep the order of first appearance.
    """

    rows: list[dict[str, Any]]
    scenarios: list[str]
    prospects: list[str]
    convention: str

    def pivot(self, key: str) -> list[list[float | None]]:
        """One quantity laid out prospects (rows) x scenarios (columns); None where missing."""
        if key not in _TABLE_VALUE_KEYS:
            raise ValueError(f"key must be one of {', '.join(_TABLE_VALUE_KEYS)} (got {key!r})")
        lookup = {(r["scenario"], r["prospect"]): r[key] for r in self.rows}
        return [[lookup.get((s, p)) for s in self.scenarios] for p in self.prospects]


_TABLE_VALUE_KEYS = (
    "probability_hc",
    "expected_area_km2",
    "p90_area_km2",
    "p50_area_km2",
    "p10_area_km2",
    "n_cells",
    "n_nodata",
)

# ---------------------------------------------------------------------------
# Geometry
# ---------------------------------------------------------------------------


def cell_centres(
    shape: tuple[int, int],
    x0: float,
    y0: float,
    dx: float,
    dy: float,
    rotation_deg: float = 0.0,
) -> tuple[FloatArray, FloatArray]:
    """Map coordinates of the nodes (cell centres) of a regular, possibly rotated grid.

    Parameters
    ----------
    shape : (int, int)
        Grid shape (ny, nx): rows along the grid y axis, columns along the grid x axis.
    x0, y0 : float
        Map coordinates of node (0, 0), m.
    dx, dy : float
        Node spacing along the grid x (column) and y (row) axes, m; non-zero, a
        negative value runs that axis the other way.
    rotation_deg : float
        Angle of the grid x axis counter-clockwise from the map x axis, degrees,
        within [-360, 360].

    Returns
    -------
    X, Y : ndarray of shape (ny, nx)
        Map coordinates of every node, m.
    """
    ny, nx = _grid_shape(shape)
    x0, y0 = float(as_finite("x0", x0)), float(as_finite("y0", y0))
    for name, step in (("dx", dx), ("dy", dy)):
        if float(as_finite(name, step)) == 0.0:
            raise ValueError(f"{name} must be a non-zero spacing in m (got 0)")
    theta = np.radians(float(in_range("rotation_deg", rotation_deg, -360.0, 360.0, unit="deg")))
    u = np.arange(nx, dtype=np.float64)[None, :] * float(dx)
    v = np.arange(ny, dtype=np.float64)[:, None] * float(dy)
    c, s = np.cos(theta), np.sin(theta)
    return x0 + u * c - v * s, y0 + u * s + v * c


def _grid_shape(shape: Sequence[int]) -> tuple[int, int]:
    if len(shape) != 2 or any(int(n) != n or n < 1 for n in shape):
        raise ValueError(f"shape must be two positive integers (ny, nx) (got {tuple(shape)})")
    return int(shape[0]), int(shape[1])


def polygon_vertices(polygon_xy: ArrayLike) -> FloatArray:
    """Validated vertices of a simple polygon (a prospect outline).

    A closing vertex equal to the first is dropped. Refused with ``ValueError``:
    fewer than 3 distinct vertices, non-finite coordinates, repeated consecutive
    vertices, and self-intersection (any two edges that cross, touch or overlap
    other than neighbours at their shared vertex; a collinear, zero-area outline
    folds back on itself and is refused as such).

    Parameters
    ----------
    polygon_xy : array_like of shape (n, 2)
        Vertices [x, y] in map coordinates, m, in either winding order.

    Returns
    -------
    ndarray of shape (n, 2)
    """
    poly = as_finite("polygon_xy", polygon_xy)
    if poly.ndim != 2 or poly.shape[1] != 2:
        raise ValueError(f"polygon_xy must be a list of [x, y] vertices (got shape {poly.shape})")
    if len(poly) > 1 and np.array_equal(poly[0], poly[-1]):
        poly = poly[:-1]
    if len(poly) < 3:
        raise ValueError(f"polygon_xy must have at least 3 distinct vertices (got {len(poly)})")
    nxt = np.roll(poly, -1, axis=0)
    same = np.all(poly == nxt, axis=1)
    if np.any(same):
        i = int(np.argmax(same))
        raise ValueError(f"polygon_xy repeats vertex {i} at vertex {(i + 1) % len(poly)}")
    crossing = _first_crossing(poly)
    if crossing is not None:
        i, j = crossing
        n = len(poly)
        raise ValueError(
            f"polygon_xy is self-intersecting: edge {i} (vertices {i}-{(i + 1) % n}) "
            f"meets edge {j} (vertices {j}-{(j + 1) % n})"
        )
    return poly


def shoelace_area(polygon_xy: ArrayLike) -> float:
    """Area enclosed by a simple polygon, m2 (shoelace / Gauss area formula).

    Parameters
    ----------
    polygon_xy : array_like of shape (n, 2)
        Vertices [x, y], m, either winding order (closing vertex optional).
    """
    poly = as_finite("polygon_xy", polygon_xy)
    x, y = poly[:, 0] - poly[0, 0], poly[:, 1] - poly[0, 1]  # shift for rounding
    return float(0.5 * abs(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y)))


def _orientation(ax, ay, bx, by, cx, cy):
    """Twice the signed area of triangle abc (> 0 counter-clockwise)."""
    return (bx - ax) * (cy - ay) - (by - ay) * (cx - ax)


def _first_crossing(poly: FloatArray) -> tuple[int, int] | None:
    """First pair (i, j), i < j, of edges that meet, other than neighbours at their joint."""
    n = len(poly)
    block = max(1, 2**18 // n)  # rows of the (block, n) pair arrays: bounded memory
    p = poly - poly.min(axis=0)  # local origin keeps the orientation products well scaled
    a, b = p, np.roll(p, -1, axis=0)
    idx = np.arange(n)
    for start in range(0, n, block):
        i = idx[start : start + block, None]
        j = idx[None, :]
        a1x, a1y, b1x, b1y = a[i, 0], a[i, 1], b[i, 0], b[i, 1]
        a2x, a2y, b2x, b2y = a[j, 0], a[j, 1], b[j, 0], b[j, 1]
        d1 = _orientation(a2x, a2y, b2x, b2y, a1x, a1y)
        d2 = _orientation(a2x, a2y, b2x, b2y, b1x, b1y)
        d3 = _orientation(a1x, a1y, b1x, b1y, a2x, a2y)
        d4 = _orientation(a1x, a1y, b1x, b1y, b2x, b2y)
        collinear = (d1 == 0) & (d2 == 0) & (d3 == 0) & (d4 == 0)
        overlap = (
            (np.minimum(a1x, b1x) <= np.maximum(a2x, b2x))
            & (np.minimum(a2x, b2x) <= np.maximum(a1x, b1x))
            & (np.minimum(a1y, b1y) <= np.maximum(a2y, b2y))
            & (np.minimum(a2y, b2y) <= np.maximum(a1y, b1y))
        )
        meet = np.where(collinear, overlap, (d1 * d2 <= 0) & (d3 * d4 <= 0))
        neighbour = (j == i + 1) | ((i == 0) & (j == n - 1))
        # neighbours share one vertex by construction; they are at fault only when they
        # fold back onto each other (collinear with opposite directions: a spike)
        ux, uy = b1x - a1x, b1y - a1y
        vx, vy = b2x - a2x, b2y - a2y
        folded = collinear & ((ux * vx + uy * vy) < 0)
        bad = (j > i) & np.where(neighbour, folded, meet)
        if np.any(bad):
            r, c = np.unravel_index(int(np.argmax(bad)), bad.shape)
            return int(i[r, 0]), int(c)
    return None


def polygon_mask(polygon_xy: ArrayLike, X: ArrayLike, Y: ArrayLike) -> NDArray[np.bool_]:
    """Cells whose centre lies inside a prospect outline (even-odd ray casting).

    A horizontal ray from each point towards +x is tested against every edge; the
    point is inside when it crosses an odd number of edges (Shimrat 1962, ACM
    Algorithm 112; the half-open rule ``y_a <= y < y_b`` counts a vertex once). Each
    edge is tested only against the points inside its y band (points sorted by y),
    so the work is about (number of points) x (edges crossed per scan line).
    Points exactly on the outline follow the half-open rule (inside on one side).

    Parameters
    ----------
    polygon_xy : array_like of shape (n, 2)
        Outline vertices [x, y], m; validated by :func:`polygon_vertices`.
    X, Y : array_like of the same shape
        Cell-centre coordinates, m (e.g. from :func:`cell_centres`).

    Returns
    -------
    ndarray of bool, shape of X
    """
    poly = polygon_vertices(polygon_xy)
    x = as_finite("X", X)
    y = as_finite("Y", Y)
    if x.shape != y.shape:
        raise ValueError(f"X and Y must have the same shape (got {x.shape} and {y.shape})")
    origin = poly.min(axis=0)
    poly = poly - origin
    px, py = np.ravel(x) - origin[0], np.ravel(y) - origin[1]
    order = np.argsort(py, kind="stable")
    ys = py[order]
    inside = np.zeros(px.size, dtype=bool)
    a, b = poly, np.roll(poly, -1, axis=0)
    for (xa, ya), (xb, yb) in zip(a, b, strict=True):
        if ya == yb:
            continue  # horizontal edges never cross a horizontal ray (half-open rule)
        lo, hi = np.searchsorted(ys, min(ya, yb), "left"), np.searchsorted(ys, max(ya, yb), "left")
        if lo == hi:
            continue
        pts = order[lo:hi]
        x_cross = xa + (py[pts] - ya) * ((xb - xa) / (yb - ya))
        inside[pts[px[pts] < x_cross]] ^= True
    return inside.reshape(x.shape)


# ---------------------------------------------------------------------------
# Probabilities
# ---------------------------------------------------------------------------


def hydrocarbon_probability(posterior: ArrayLike, hc_index: Sequence[bool]) -> FloatArray:
    """Probability of hydrocarbon facies per cell: sum of the hydrocarbon posteriors.

    Parameters
    ----------
    posterior : array_like of shape (..., k)
        Facies posterior probabilities (fractions) per cell; a cell with all k
        values NaN has no data. Each cell with data must sum to 1 (within
        :data:`POSTERIOR_SUM_TOLERANCE`) with values in [0, 1].
    hc_index : sequence of bool, length k
        True for the facies that hold hydrocarbon (oil or gas sands).

    Returns
    -------
    ndarray of shape (...)
        P(hc), fraction; NaN where the posterior has no data.
    """
    post = np.asarray(posterior, dtype=np.float64)
    if post.ndim < 1 or post.shape[-1] < 1:
        raise ValueError("posterior must have a last axis of k >= 1 facies")
    hc = np.asarray(hc_index)
    if hc.dtype != np.bool_ or hc.shape != (post.shape[-1],):
        raise ValueError(
            f"hc_index must be {post.shape[-1]} booleans, one per facies (got {hc_index!r})"
        )
    nan = np.isnan(post)
    nodata = np.all(nan, axis=-1)
    if np.any(nan & ~nodata[..., None]):
        cell = tuple(int(c) for c in np.argwhere(np.any(nan, axis=-1) & ~nodata)[0])
        raise ValueError(f"posterior must be NaN in all facies or none (cell {cell} is mixed)")
    data = post[~nodata]
    if data.size:
        in_range("posterior", data, 0.0, 1.0)
        total = data.sum(axis=-1)
        worst = float(np.max(np.abs(total - 1.0)))
        if worst > POSTERIOR_SUM_TOLERANCE:
            raise ValueError(
                "posterior must sum to 1 over the facies in every cell with data "
                f"(worst deviation {worst:g}, tolerance {POSTERIOR_SUM_TOLERANCE:g})"
            )
    p = np.sum(np.where(hc, post, 0.0), axis=-1)
    p[nodata] = np.nan
    return p


# ---------------------------------------------------------------------------
# Gaussian random fields by circulant embedding
# ---------------------------------------------------------------------------


def covariance_function(h: ArrayLike, correlation_length_m: float, model: str) -> FloatArray:
    """Correlation of a stationary field at lag ``h``, m.

    ``exponential``: ``exp(-h / L)``; ``gaussian``: ``exp(-(h / L)^2)``, with ``L``
    the correlation length in m (the lag at which the correlation is 1/e; the
    "practical range" at 5 % correlation is about 3 L and 1.73 L respectively).
    """
    if model not in COVARIANCE_MODELS:
        raise ValueError(
            f"covariance must be one of {', '.join(COVARIANCE_MODELS)} (got {model!r})"
        )
    r = np.asarray(h, dtype=np.float64) / correlation_length_m
    return np.exp(-r) if model == "exponential" else np.exp(-(r**2))


class _Sampler(NamedTuple):
    method: str  # "circulant" or "dense"
    factor: FloatArray  # circulant: sqrt(lambda / M) on the torus; dense: A with A A^T = C
    shape: tuple[int, int]  # field shape (ny, nx)
    covariance_error: float  # max |simulated - target| correlation over the field lags


def _circulant(
    shape: tuple[int, int], spacing: tuple[float, float], length: float, model: str
) -> _Sampler:
    """Circulant embedding of the covariance (Dietrich & Newsam 1997), exact when possible.

    The minimal torus (2(n-1) nodes per axis, rounded up to a fast FFT length) is
    tried first, then the larger paddings of :data:`EMBEDDING_PADDING_FACTORS`.
    When a torus has negative eigenvalues (a correlation length long compared with
    the outline), they are set to zero and the rest rescaled so that the point
    variance stays exactly 1 (Chan & Wood 1997, approximate option); the largest
    resulting correlation error over the field lags is measured and the torus with
    the smallest error is kept.
    """
    ny, nx = shape
    dx, dy = abs(spacing[0]), abs(spacing[1])
    best: _Sampler | None = None
    for factor in EMBEDDING_PADDING_FACTORS:
        m1 = scipy.fft.next_fast_len(max(1, factor * 2 * (ny - 1)))
        m2 = scipy.fft.next_fast_len(max(1, factor * 2 * (nx - 1)))
        if best is not None and m1 * m2 > MAX_EMBEDDING_CELLS:
            break
        k1 = np.minimum(np.arange(m1), m1 - np.arange(m1))
        k2 = np.minimum(np.arange(m2), m2 - np.arange(m2))
        c = covariance_function(np.hypot(k1[:, None] * dy, k2[None, :] * dx), length, model)
        eig = scipy.fft.fft2(c).real
        error = 0.0
        if np.any(eig < 0):
            kept = np.clip(eig, 0.0, None)
            kept *= eig.sum() / kept.sum()  # mean eigenvalue = c(0) = 1 stays exact
            error = float(np.max(np.abs(scipy.fft.ifft2(kept).real - c)[:ny, :nx]))
            eig = kept
        candidate = _Sampler("circulant", np.sqrt(eig / (m1 * m2)), (ny, nx), error)
        if best is None or error < best.covariance_error:
            best = candidate
        if error <= NEGLIGIBLE_COVARIANCE_ERROR:
            break
    assert best is not None
    return best


def _dense(
    shape: tuple[int, int], spacing: tuple[float, float], length: float, model: str
) -> _Sampler:
    """Exact factor of the full covariance matrix by symmetric eigendecomposition.

    Eigenvalues below zero can only be rounding (both covariance models are
    positive definite by Bochner's theorem) and are set to zero; the achieved
    covariance is measured against the target.
    """
    ny, nx = shape
    iy, ix = np.divmod(np.arange(ny * nx), nx)
    h = np.hypot(
        (iy[:, None] - iy[None, :]) * abs(spacing[1]), (ix[:, None] - ix[None, :]) * abs(spacing[0])
    )
    c = covariance_function(h, length, model)
    eig, vec = np.linalg.eigh(c)
    a = vec * np.sqrt(np.clip(eig, 0.0, None))
    error = float(np.max(np.abs(a @ a.T - c)))
    return _Sampler("dense", a, (ny, nx), error)


def _sampler(
    shape: tuple[int, int],
    spacing: tuple[float, float],
    length: float,
    model: str,
    method: str = "auto",
) -> _Sampler:
    """Pick the field sampler: circulant embedding, dense when that is not exact enough."""
    if method not in ("auto", "circulant", "dense"):
        raise ValueError(f"method must be 'auto', 'circulant' or 'dense' (got {method!r})")
    ny, nx = shape
    if method == "dense" and ny * nx > DENSE_LIMIT_CELLS:
        raise ValueError(f"method 'dense' handles at most {DENSE_LIMIT_CELLS} cells")
    sampler = _dense(shape, spacing, length, model) if method == "dense" else None
    if sampler is None:
        sampler = _circulant(shape, spacing, length, model)
        too_coarse = sampler.covariance_error > NEGLIGIBLE_COVARIANCE_ERROR
        if method == "auto" and too_coarse and ny * nx <= DENSE_LIMIT_CELLS:
            sampler = _dense(shape, spacing, length, model)
    if sampler.covariance_error > MAX_COVARIANCE_ERROR:
        raise ValueError(
            f"correlation_length_m = {length:g} m is too long for a {ny} x {nx} cell outline: "
            f"the simulated correlation would be off by {sampler.covariance_error:.3f} "
            f"(limit {MAX_COVARIANCE_ERROR:g}); use a shorter correlation length"
        )
    return sampler


def _field_batches(sampler: _Sampler, n_fields: int, rng: np.random.Generator):
    """Yield arrays of shape (b, ny, nx) of standard Gaussian fields, n_fields in total.

    Circulant route: one complex FFT gives two independent fields, its real and
    imaginary parts, each with the embedded covariance (Dietrich & Newsam 1997,
    section 2). Dense route: ``A @ xi`` with ``A A^T = C``.
    """
    ny, nx = sampler.shape
    done = 0
    if sampler.method == "dense":
        batch = max(1, _BATCH_VALUES // (ny * nx))
        while done < n_fields:
            take = min(batch, n_fields - done)
            xi = rng.standard_normal((take, ny * nx))
            yield (xi @ sampler.factor.T).reshape(take, ny, nx)
            done += take
        return
    root = sampler.factor
    pairs_per_batch = max(1, _BATCH_VALUES // (2 * root.size))
    while done < n_fields:
        pairs = min(pairs_per_batch, (n_fields - done + 1) // 2)
        # (real, imaginary) standard normal pairs viewed as complex numbers, no copy
        spec = rng.standard_normal((pairs, *root.shape, 2)).view(np.complex128)[..., 0]
        spec *= root
        z = scipy.fft.fft2(spec, axes=(-2, -1), overwrite_x=True)[:, :ny, :nx]
        for part in (z.real, z.imag):
            take = min(len(part), n_fields - done)
            if take:
                yield part[:take]
                done += take


def gaussian_random_field(
    shape: tuple[int, int],
    spacing: tuple[float, float],
    correlation_length_m: float,
    n_fields: int,
    rng: np.random.Generator,
    *,
    covariance: str = "exponential",
    method: str = "auto",
) -> GaussianFields:
    """Stationary standard Gaussian random fields on a regular grid.

    Circulant embedding with FFT (Dietrich & Newsam 1997) is the main route. When
    the correlation length is long compared with the grid, the embedding may only
    be approximate (Chan & Wood 1997); if its correlation error exceeds
    :data:`NEGLIGIBLE_COVARIANCE_ERROR` and the grid has at most
    :data:`DENSE_LIMIT_CELLS` cells, the exact eigendecomposition of the full
    covariance matrix is used instead (``method="auto"``).

    Parameters
    ----------
    shape : (int, int)
        Field shape (ny, nx).
    spacing : (float, float)
        Node spacing (dx, dy), m (sign ignored).
    correlation_length_m : float
        Correlation length L, m (> 0); see :func:`covariance_function`.
    n_fields : int
        Number of realisations (>= 1).
    rng : numpy.random.Generator
    covariance : {"exponential", "gaussian"}
    method : {"auto", "circulant", "dense"}
        Force one route ("dense" only up to :data:`DENSE_LIMIT_CELLS` cells).

    Returns
    -------
    GaussianFields
        ``fields`` of shape (n_fields, ny, nx), zero mean and unit variance;
        ``covariance_error``, the largest |achieved - target| correlation over all
        lags of the grid (0 for an exact circulant embedding); ``method`` used.

    Raises
    ------
    ValueError
        For bad arguments, or when the achievable correlation error exceeds
        :data:`MAX_COVARIANCE_ERROR`.
    """
    ny, nx = _grid_shape(shape)
    sp = _spacing(spacing)
    length = float(in_range("correlation_length_m", correlation_length_m, 0.0, low_open=True))
    covariance_function(0.0, 1.0, covariance)
    if int(n_fields) != n_fields or n_fields < 1:
        raise ValueError(f"n_fields must be a positive integer (got {n_fields})")
    sampler = _sampler((ny, nx), sp, length, covariance, method)
    fields = np.concatenate(list(_field_batches(sampler, int(n_fields), rng)), axis=0)
    return GaussianFields(fields, sampler.covariance_error, sampler.method)


def _spacing(spacing: Sequence[float] | None) -> tuple[float, float]:
    if spacing is None or len(spacing) != 2:
        raise ValueError(f"spacing must be (dx, dy) in m (got {spacing!r})")
    dx, dy = (float(as_finite("spacing", s)) for s in spacing)
    if dx == 0.0 or dy == 0.0:
        raise ValueError(f"spacing must be non-zero (dx, dy) in m (got {spacing!r})")
    return dx, dy


# ---------------------------------------------------------------------------
# Prospect risk
# ---------------------------------------------------------------------------


def prospect_risk(
    posterior: ArrayLike,
    hc_index: Sequence[bool],
    mask: ArrayLike,
    cell_area_m2: float,
    *,
    seed: int,
    n_realisations: int = 2000,
    correlation_length_m: float | None = None,
    spacing: tuple[float, float] | None = None,
    covariance: str = "exponential",
    min_area_m2: float = 0.0,
) -> ProspectRisk:
    """Probability of hydrocarbon and hydrocarbon-area quantiles inside one outline.

    The expected area is exact, ``sum(P(hc) * cell_area)`` over the cells with data.
    The area distribution comes from p-field simulation (Srivastava 1992;
    Froidevaux 1993): per realisation, a cell is hydrocarbon where ``U < P(hc)``
    with ``U = Phi(Z)`` and Z a stationary standard Gaussian random field
    (exponential or Gaussian covariance of the given correlation length) drawn
    by circulant embedding on the bounding box of the outline. Without a
    correlation length the cells are independent and the hydrocarbon cell count
    is Poisson-binomial.

    Quantile convention (petroleum-industry, common practice): **P90 = low case**
    (90 % probability of at least that area: 10th percentile of the realised
    areas), **P10 = high case** (90th percentile); P90 <= P50 <= P10.

    Parameters
    ----------
    posterior : array_like of shape (ny, nx, k)
        Facies posterior (fractions), all-NaN in cells without data.
    hc_index : sequence of bool, length k
        True for hydrocarbon facies.
    mask : array_like of bool, shape (ny, nx)
        Cells inside the outline (e.g. :func:`polygon_mask`).
    cell_area_m2 : float
        Area of one cell, m2 (> 0).
    seed : int
        Seed of the ``numpy.random.default_rng`` stream (>= 0).
    n_realisations : int
        Number of p-field realisations (>= :data:`MIN_REALISATIONS`).
    correlation_length_m : float or None
        Correlation length of the p-field, m; None or 0 for independent cells.
    spacing : (float, float) or None
        Grid spacing (dx, dy), m; required with a correlation length, and must
        agree with ``cell_area_m2``.
    covariance : {"exponential", "gaussian"}
        Covariance model of the p-field (see :func:`covariance_function`).
    min_area_m2 : float
        Hydrocarbon area, m2 (>= 0), that a realisation must exceed to count as a
        success in ``probability_hc``.

    Returns
    -------
    ProspectRisk
        ``probability_hc`` (fraction of realisations with hydrocarbon area above
        ``min_area_m2``), ``expected_area_m2``, ``p10_area_m2`` (high),
        ``p50_area_m2``, ``p90_area_m2`` (low), ``n_cells`` (cells in the outline),
        ``n_nodata`` (of which without data, excluded), ``realised_areas`` (m2,
        shape (n_realisations,)), ``convention`` and ``covariance_error`` (largest
        |achieved - requested| correlation of the p-field; 0 when exact).

    Raises
    ------
    ValueError
        For invalid arguments, an outline holding no cell centre or only cells
        without data, or a correlation length the simulation cannot honour
        within :data:`MAX_COVARIANCE_ERROR`.
    """
    p_all = hydrocarbon_probability(posterior, hc_index)
    if p_all.ndim != 2:
        raise ValueError(f"posterior must have shape (ny, nx, k) (got {np.shape(posterior)})")
    inside = np.asarray(mask)
    if inside.dtype != np.bool_ or inside.shape != p_all.shape:
        raise ValueError(f"mask must be a boolean array of shape {p_all.shape}")
    area = float(in_range("cell_area_m2", cell_area_m2, 0.0, low_open=True, unit="m2"))
    min_area = float(in_range("min_area_m2", min_area_m2, 0.0, unit="m2"))
    if isinstance(seed, bool) or int(seed) != seed or seed < 0:
        raise ValueError(f"seed must be a non-negative integer (got {seed!r})")
    if int(n_realisations) != n_realisations or n_realisations < MIN_REALISATIONS:
        raise ValueError(
            f"n_realisations must be an integer of at least {MIN_REALISATIONS} "
            f"(got {n_realisations})"
        )
    n_real = int(n_realisations)
    length = 0.0
    if correlation_length_m is not None:
        length = float(in_range("correlation_length_m", correlation_length_m, 0.0, unit="m"))
    covariance_function(0.0, 1.0, covariance)
    sp = None
    if spacing is not None:
        sp = _spacing(spacing)
        # relative tolerance at float64 rounding of a product of two spacings
        if not np.isclose(abs(sp[0] * sp[1]), area, rtol=1e-12, atol=0.0):
            raise ValueError(
                f"cell_area_m2 = {area:g} m2 disagrees with spacing |dx * dy| = "
                f"{abs(sp[0] * sp[1]):g} m2"
            )

    n_cells = int(inside.sum())
    if n_cells == 0:
        raise ValueError("mask selects no cell: the outline holds no cell centre")
    valid = inside & np.isfinite(p_all)
    n_nodata = n_cells - int(valid.sum())
    if n_nodata == n_cells:
        raise ValueError("no cell inside the outline has data (posterior is NaN everywhere)")
    rng = np.random.default_rng(int(seed))
    expected = float(np.sum(p_all[valid]) * area)

    covariance_error = 0.0
    counts = np.empty(n_real, dtype=np.int64)
    if length == 0.0:
        p = p_all[valid]
        batch = max(1, _BATCH_VALUES // p.size)
        for start in range(0, n_real, batch):
            stop = min(n_real, start + batch)
            counts[start:stop] = np.count_nonzero(rng.random((stop - start, p.size)) < p, axis=1)
    else:
        if sp is None:
            raise ValueError("spacing (dx, dy) in m is required with a correlation length")
        rows = np.flatnonzero(valid.any(axis=1))
        cols = np.flatnonzero(valid.any(axis=0))
        box = (slice(rows[0], rows[-1] + 1), slice(cols[0], cols[-1] + 1))
        sub_valid = valid[box]
        # U < p  <=>  Z < Phi^-1(p); cells outside the outline or without data never count
        z_hc = special.ndtri(np.where(sub_valid, p_all[box], 0.0))
        threshold = np.where(sub_valid, z_hc, -np.inf)
        sampler = _sampler(sub_valid.shape, sp, length, covariance)
        covariance_error = sampler.covariance_error
        done = 0
        for fields in _field_batches(sampler, n_real, rng):
            counts[done : done + len(fields)] = np.count_nonzero(fields < threshold, axis=(1, 2))
            done += len(fields)

    areas = counts * area
    p90, p50, p10 = np.quantile(areas, [0.1, 0.5, 0.9])
    return ProspectRisk(
        probability_hc=float(np.mean(areas > min_area)),
        expected_area_m2=expected,
        p10_area_m2=float(p10),
        p50_area_m2=float(p50),
        p90_area_m2=float(p90),
        n_cells=n_cells,
        n_nodata=n_nodata,
        realised_areas=areas.astype(np.float64),
        convention=QUANTILE_CONVENTION,
        covariance_error=covariance_error,
    )


def _km2(area_m2: float) -> float:
    return float(area_m2) / 1e6


def scenario_table(
    rows: Iterable[tuple[str, str, ProspectRisk]],
) -> ScenarioTable:
    """Arrange the risk of several scenarios x prospects side by side, as plain data.

    Parameters
    ----------
    rows : iterable of (scenario_name, prospect_name, ProspectRisk)
        One entry per scenario and prospect; a pair may appear only once.

    Returns
    -------
    ScenarioTable
        Rows sorted by prospect then scenario (both in order of first appearance),
        areas in km2 (keys ending ``_km2``), probabilities as fractions; use
        :meth:`ScenarioTable.pivot` for a prospects x scenarios grid of one value.
    """
    entries: list[tuple[str, str, ProspectRisk]] = []
    scenarios: list[str] = []
    prospects: list[str] = []
    seen: set[tuple[str, str]] = set()
    for entry in rows:
        scenario, prospect, risk = entry
        if not isinstance(risk, ProspectRisk):
            raise ValueError(f"rows must hold ProspectRisk results (got {type(risk).__name__})")
        key = (str(scenario), str(prospect))
        if key in seen:
            raise ValueError(f"scenario {key[0]!r} x prospect {key[1]!r} appears twice in rows")
        seen.add(key)
        if key[0] not in scenarios:
            scenarios.append(key[0])
        if key[1] not in prospects:
            prospects.append(key[1])
        entries.append((key[0], key[1], risk))
    entries.sort(key=lambda e: (prospects.index(e[1]), scenarios.index(e[0])))
    table = [
        {
            "scenario": s,
            "prospect": p,
            "probability_hc": float(r.probability_hc),
            "expected_area_km2": _km2(r.expected_area_m2),
            "p90_area_km2": _km2(r.p90_area_m2),
            "p50_area_km2": _km2(r.p50_area_m2),
            "p10_area_km2": _km2(r.p10_area_m2),
            "n_cells": int(r.n_cells),
            "n_nodata": int(r.n_nodata),
        }
        for s, p, r in entries
    ]
    return ScenarioTable(table, scenarios, prospects, QUANTILE_CONVENTION)
