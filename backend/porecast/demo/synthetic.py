"""Synthetic demo data of the invented Quillon Basin, generated from a hidden truth.

Everything here is pure computation (numpy, scipy, the science package and the
io writers): no database, no web layer. :func:`generate` builds, from one seed,

* covariate maps of the top-reservoir horizon on a 100 x 120 node grid at 50 m
  in an invented local grid: present depth with three structural highs, net
  uplift rising strongly towards the east flank, present geothermal gradient
  rising to the east and north;
* the hidden *truth*: coherent sand bodies (thresholded, anisotropically
  smoothed random fields) with gas caps and oil legs in the closures of the
  highs;
* seismic intercept and gradient maps drawn from the truth through the forward
  model of the science package (:func:`porecast.physics.forward.simulate` at
  every node's covariates, one realisation of the true facies, with the
  scenario's seismic noise), and a small intercept/gradient cube around one high;
* two wells with thin beds (0.5-5 m), one on the low-uplift and one on the
  high-uplift flank, whose logs come from the same forward model;
* prospect outlines (the closing contour of each high) and the three scenario
  documents of the demo story.

The truth is the burial-aware scenario itself run with a seed of its own, so the
demo asks a fair question: with the right physics, does a scenario that follows
the burial history across the map beat one trained at a single well, and a
plausible but wrong (hotter) thermal hypothesis? :mod:`porecast.demo.scoring`
answers it.

Units as everywhere in Porecast: m, degC, degC/km, MPa, m/s, g/cm3, fractions.
"""

from __future__ import annotations

import copy
import json
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, NamedTuple

import numpy as np
import segyio
from scipy import ndimage

from ..io import Grid, GridData, SampleAxis, WellLogs, atomic_path, write_npz, write_well, write_xyz
from ..physics import forward
from ..physics.scenario import COVARIATES, Scenario, default_scenario, validate_scenario

FloatArray = np.ndarray

DEFAULT_SEED = 20261201
BASIN = "Quillon Basin"
#: Invented local projected system: metres east and north of an invented false origin.
CRS_NAME = "Quillon local grid (invented): metres east and north of a false origin"

#: Map grid: rows run north (y), columns east (x); node (0, 0) at the false origin offset.
NY, NX = 100, 120
SPACING_M = 50.0
X0_M, Y0_M = 20_000.0, 40_000.0

#: Cube window on the map grid, (first, last + 1) row and column, and its samples.
CUBE_ROWS = (8, 48)
CUBE_COLS = (38, 88)
CUBE_SAMPLES = 30
CUBE_DT_MS = 8.0
#: Average velocity of the overburden for the depth-to-time conversion of the cube, m/s.
CUBE_VAVG_M_PER_S = 2500.0
#: Depth of the second (lower) sand level of the cube below the top reservoir, m.
LOWER_LEVEL_BELOW_M = 60.0
#: Inline number of map row 0 and crossline number of map column 0.
INLINE0, CROSSLINE0 = 1000, 2000

#: Facies of every demo scenario (names and rocks of the bundled example scenario).
FACIES = ("shale", "brine sand", "oil sand", "gas sand")
SHALE, BRINE, OIL, GAS = range(4)
HYDROCARBON = (False, False, True, True)

#: Fraction of sand at the top reservoir (a sand-rich shallow-marine interval).
SAND_FRACTION = 0.6
#: Smoothing of the sand-body field along rows and columns, nodes (bodies elongated east-west).
SAND_SMOOTHING_NODES = (3.0, 8.0)

#: Seismic noise of the attribute maps and of every scenario: one standard
#: deviation per attribute (both dimensionless); their correlation is the example
#: scenario's.
NOISE_SD = {"intercept": 0.015, "gradient": 0.045}
#: Realisations per facies per node of the demo scenarios.
REALISATIONS = 1000
#: The hotter thermal hypothesis of the third scenario: +8 degC/km on the present map.
HOT_SHIFT_C_PER_KM = 8.0

#: Gamma ray of clean sand and of pure shale for the synthetic logs, API (common
#: practice for siliciclastics, from memory: clean sands 15-30, shales 100-150 API).
GR_CLEAN_API, GR_SHALE_API = 20.0, 130.0
#: Well-log sample interval, m (half a foot, the usual LAS step).
LOG_STEP_M = 0.1524
#: Thinnest and thickest bed of the synthetic wells, m.
BED_RANGE_M = (0.5, 5.0)
#: Irreducible water saturation and decay height of the illustrative
#: saturation-height curve Sw = Swi + (1 - Swi) exp(-h / h0), h above the free
#: water level (an invented smooth form, not a published correlation).
SWI, SW_DECAY_M = 0.15, 6.0


@dataclass(frozen=True)
class StructuralHigh:
    """A dome on the top-reservoir map and its hydrocarbon column.

    ``centre`` is (row, column) on the map grid; the dome is a raised-cosine bell
    of ``amplitude_m`` that vanishes at ``radius_nodes``, so neighbouring highs
    stay separate closures; ``gas_m`` and ``oil_m`` are the gas and oil column
    heights below the crest, m.
    """

    name: str
    centre: tuple[float, float]
    radius_nodes: float
    amplitude_m: float
    gas_m: float
    oil_m: float


HIGHS = (
    StructuralHigh("West high", (60.0, 22.0), 30.0, 220.0, 60.0, 75.0),
    StructuralHigh("Central high", (25.0, 60.0), 32.0, 240.0, 70.0, 90.0),
    StructuralHigh("East high", (64.0, 98.0), 32.0, 240.0, 170.0, 0.0),
)


@dataclass(frozen=True)
class WellPlan:
    """Where a demo well is drilled (map node row, column) and what it logs, m."""

    name: str
    node: tuple[int, int]
    above_m: float = 40.0
    below_m: float = 200.0
    net_to_gross: float = 0.6


#: QD-1 on the West high (low uplift), QD-2 on the East high (high uplift).
WELLS = (WellPlan("QD-1", (57, 25)), WellPlan("QD-2", (62, 95)))


class CovariateMaps(NamedTuple):
    """Top-reservoir covariate maps, each an array of shape (ny, nx)."""

    grid: Grid
    present_depth_m: FloatArray
    net_uplift_m: FloatArray
    gradient_c_per_km: FloatArray
    overpressure_mpa: FloatArray

    def node_values(self) -> FloatArray:
        """Covariates of every node, shape (ny * nx, 4), columns in COVARIATES order."""
        return np.stack([np.asarray(getattr(self, c)).ravel() for c in COVARIATES], axis=-1)

    def at(self, node: tuple[int, int]) -> dict[str, float]:
        """Covariate values at one map node (row, column)."""
        return {c: float(getattr(self, c)[node]) for c in COVARIATES}


class Truth(NamedTuple):
    """The hidden facies model of the demo (never uploaded to the project)."""

    facies: FloatArray
    """Facies code per map node (index into :data:`FACIES`), shape (ny, nx)."""
    sand: FloatArray
    """Sand mask of the top reservoir, shape (ny, nx)."""
    lower_sand: FloatArray
    """Sand mask of the lower level of the cube, shape (ny, nx)."""
    closures: FloatArray
    """Index of the structural high whose closure holds a node, -1 outside, (ny, nx)."""
    contacts: list[dict[str, float]]
    """Per high: crest, gas-oil contact and free water level depths, m."""
    cube_facies: FloatArray
    """Facies code per cube sample, shape (n_lines, n_traces, n_samples)."""


class Cube(NamedTuple):
    """Intercept and gradient cube on a window of the map grid."""

    grid: Grid
    intercept: FloatArray
    gradient: FloatArray
    horizon_sample: FloatArray
    """Sample index of the top reservoir in each trace, shape (n_lines, n_traces)."""


class DemoWell(NamedTuple):
    """A synthetic well: logs plus what was used to make them."""

    logs: WellLogs
    node: tuple[int, int]
    covariates: dict[str, float]
    """Covariates at the top reservoir in the well (for calibration)."""
    beds: list[dict[str, Any]]
    """Bed table (truth): top_m, base_m, facies, sw."""


class DemoData(NamedTuple):
    """Everything the demo generates from one seed."""

    seed: int
    maps: CovariateMaps
    truth: Truth
    attributes: dict[str, FloatArray]
    """Seismic attribute maps at the top reservoir, name -> (ny, nx)."""
    cube: Cube
    wells: list[DemoWell]
    prospects: list[dict[str, Any]]
    scenarios: dict[str, dict[str, Any]]
    """Scenario key -> validated scenario document (JSON form)."""


# --------------------------------------------------------------------------- helpers


def _rng(seed: int, purpose: int) -> np.random.Generator:
    """An independent, reproducible stream per purpose (SeedSequence entropy list)."""
    return np.random.default_rng([int(seed), int(purpose)])


def smooth_field(
    rng: np.random.Generator, shape: tuple[int, int], sigma: tuple[float, float]
) -> FloatArray:
    """A smooth random field scaled to [-1, 1]: white noise through a Gaussian filter.

    Parameters
    ----------
    rng : numpy.random.Generator
    shape : (int, int)
        Rows, columns.
    sigma : (float, float)
        Standard deviation of the Gaussian kernel along rows and columns, nodes.

    Returns
    -------
    ndarray of shape ``shape``
        Zero mean, largest absolute value exactly 1.
    """
    field = ndimage.gaussian_filter(rng.standard_normal(shape), sigma=sigma, mode="reflect")
    field -= field.mean()
    return field / np.max(np.abs(field))


def _smoothstep(t: FloatArray) -> FloatArray:
    """Cubic Hermite step 3t^2 - 2t^3 on [0, 1], zero slope at both ends."""
    t = np.clip(t, 0.0, 1.0)
    return t * t * (3.0 - 2.0 * t)


def _dome(rows: FloatArray, cols: FloatArray, high: StructuralHigh) -> FloatArray:
    """Raised-cosine bell, m: amplitude at the centre, 0 from ``radius_nodes`` on."""
    r = np.minimum(np.hypot(rows - high.centre[0], cols - high.centre[1]) / high.radius_nodes, 1.0)
    return 0.5 * high.amplitude_m * (1.0 + np.cos(np.pi * r))


def map_grid() -> Grid:
    """Geometry of the demo map (no rotation)."""
    return Grid("map", (NY, NX), x0=X0_M, y0=Y0_M, dx=SPACING_M, dy=SPACING_M)


def node_xy(node: tuple[float, float]) -> tuple[float, float]:
    """Map coordinates (x, y), m, of a (row, column) position on the map grid."""
    return X0_M + node[1] * SPACING_M, Y0_M + node[0] * SPACING_M


# --------------------------------------------------------------------------- maps


def covariate_maps(seed: int) -> CovariateMaps:
    """Present depth, net uplift and gradient maps of the top reservoir.

    Net uplift rises from about 150 m in the west to about 1600 m on the east
    flank (a smooth step plus gentle undulation), while the present depth stays
    near 2.25 km apart from the highs: rocks now at the same depth were buried
    up to 1.5 km deeper in the east, the case where a classifier trained at one
    well cannot hold everywhere. The gradient rises by about 6 degC/km to the
    east and north.
    """
    rows, cols = np.meshgrid(
        np.arange(NY, dtype=float), np.arange(NX, dtype=float), indexing="ij"
    )
    xf, yf = cols / (NX - 1), rows / (NY - 1)
    uplift = (150.0 + 1450.0 * _smoothstep((xf - 0.08) / 0.55)
              + 40.0 * smooth_field(_rng(seed, 1), (NY, NX), (14.0, 14.0)))
    depth = (2250.0 - 30.0 * (xf - 0.5) + 40.0 * (yf - 0.5)
             + 25.0 * smooth_field(_rng(seed, 2), (NY, NX), (10.0, 10.0)))
    for high in HIGHS:
        depth = depth - _dome(rows, cols, high)
    gradient = (30.0 + 5.0 * xf + 2.0 * yf
                + 1.0 * smooth_field(_rng(seed, 3), (NY, NX), (16.0, 16.0)))
    return CovariateMaps(map_grid(), depth, uplift, gradient, np.zeros((NY, NX)))


# --------------------------------------------------------------------------- truth


def closures(depth: FloatArray) -> tuple[FloatArray, list[dict[str, float]]]:
    """Closure of each structural high: the nodes connected to its crest above its contact.

    Parameters
    ----------
    depth : ndarray of shape (ny, nx)
        Present depth of the top reservoir, m.

    Returns
    -------
    owner : ndarray of int, shape (ny, nx)
        Index into :data:`HIGHS` of the closure holding each node, -1 outside.
    contacts : list of dict
        Per high: ``crest_m``, ``goc_m`` (gas-oil contact) and ``fwl_m`` (free
        water level: the oil-water contact, or the gas-water contact of a
        gas-only high), m.

    Raises
    ------
    ValueError
        When two closures merge (the demo design would then be ambiguous).
    """
    owner = np.full(depth.shape, -1)
    contacts = []
    for k, high in enumerate(HIGHS):
        r, c = (int(round(v)) for v in high.centre)
        r0, c0 = max(r - 4, 0), max(c - 4, 0)
        sub = depth[r0 : r + 5, c0 : c + 5]
        ir, ic = np.unravel_index(int(np.argmin(sub)), sub.shape)
        crest_node = (int(ir) + r0, int(ic) + c0)
        crest = float(depth[crest_node])
        fwl = crest + high.gas_m + high.oil_m
        labels, _ = ndimage.label(depth < fwl)
        inside = labels == labels[crest_node]
        if np.any(owner[inside] >= 0):
            other = HIGHS[int(owner[inside].max())].name
            raise ValueError(f"the closures of {other} and {high.name} merge; move the highs "
                             "apart or shorten the columns")
        owner[inside] = k
        contacts.append({"crest_m": crest, "goc_m": crest + high.gas_m, "fwl_m": fwl})
    return owner, contacts


def _fluid_facies(
    sand: FloatArray, depth: FloatArray, owner: FloatArray, contacts: list[dict[str, float]]
) -> FloatArray:
    """Facies codes: shale off the sand; gas, oil or brine in sand by closure and contacts."""
    facies = np.where(sand, BRINE, SHALE)
    for k, ct in enumerate(contacts):
        charged = sand & (owner == k) & (depth < ct["fwl_m"])
        facies = np.where(charged & (depth < ct["goc_m"]), GAS, facies)
        facies = np.where(charged & (depth >= ct["goc_m"]), OIL, facies)
    return facies


def _sand_mask(rng: np.random.Generator) -> FloatArray:
    field = smooth_field(rng, (NY, NX), SAND_SMOOTHING_NODES)
    return field > np.quantile(field, 1.0 - SAND_FRACTION)


def truth_model(seed: int, maps: CovariateMaps) -> Truth:
    """The hidden facies: sand bodies, and gas or oil where they lie in a closure."""
    owner, contacts = closures(maps.present_depth_m)
    sand = _sand_mask(_rng(seed, 10))
    facies = _fluid_facies(sand, maps.present_depth_m, owner, contacts)
    lower = _sand_mask(_rng(seed, 11))
    lower_facies = _fluid_facies(lower, maps.present_depth_m + LOWER_LEVEL_BELOW_M, owner,
                                 contacts)
    rs, cs = slice(*CUBE_ROWS), slice(*CUBE_COLS)
    horizon = horizon_samples(maps)
    cube = np.full(horizon.shape + (CUBE_SAMPLES,), SHALE)
    grid_index = np.indices(horizon.shape)
    i, j = grid_index[0], grid_index[1]
    cube[i, j, horizon] = facies[rs, cs]
    lower_index = horizon + lower_offset_samples()
    fits = lower_index < CUBE_SAMPLES  # under the deepest traces the lower level leaves the cube
    cube[i[fits], j[fits], lower_index[fits]] = lower_facies[rs, cs][fits]
    return Truth(facies, sand, lower, owner, contacts, cube)


# --------------------------------------------------------------------------- scenarios


def _span(values: FloatArray, step: float, n: int) -> list[float]:
    """``n`` evenly spaced nodes from the map's minimum to maximum, rounded outwards to ``step``."""
    lo = math.floor(float(np.min(values)) / step) * step
    hi = math.ceil(float(np.max(values)) / step) * step
    return [round(float(v), 3) for v in np.linspace(lo, hi, n)]


def scenario_documents(seed: int, maps: CovariateMaps, truth: Truth) -> dict[str, dict[str, Any]]:
    """The three scenarios of the demo story, validated, in their JSON form.

    Keys:

    * ``burial_aware``: training nodes span the map's present depth, net uplift
      and gradient;
    * ``stationary``: every covariate collapsed to its value at well QD-1 (one
      node each), as if trained at that well only;
    * ``hot``: the burial-aware set-up with the gradient taken 8 degC/km hotter
      than the present-day map (a bias of the gradient covariate's perturbation).

    Geology and rock physics come from the bundled example scenario (the same
    invented basin); facies proportions are the truth's own shares (a
    well-informed geologist). All three share their seed, so their training data
    use common random numbers and differ only through the burial section.
    """
    base = default_scenario()
    shares = np.bincount(truth.facies.ravel(), minlength=len(FACIES)) / truth.facies.size
    facies = base["geology"]["facies"]
    if tuple(f["name"] for f in facies) != FACIES:
        raise ValueError(f"the example scenario's facies changed; the demo expects {FACIES}")
    for fac, share in zip(facies[1:], shares[1:], strict=True):
        fac["proportion"] = round(float(share), 3)
    facies[0]["proportion"] = round(1.0 - sum(f["proportion"] for f in facies[1:]), 3)
    base["seed"] = int(_rng(seed, 20).integers(1, 2**31))
    base["realisations"] = REALISATIONS
    base["rockphysics"]["seismic"]["noise_sd"] = dict(NOISE_SD)
    # Map uncertainty of each covariate (per realisation). The uplift law is
    # truncated at +-100 m so its lowest node (>= 100 m) stays above 0.
    base["burial"]["covariates"] = {
        "present_depth_m": {"nodes": _span(maps.present_depth_m, 25.0, 3),
                            "uncertainty": {"kind": "normal", "mean": 0.0, "sd": 20.0}},
        "net_uplift_m": {"nodes": _span(maps.net_uplift_m, 100.0, 4),
                         "uncertainty": {"kind": "truncated_normal", "mean": 0.0, "sd": 50.0,
                                         "low": -100.0, "high": 100.0}},
        "gradient_c_per_km": {"nodes": _span(maps.gradient_c_per_km, 0.5, 3),
                              "uncertainty": {"kind": "normal", "mean": 0.0, "sd": 1.0}},
        "overpressure_mpa": {"nodes": [0.0], "uncertainty": 0.0},
    }
    aware = copy.deepcopy(base)
    aware["name"] = f"{BASIN} - burial-aware"
    aware["description"] = (
        "Invented demo. Training data at nodes spanning the map's present depth, net uplift "
        "and gradient, so the facies PDFs follow the burial history across the basin.")

    well_name = WELLS[0].name
    well = maps.at(WELLS[0].node)
    stationary = copy.deepcopy(base)
    stationary["name"] = f"{BASIN} - stationary, trained at {well_name}"
    stationary["description"] = (
        f"Invented demo. Every covariate collapsed to its value at well {well_name} "
        f"(present depth {well['present_depth_m']:.0f} m, net uplift "
        f"{well['net_uplift_m']:.0f} m, gradient {well['gradient_c_per_km']:.1f} degC/km): "
        "one set of facies PDFs for the whole map, as if trained at that well only.")
    for c in COVARIATES:
        stationary["burial"]["covariates"][c]["nodes"] = [round(well[c], 1)]

    hot = copy.deepcopy(base)
    hot["name"] = f"{BASIN} - hot gradient (+{HOT_SHIFT_C_PER_KM:g} degC/km)"
    hot["description"] = (
        f"Invented demo. The burial-aware set-up, but the present-day gradient map is taken "
        f"to read {HOT_SHIFT_C_PER_KM:g} degC/km too cold (as if from uncorrected bottom-hole "
        "temperatures): a plausible but, here, wrong thermal hypothesis.")
    hot["burial"]["covariates"]["gradient_c_per_km"]["uncertainty"] = {
        "kind": "normal", "mean": HOT_SHIFT_C_PER_KM, "sd": 1.0}
    docs = {"burial_aware": aware, "stationary": stationary, "hot": hot}
    return {k: validate_scenario(d).model_dump(mode="json") for k, d in docs.items()}


def truth_scenario(doc: dict[str, Any], seed: int) -> Scenario:
    """The scenario that plays the earth: the burial-aware document with a seed of its own."""
    return validate_scenario(doc | {"seed": int(_rng(seed, 30).integers(1, 2**31)),
                                    "name": f"{BASIN} - hidden truth"})


# --------------------------------------------------------------------------- attributes


def attribute_maps(
    truth_sc: Scenario, maps: CovariateMaps, truth: Truth
) -> dict[str, FloatArray]:
    """Intercept and gradient of the top reservoir: per node, one realisation of its true facies.

    The forward model runs at every node's own covariates; the samples carry the
    scenario's seismic noise.
    """
    res = forward.simulate(truth_sc, realisations=2, node_values=maps.node_values())
    idx = np.arange(res.node_values.shape[0])
    samples = res.samples[idx, truth.facies.ravel(), 0]
    return {name: samples[:, a].reshape(NY, NX) for a, name in enumerate(res.attributes)}


def _window_twt_ms(maps: CovariateMaps) -> FloatArray:
    """Two-way time of the top reservoir in the cube window (constant-velocity conversion), ms."""
    depth = maps.present_depth_m[slice(*CUBE_ROWS), slice(*CUBE_COLS)]
    return 2000.0 * depth / CUBE_VAVG_M_PER_S


def cube_start_ms(maps: CovariateMaps) -> float:
    """Time of the first cube sample: one sample above the shallowest top reservoir, ms."""
    return (math.floor(float(_window_twt_ms(maps).min()) / CUBE_DT_MS) - 1) * CUBE_DT_MS


def horizon_samples(maps: CovariateMaps) -> FloatArray:
    """Cube sample index of the top reservoir in each trace, shape (n_lines, n_traces)."""
    index = np.rint((_window_twt_ms(maps) - cube_start_ms(maps)) / CUBE_DT_MS).astype(int)
    if index.max() >= CUBE_SAMPLES:
        raise ValueError(
            f"the top reservoir spans {index.max() + 1} samples of {CUBE_DT_MS:g} ms in the "
            f"cube window, more than its {CUBE_SAMPLES}; move or shrink the window")
    return index


def lower_offset_samples() -> int:
    """Samples between the top reservoir and the lower sand level of the cube."""
    return int(round(2000.0 * LOWER_LEVEL_BELOW_M / CUBE_VAVG_M_PER_S / CUBE_DT_MS))


def cube_grid(start_ms: float) -> Grid:
    """Geometry of the demo cube: a window of the map grid, one inline per map row."""
    (r0, r1), (c0, c1) = CUBE_ROWS, CUBE_COLS
    return Grid(
        "cube", (r1 - r0, c1 - c0, CUBE_SAMPLES), x0=X0_M + c0 * SPACING_M,
        y0=Y0_M + r0 * SPACING_M, dx=SPACING_M, dy=SPACING_M,
        sample_axis=SampleAxis("time", start_ms, CUBE_DT_MS),
        inlines=tuple(range(INLINE0 + r0, INLINE0 + r1)),
        crosslines=tuple(range(CROSSLINE0 + c0, CROSSLINE0 + c1)), sorting="inline",
    )


def attribute_cube(
    truth_sc: Scenario, maps: CovariateMaps, truth: Truth, attributes: dict[str, FloatArray]
) -> Cube:
    """Intercept and gradient per cube sample from the truth facies of each sample.

    Every sample of a trace uses that trace's covariates (as the cube classifier
    does) and draws its own realisation. Samples hold top-of-layer interface
    attributes: shale on shale away from the sand levels, the top reservoir at
    the horizon (equal to the attribute maps there) and a lower sand level below
    it; reflections at the base of sands are left out.
    """
    rs, cs = slice(*CUBE_ROWS), slice(*CUBE_COLS)
    window = np.stack([np.asarray(getattr(maps, c))[rs, cs].ravel() for c in COVARIATES], -1)
    lines, traces = CUBE_ROWS[1] - CUBE_ROWS[0], CUBE_COLS[1] - CUBE_COLS[0]
    res = forward.simulate(truth_sc, realisations=CUBE_SAMPLES, node_values=window)
    codes = truth.cube_facies.reshape(-1, CUBE_SAMPLES)
    values = res.samples[np.arange(codes.shape[0])[:, None], codes,
                         np.arange(CUBE_SAMPLES)[None, :]]
    horizon = horizon_samples(maps)
    i, j = np.indices(horizon.shape)
    out = {}
    for a, name in enumerate(res.attributes):
        cube = values[..., a].reshape(lines, traces, CUBE_SAMPLES)
        cube[i, j, horizon] = attributes[name][rs, cs]
        out[name] = cube
    return Cube(cube_grid(cube_start_ms(maps)), out["intercept"], out["gradient"], horizon)


# --------------------------------------------------------------------------- wells


def bed_boundaries(rng: np.random.Generator, top_m: float, base_m: float) -> FloatArray:
    """Bed boundaries from ``top_m`` to ``base_m`` (m) with every bed in :data:`BED_RANGE_M`.

    Thicknesses are log-uniform in the range; a last remainder thinner than the
    range joins the bed above, or, if that would make it too thick, the two share
    their total equally.
    """
    lo, hi = BED_RANGE_M
    if base_m - top_m < lo:
        raise ValueError(f"an interval of {base_m - top_m:g} m cannot hold a bed of {lo:g} m")
    thick: list[float] = []
    while sum(thick) < base_m - top_m:
        thick.append(float(np.exp(rng.uniform(np.log(lo), np.log(hi)))))
    rest = base_m - top_m - sum(thick[:-1])
    thick[-1] = rest
    if rest < lo:
        last = thick.pop() + thick.pop()
        thick += [last] if last <= hi else [last / 2, last / 2]
    return top_m + np.concatenate([[0.0], np.cumsum(thick)])


def _running_mean(values: FloatArray, width: int) -> FloatArray:
    """Centred running mean over ``width`` samples (the tool's vertical resolution)."""
    return ndimage.uniform_filter1d(values, size=width, mode="nearest")


def saturation_height(height_m: FloatArray) -> FloatArray:
    """Water saturation at ``height_m`` above the free water level (see :data:`SWI`)."""
    return SWI + (1.0 - SWI) * np.exp(-np.maximum(height_m, 0.0) / SW_DECAY_M)


def _bed_table(plan: WellPlan, top_res: float, ct: dict[str, float],
               rng: np.random.Generator) -> list[dict[str, Any]]:
    """Beds of the cap shale above ``top_res`` and of the reservoir interval below it."""
    cap = bed_boundaries(rng, top_res - plan.above_m, top_res)
    reservoir = bed_boundaries(rng, top_res, top_res + plan.below_m)
    beds: list[dict[str, Any]] = []
    for edges, is_cap in ((cap, True), (reservoir, False)):
        for top, base in zip(edges[:-1], edges[1:], strict=True):
            mid = 0.5 * (top + base)
            if is_cap:
                fac = SHALE
            elif top == top_res:
                fac = BRINE  # the top reservoir is the top of a sand
            else:
                fac = BRINE if rng.uniform() < plan.net_to_gross else SHALE
            sw = 1.0
            if fac == BRINE and mid < ct["fwl_m"]:
                fac = GAS if mid < ct["goc_m"] else OIL
                sw = float(saturation_height(ct["fwl_m"] - mid))
            beds.append({"top_m": float(top), "base_m": float(base), "facies": fac, "sw": sw,
                         "mid_m": float(mid)})
    return beds


def synthetic_well(
    truth_sc: Scenario, maps: CovariateMaps, truth: Truth, plan: WellPlan, seed: int
) -> DemoWell:
    """Logs of one well from the forward model, bed by bed, with tool smoothing and noise.

    Below the top reservoir, beds of 0.5-5 m are sand (probability
    ``net_to_gross``) or shale; above it lies the cap shale, also in beds. Each
    bed is one forward-model realisation of its facies at its own depth and the
    well's uplift and gradient. Sands above the free water level of the well's
    closure hold gas or oil with the saturation of :func:`saturation_height`
    (forward run with that hydrocarbon saturation). The logs are then smoothed to
    a tool resolution of about 0.6 m and get measurement noise.
    """
    rng = _rng(seed, 40 + WELLS.index(plan))
    cov = maps.at(plan.node)
    k = int(truth.closures[plan.node])
    ct = truth.contacts[k] if k >= 0 else {"goc_m": -np.inf, "fwl_m": -np.inf}
    top_res = cov["present_depth_m"]
    beds = _bed_table(plan, top_res, ct, rng)
    nodes = np.array([[b["mid_m"], cov["net_uplift_m"], cov["gradient_c_per_km"], 0.0]
                      for b in beds])
    codes = np.array([b["facies"] for b in beds])
    names = ("vp", "vs", "density")
    # Shale and brine beds: one run over all bed depths, one realisation each.
    res = forward.simulate(truth_sc.model_copy(update={"seed": int(rng.integers(1, 2**31))}),
                           realisations=2, node_values=nodes)
    props = {name: res.fields[name][np.arange(len(beds)), codes, 0] for name in names}
    # Hydrocarbon beds: a run of their own each, at their saturation and with a
    # seed of their own (so their rock properties are independent draws).
    hc_seed = int(rng.integers(1, 2**31))
    for b in np.flatnonzero([HYDROCARBON[c] for c in codes]):
        run = forward.simulate(
            truth_sc.model_copy(update={"seed": hc_seed + int(b)}), realisations=2,
            node_values=nodes[b : b + 1],
            overrides={"rockphysics.fluids.hydrocarbon_saturation": 1.0 - beds[b]["sw"]},
        )
        for name in names:
            props[name][b] = run.fields[name][0, codes[b], 0]
    depth = np.arange(top_res - plan.above_m, top_res + plan.below_m, LOG_STEP_M)
    tops = np.array([b["top_m"] for b in beds])
    which = np.clip(np.searchsorted(tops, depth, side="right") - 1, 0, len(beds) - 1)
    sand = codes[which] != SHALE
    vsh = np.where(sand, rng.uniform(0.03, 0.12, len(beds))[which],
                   rng.uniform(0.65, 0.9, len(beds))[which])
    sw = np.array([b["sw"] for b in beds])[which]
    n = depth.size
    # Measurement noise, common practice orders of magnitude (from memory): sonic
    # 1-2 %, density 0.01-0.02 g/cm3, gamma ray a few API, saturation a few p.u.
    curves = {
        "vp": _running_mean(props["vp"][which], 4) * (1.0 + 0.01 * rng.standard_normal(n)),
        "vs": _running_mean(props["vs"][which], 4) * (1.0 + 0.015 * rng.standard_normal(n)),
        "density": _running_mean(props["density"][which], 3) + 0.015 * rng.standard_normal(n),
        "gr": _running_mean(GR_CLEAN_API + (GR_SHALE_API - GR_CLEAN_API) * vsh, 4)
        + 4.0 * rng.standard_normal(n),
        "vshale": np.clip(_running_mean(vsh, 4) + 0.03 * rng.standard_normal(n), 0.0, 1.0),
        "sw": np.clip(_running_mean(sw, 3) + 0.03 * rng.standard_normal(n), 0.0, 1.0),
    }
    logs = WellLogs(plan.name, depth, curves, location=node_xy(plan.node))
    table = [{"top_m": round(b["top_m"], 3), "base_m": round(b["base_m"], 3),
              "facies": FACIES[b["facies"]], "sw": round(b["sw"], 3)} for b in beds]
    return DemoWell(logs, plan.node, cov, table)


# --------------------------------------------------------------------------- prospects


def prospect_outlines(truth: Truth, n_rays: int = 36) -> list[dict[str, Any]]:
    """Outline of each closure, traced along ``n_rays`` rays from the high's centre.

    Each vertex lies on its ray, a quarter node beyond the last node of the
    closure, so the outline is star-shaped around the centre (vertices in angle
    order) and never crosses itself.
    """
    out = []
    for k, high in enumerate(HIGHS):
        r0, c0 = high.centre
        pts = []
        for ang in np.linspace(0.0, 2.0 * np.pi, n_rays, endpoint=False):
            dr, dc = math.sin(ang), math.cos(ang)
            reach = 0.0
            while True:
                r, c = int(round(r0 + (reach + 0.5) * dr)), int(round(c0 + (reach + 0.5) * dc))
                if not (0 <= r < NY and 0 <= c < NX) or truth.closures[r, c] != k:
                    break
                reach += 0.5
            x, y = node_xy((r0 + (reach + 0.25) * dr, c0 + (reach + 0.25) * dc))
            pts.append([round(x, 1), round(y, 1)])
        ct = truth.contacts[k]
        out.append({
            "name": high.name,
            "outline": pts,
            "crest_m": round(ct["crest_m"], 1),
            "gas_oil_contact_m": round(ct["goc_m"], 1) if high.gas_m and high.oil_m else None,
            "free_water_level_m": round(ct["fwl_m"], 1),
            "fluids": [f for f, h in (("gas", high.gas_m), ("oil", high.oil_m)) if h > 0],
        })
    return out


# --------------------------------------------------------------------------- all


def generate(seed: int = DEFAULT_SEED) -> DemoData:
    """All demo data from one seed; the same seed gives the same data."""
    if isinstance(seed, bool) or not 0 <= int(seed) < 2**32:
        raise ValueError(f"seed must be an integer from 0 to 2**32 - 1 (got {seed!r})")
    seed = int(seed)
    maps = covariate_maps(seed)
    truth = truth_model(seed, maps)
    docs = scenario_documents(seed, maps, truth)
    truth_sc = truth_scenario(docs["burial_aware"], seed)
    attrs = attribute_maps(truth_sc, maps, truth)
    cube = attribute_cube(truth_sc, maps, truth, attrs)
    wells = [synthetic_well(truth_sc, maps, truth, plan, seed) for plan in WELLS]
    return DemoData(seed, maps, truth, attrs, cube, wells, prospect_outlines(truth), docs)


# --------------------------------------------------------------------------- files


#: Attribute name of each map file (also its CSV column header) and its title.
MAP_FILES = {
    "present_depth_m": "Top reservoir - present depth (m)",
    "net_uplift_m": "Top reservoir - net uplift (m)",
    "gradient_c_per_km": "Top reservoir - geothermal gradient (degC/km)",
    "intercept": "Top reservoir - AVO intercept",
    "gradient": "Top reservoir - AVO gradient",
}
CUBE_FILES = {"intercept": "Central high cube - AVO intercept",
              "gradient": "Central high cube - AVO gradient"}


class DemoFiles(NamedTuple):
    """Paths of the files :func:`write_files` wrote (inputs first, then the hidden truth)."""

    folder: Path
    maps: dict[str, Path]
    cubes: dict[str, Path]
    wells: dict[str, Path]
    prospects: Path
    scenarios: dict[str, Path]
    truth: Path
    truth_cube: Path
    truth_json: Path


def write_segy_cube(path: str | os.PathLike[str], grid: Grid, values: FloatArray,
                    *, fsync: bool = True) -> Path:
    """Write an inline-sorted cube as SEG-Y (segyio, 4-byte IEEE floats), atomically.

    Inline and crossline numbers go to trace bytes 189 and 193, CDP X/Y to bytes
    181/185 in centimetres (coordinate scalar -100, SEG-Y rev 1 bytes 71-72), the
    sample interval in microseconds and the delay (first sample time) in ms.
    """
    if grid.sorting != "inline" or grid.sample_axis is None or grid.sample_axis.domain != "time":
        raise ValueError("write_segy_cube writes inline-sorted cubes with a time axis")
    data = np.asarray(values, dtype=np.float32)
    if data.shape != grid.shape:
        raise ValueError(f"values have shape {data.shape}, the grid {grid.shape}")
    axis = grid.sample_axis
    if abs(axis.start - round(axis.start)) > 1e-9 or axis.start < 0:
        raise ValueError(f"the first sample time must be a whole number of ms (got {axis.start})")
    spec = segyio.spec()
    spec.ilines = list(grid.inlines or ())
    spec.xlines = list(grid.crosslines or ())
    spec.samples = list(axis.values(grid.shape[2]))
    spec.format = 5
    spec.sorting = segyio.TraceSortingFormat.INLINE_SORTING
    x, y = grid.node_xy()
    final = Path(path)
    with atomic_path(final, fsync=fsync) as tmp:
        with segyio.create(str(tmp), spec) as f:
            f.text[0] = segyio.tools.create_text_header({
                1: f"PORECAST DEMO CUBE - {BASIN.upper()} (INVENTED DATA)",
                2: "POST-STACK AVO ATTRIBUTE, TIME IN MS, COORDINATES IN M",
                3: "INLINE BYTE 189, CROSSLINE BYTE 193, CDP X/Y BYTES 181/185 (SCALAR -100)",
                4: CRS_NAME.upper()[:75],
            })
            f.bin.update(tsort=spec.sorting, mfeet=1, hdt=int(round(axis.step * 1000)),
                         hns=grid.shape[2])
            t = 0
            for a, il in enumerate(spec.ilines):
                for b, xl in enumerate(spec.xlines):
                    f.header[t] = {
                        segyio.su.iline: il, segyio.su.xline: xl, segyio.su.cdp: t + 1,
                        segyio.su.cdpx: int(round(x[a, b] * 100)),
                        segyio.su.cdpy: int(round(y[a, b] * 100)),
                        segyio.su.scalco: -100, segyio.su.ns: grid.shape[2],
                        segyio.su.dt: int(round(axis.step * 1000)),
                        segyio.su.delrt: int(round(axis.start)), segyio.su.offset: 0,
                    }
                    f.trace[t] = data[a, b]
                    t += 1
    return final


def _write_json(path: Path, doc: Any) -> Path:
    with atomic_path(path, fsync=False) as tmp:
        Path(tmp).write_text(json.dumps(doc, indent=1) + "\n", encoding="utf-8")
    return path


def write_files(data: DemoData, folder: str | os.PathLike[str]) -> DemoFiles:
    """Write the demo inputs (maps, cube, wells, prospects, scenarios) and the hidden truth.

    Layout under ``folder``: ``maps/*.csv`` (x, y, value per node), ``cube/*.sgy``,
    ``wells/*.las``, ``prospects.json``, ``scenarios/*.json`` and, kept apart,
    ``truth/`` (facies map and cube, contacts and the wells' bed tables).
    """
    root = Path(folder)
    for sub in ("maps", "cube", "wells", "scenarios", "truth"):
        (root / sub).mkdir(parents=True, exist_ok=True)
    grid = data.maps.grid
    values = {**{c: getattr(data.maps, c) for c in MAP_FILES if c in COVARIATES},
              **data.attributes}
    maps = {name: write_xyz(root / "maps" / f"{name}.csv",
                            GridData(grid, {name: np.asarray(values[name], dtype=float)}),
                            fsync=False)
            for name in MAP_FILES}
    cubes = {name: write_segy_cube(root / "cube" / f"{name}.sgy", data.cube.grid,
                                   getattr(data.cube, name), fsync=False)
             for name in CUBE_FILES}
    wells = {w.logs.name: write_well(root / "wells" / f"{w.logs.name}.las", w.logs, fsync=False)
             for w in data.wells}
    prospects = _write_json(root / "prospects.json",
                            [{"name": p["name"], "outline": p["outline"]}
                             for p in data.prospects])
    scenarios = {k: _write_json(root / "scenarios" / f"{k}.json", doc)
                 for k, doc in data.scenarios.items()}
    truth = write_npz(root / "truth" / "facies_map.npz", GridData(grid, {
        "facies": data.truth.facies.astype(float),
        "closure": data.truth.closures.astype(float),
    }), fsync=False)
    truth_cube = write_npz(root / "truth" / "facies_cube.npz", GridData(data.cube.grid, {
        "facies": data.truth.cube_facies.astype(float)}), fsync=False)
    truth_json = _write_json(root / "truth" / "truth.json", {
        "kind": "porecast.demo.truth",
        "seed": data.seed,
        "basin": BASIN,
        "coordinates": CRS_NAME,
        "facies_codes": {str(i): f for i, f in enumerate(FACIES)},
        "highs": data.prospects,
        "wells": [{"name": w.logs.name, "node": list(w.node), "covariates": w.covariates,
                   "beds": w.beds} for w in data.wells],
        "note": "Hidden truth of the demo: not uploaded to the project; used only to score "
                "the scenarios.",
    })
    return DemoFiles(root, maps, cubes, wells, prospects, scenarios, truth, truth_cube,
                     truth_json)
