"""Use-case: live physics previews of a (possibly unsaved) scenario document.

The scenario workspace redraws these while a user edits a section, so every
number comes from the science package and nothing is re-implemented in the
browser. A preview is small on purpose (a few hundred realisations at a few
locations) and computes only the parts asked for:

``history``
    burial depth, temperature, pore pressure and effective stress against age
    at each location (:func:`porecast.physics.burial.burial_paths`), with the
    cementation-onset temperature, the age it is first reached, maximum burial
    and the time spent above onset.
``porosity``
    porosity and quartz cement against age for each sand of the scenario and
    the cap-rock shale: Athy compaction (:mod:`porecast.physics.compaction`)
    and Walderhaug cementation (:mod:`porecast.physics.diagenesis`) along the
    location's path, drawn over the sand's input distributions; the 10th, 50th
    and 90th percentiles of the realisations are returned (``q10``, ``q50``,
    ``q90``: plain percentiles, not the exceedance convention of risk numbers).
``depth_trend``
    Vp, Vs, density and porosity against present depth per facies from the
    Monte Carlo forward model (:func:`porecast.physics.forward.simulate`) on
    a depth sweep at the first location's other covariates.
``crossplot``
    the attribute cross-plot per facies at one location: a cloud of samples,
    their mean and covariance and the 2-sigma confidence ellipse.
``sweep``
    the same ellipses at evenly spaced values of one covariate (e.g. net
    uplift), so a slider can move the facies clouds through the covariate.

The forward model of the preview follows the modelling choices documented in
:mod:`porecast.physics.forward` (mechanical compaction stops at the onset of
cementation and the porosity then is reduced by quartz cement only), so the
porosity and cement curves end where the forward model's samples are.
"""

from __future__ import annotations

import math
import time
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

import numpy as np
from scipy import stats

from porecast.physics import burial, compaction, diagenesis, distributions, forward
from porecast.physics.scenario import (
    ATTRIBUTES,
    COVARIATES,
    Scenario,
    ScenarioValidationError,
    dist_params,
    validate_scenario,
)

from .errors import InvalidInput

PARTS = ("history", "porosity", "depth_trend", "crossplot", "sweep")

#: Units of every quantity of a preview (the API's units).
UNITS: dict[str, str] = {
    "age": "Ma",
    "depth": "m",
    "temperature": "degC",
    "pressure": "MPa",
    "time": "Myr",
    "porosity": "fraction",
    "cement": "fraction of bulk rock",
    "vp": "m/s",
    "vs": "m/s",
    "density": "g/cm3",
    **{c: forward.UNITS[c] for c in COVARIATES},
    **{a: forward.UNITS[a] for a in ATTRIBUTES},
}

#: Default ranges of the covariate slider when the scenario has a single node.
SWEEP_DEFAULTS: dict[str, tuple[float, float]] = {
    "present_depth_m": (1000.0, 4000.0),
    "net_uplift_m": (0.0, 1500.0),
    "gradient_c_per_km": (20.0, 50.0),
    "overpressure_mpa": (0.0, 20.0),
}

#: Radius of the confidence ellipse in standard deviations (Mahalanobis distance).
ELLIPSE_SIGMA = 2.0

#: Age points of the smooth porosity and cement curves (plus the control ages).
AGE_POINTS = 90

#: Largest number of points of a cross-plot cloud per facies.
CLOUD_POINTS = 400


# --------------------------------------------------------------------------- helpers


def _finite_list(values: Any, digits: int = 6) -> list[float | None]:
    """A 1-D array as a JSON list, non-finite values as null, rounded to ``digits``
    significant digits (previews are for the eye; this keeps responses small)."""
    arr = np.asarray(values, dtype=np.float64).ravel()
    finite = np.isfinite(arr)
    safe = np.where(finite & (arr != 0.0), np.abs(arr), 1.0)
    scale = 10.0 ** (digits - 1 - np.floor(np.log10(safe)))
    rounded = np.round(np.where(finite, arr, 0.0) * scale) / scale
    out: list[float | None] = rounded.tolist()
    if not finite.all():
        for i in np.flatnonzero(~finite):
            out[i] = None
    return out


def _number(value: Any) -> float | None:
    v = float(value)
    return v if math.isfinite(v) else None


def _quantiles(samples: np.ndarray) -> dict[str, list[float | None]]:
    """10th, 50th and 90th percentiles over the first axis (realisations)."""
    q = np.percentile(samples, [10.0, 50.0, 90.0], axis=0)
    return {"q10": _finite_list(q[0]), "q50": _finite_list(q[1]), "q90": _finite_list(q[2])}


def _stream(seed: int, path: str) -> np.random.Generator:
    return distributions.stream_for(seed, f"preview.{path}")


def _draw(seed: int, path: str, dist: Any, n: int) -> np.ndarray:
    """``n`` draws of one input distribution on its own reproducible stream."""
    return distributions.sample(dist.kind, dist_params(dist), _stream(seed, path), n)


def confidence_ellipse(
    mean: Sequence[float], covariance: Any, sigma: float = ELLIPSE_SIGMA, points: int = 73
) -> tuple[np.ndarray, np.ndarray]:
    """Outline of the ellipse of Mahalanobis distance ``sigma`` around ``mean``.

    The points ``mean + sigma * V sqrt(W) [cos t, sin t]`` with ``cov = V W V^T``
    (eigen-decomposition) satisfy ``(x - mean)^T cov^-1 (x - mean) = sigma^2``.
    For a bivariate normal law the ellipse holds the probability
    ``1 - exp(-sigma^2 / 2)`` (chi-square with 2 degrees of freedom), 0.8647 for
    2 sigma.

    Parameters
    ----------
    mean : sequence of 2 floats
        Centre, in the units of the two attributes.
    covariance : array_like of shape (2, 2)
        Covariance matrix, symmetric positive semi-definite.
    sigma : float
        Mahalanobis radius (> 0).
    points : int
        Number of outline points (the first is repeated at the end).

    Returns
    -------
    x, y : ndarray of shape (points,)
    """
    cov = np.asarray(covariance, dtype=np.float64)
    if cov.shape != (2, 2) or not np.all(np.isfinite(cov)):
        raise ValueError("covariance must be a finite 2 x 2 matrix")
    if not sigma > 0:
        raise ValueError(f"sigma must be positive (got {sigma})")
    w, v = np.linalg.eigh(0.5 * (cov + cov.T))
    if w.min() < -1e-9 * max(1.0, abs(w.max())):
        raise ValueError("covariance must be positive semi-definite")
    t = np.linspace(0.0, 2.0 * np.pi, points)
    circle = np.stack([np.cos(t), np.sin(t)])
    xy = (v * np.sqrt(np.clip(w, 0.0, None))) @ circle * sigma
    return float(mean[0]) + xy[0], float(mean[1]) + xy[1]


def ellipse_coverage(sigma: float = ELLIPSE_SIGMA) -> float:
    """Probability inside the ``sigma`` ellipse of a bivariate normal: 1 - exp(-sigma^2/2)."""
    return float(-np.expm1(-0.5 * sigma * sigma))


def _location_rows(locations: Sequence[Mapping[str, float]]) -> np.ndarray:
    return np.array([[float(loc[c]) for c in COVARIATES] for loc in locations], dtype=np.float64)


def _location_dicts(rows: np.ndarray) -> list[dict[str, float]]:
    return [dict(zip(COVARIATES, map(float, r), strict=True)) for r in rows]


def default_locations(sc: Scenario) -> list[dict[str, float]]:
    """One location at the middle node of every covariate of the scenario."""
    covs = sc.burial.covariates
    return [{c: float(np.median(getattr(covs, c).nodes)) for c in COVARIATES}]


# --------------------------------------------------------------------------- history


def _history(sc: Scenario, row: np.ndarray) -> burial.BurialHistory:
    """Burial history of one location at the template's control ages."""
    b = sc.burial
    return burial.burial_paths(
        forward.burial_template(sc), row[0], row[1], row[2], row[3],
        overburden_density=b.overburden_density, water_density=b.water_density,
    )


def _refined(hist: burial.BurialHistory, extra_ages: Iterable[float]) -> burial.BurialHistory:
    """The same piecewise-linear history sampled on a finer age grid.

    Every quantity of :func:`porecast.physics.burial.burial_paths` is linear
    in age between control ages, so linear interpolation is exact; the finer
    grid only serves the curves that are not linear (porosity, cement).
    """
    ages = hist.ages_ma
    fine = np.union1d(
        np.union1d(ages, np.linspace(ages[-1], ages[0], AGE_POINTS)),
        np.asarray([a for a in extra_ages if math.isfinite(a)], dtype=np.float64),
    )[::-1]
    rev = ages[::-1]

    def on_fine(values: np.ndarray) -> np.ndarray:
        return np.interp(fine[::-1], rev, values[::-1])[::-1]

    return burial.BurialHistory(
        fine, *(on_fine(getattr(hist, name)) for name in burial.BurialHistory._fields[1:])
    )


def history_part(sc: Scenario, rows: np.ndarray) -> list[dict[str, Any]]:
    """Depth, temperature and pressures against age at each location."""
    onset_c = sc.geology.cement_onset_c
    out = []
    for i, row in enumerate(rows):
        hist = _history(sc, row)
        onset = float(burial.onset_age(hist, onset_c))
        out.append({
            "location": i,
            "ages_ma": _finite_list(hist.ages_ma),
            "depth_m": _finite_list(hist.depth_m),
            "temperature_c": _finite_list(hist.temperature_c),
            "pore_pressure_mpa": _finite_list(hist.pore_pressure_mpa),
            "hydrostatic_mpa": _finite_list(hist.hydrostatic_mpa),
            "effective_stress_mpa": _finite_list(hist.effective_stress_mpa),
            "max_depth_m": _number(burial.maximum_depth(hist)),
            "max_temperature_c": _number(burial.maximum_temperature(hist)),
            "max_effective_stress_mpa": _number(burial.maximum_effective_stress(hist)),
            "cement_onset_c": onset_c,
            "onset_age_ma": _number(onset),
            "time_above_onset_myr": _number(burial.time_above(hist, onset_c)),
        })
    return out


# --------------------------------------------------------------------------- porosity, cement


def _athy_kwargs(sc: Scenario, c_per_km: np.ndarray) -> dict[str, Any]:
    """Athy coefficients in the scenario's compaction mode (as the forward model)."""
    if sc.geology.compaction_mode == "depth":
        return {"mode": "depth", "compaction_coefficient_per_km": c_per_km}
    b = sc.burial
    per_m = (b.overburden_density - b.water_density) * burial.STANDARD_GRAVITY * 1e-3
    return {"mode": "stress", "compaction_coefficient_per_mpa": c_per_km / (per_m * 1e3)}


def _at_age(ages: np.ndarray, values: np.ndarray, age: float) -> np.ndarray:
    """Linear interpolation of ``values`` (n, n_times) at one age on a decreasing grid."""
    i = int(np.clip(np.searchsorted(-ages, -age, side="left"), 1, ages.size - 1))
    w = (ages[i - 1] - age) / (ages[i - 1] - ages[i])
    return values[:, i - 1] + w * (values[:, i] - values[:, i - 1])


def _sands(sc: Scenario) -> list[tuple[str, str, Any, list[str]]]:
    """(label, stream path, sand properties, facies names) of each distinct sand."""
    g = sc.geology
    shared = [f.name for f in g.facies if f.rock == "sand" and f.sand is None]
    out = []
    if shared or not any(f.rock == "sand" for f in g.facies):
        out.append(("sand", "geology.sand", g.sand, shared))
    for i, f in enumerate(g.facies):
        if f.rock == "sand" and f.sand is not None:
            out.append((f.name, f"geology.facies.{i}.sand", f.sand, [f.name]))
    return out


def sand_porosity_paths(
    sc: Scenario, hist: burial.BurialHistory, sand: Any, path: str, n: int
) -> tuple[burial.BurialHistory, np.ndarray, np.ndarray]:
    """Porosity and quartz cement against age for ``n`` draws of one sand.

    Returns the refined history and porosity and cement arrays of shape
    (n, n_ages). Mechanical compaction (Athy, irreversible) runs until the
    onset of cementation; from then on porosity is the porosity at onset
    minus the Walderhaug (1996) cement, as in the forward model.
    """
    onset_c = sc.geology.cement_onset_c
    onset = float(burial.onset_age(hist, onset_c))
    fine = _refined(hist, [onset])
    draw = {name: _draw(sc.seed, f"{path}.{name}", getattr(sand, name), n)
            for name in type(sand).model_fields}
    athy = _athy_kwargs(sc, draw["compaction_per_km"])
    phi_path = compaction.mechanical_porosity(
        fine, porosity_surface=draw["porosity_surface"], **athy
    )
    if not math.isfinite(onset):
        return fine, phi_path, np.zeros_like(phi_path)
    # Porosity at onset as the forward model takes it: linear between control ages.
    coarse = compaction.mechanical_porosity(
        hist, porosity_surface=draw["porosity_surface"], **athy
    )
    phi_onset = _at_age(hist.ages_ma, np.atleast_2d(coarse), onset)
    cement = diagenesis.quartz_cement(
        fine.ages_ma,
        fine.temperature_c,
        grain_size_mm=draw["grain_size_mm"],
        quartz_fraction=diagenesis.bulk_quartz_fraction(draw["quartz_fraction"], phi_onset),
        coating_fraction=draw["coating_fraction"],
        porosity_onset=phi_onset,
        onset_c=onset_c,
    )
    before = fine.ages_ma > onset
    porosity = np.where(before, phi_path, phi_onset[:, None] - cement)
    return fine, porosity, np.where(before, 0.0, cement)


def porosity_part(sc: Scenario, rows: np.ndarray, n: int) -> list[dict[str, Any]]:
    """Porosity and quartz cement against age per sand and for the cap rock."""
    out = []
    cap = sc.geology.cap_rock
    for i, row in enumerate(rows):
        hist = _history(sc, row)
        sands = []
        for label, path, sand, names in _sands(sc):
            fine, phi, cem = sand_porosity_paths(sc, hist, sand, path, n)
            sands.append({"name": label, "facies": names, "ages_ma": _finite_list(fine.ages_ma),
                          "porosity": _quantiles(phi), "cement": _quantiles(cem)})
        fine = _refined(hist, [])
        phi_cap = compaction.mechanical_porosity(
            fine,
            porosity_surface=_draw(sc.seed, "geology.cap_rock.porosity_surface",
                                   cap.porosity_surface, n),
            **_athy_kwargs(sc, _draw(sc.seed, "geology.cap_rock.compaction_per_km",
                                     cap.compaction_per_km, n)),
        )
        out.append({
            "location": i,
            "sands": sands,
            "cap_rock": {"ages_ma": _finite_list(fine.ages_ma), "porosity": _quantiles(phi_cap)},
            "cement_onset_c": sc.geology.cement_onset_c,
        })
    return out


# --------------------------------------------------------------------------- forward model


def _simulate(sc: Scenario, nodes: np.ndarray, n: int) -> forward.ForwardResult:
    return forward.simulate(sc, realisations=n, node_values=nodes)


#: Present temperature the default depth sweep stays below, degC, for the hottest
#: realisation (location gradient plus the top of its uncertainty, deepest depth
#: draw): the Batzle & Wang (1992) fluid correlations are fitted up to 150 degC.
DEPTH_SWEEP_MAX_TEMPERATURE_C = 145.0


def default_depth_limit(sc: Scenario, row: np.ndarray) -> float:
    """Deepest present depth of the default sweep, m: 4500 m or shallower, so that the
    hottest realisation's present temperature stays below 145 degC.

    The hottest realisation takes the location's gradient plus the upper end of the
    gradient uncertainty and the deepest present-depth draw (the supports of
    :func:`porecast.physics.distributions.support`; mean + 4 sd for a normal law).
    """
    ts = sc.burial.surface_temperature_c
    covs = sc.burial.covariates
    g_unc = covs.gradient_c_per_km.uncertainty
    z_unc = covs.present_depth_m.uncertainty
    g_hi = row[2] + max(0.0, distributions.support(g_unc.kind, dist_params(g_unc)).high)
    z_hi = max(0.0, distributions.support(z_unc.kind, dist_params(z_unc)).high)
    limit = (DEPTH_SWEEP_MAX_TEMPERATURE_C - ts) / g_hi * 1000.0 - z_hi
    return float(min(4500.0, max(600.0, limit)))


def depth_trend_part(
    sc: Scenario, row: np.ndarray, n: int, depth_from_m: float, depth_to_m: float, steps: int
) -> dict[str, Any]:
    """Vp, Vs, density and porosity percentiles per facies over a present-depth sweep."""
    depths = np.linspace(depth_from_m, depth_to_m, steps)
    nodes = np.repeat(row[None, :], steps, axis=0)
    nodes[:, 0] = depths
    res = _simulate(sc, nodes, n)
    facies = []
    for j, name in enumerate(res.facies):
        entry: dict[str, Any] = {"name": name}
        for key in ("vp", "vs", "density", "porosity", "vp_vs"):
            entry[key] = _quantiles(res.fields[key][:, j, :].T)
        facies.append(entry)
    return {"location": 0, "depth_m": _finite_list(depths), "facies": facies}


def _attribute_pair(sc: Scenario, wanted: Sequence[str] | None) -> tuple[str, str]:
    scenario_attrs = list(sc.rockphysics.seismic.attributes)
    if wanted:
        if len(wanted) != 2 or wanted[0] == wanted[1]:
            raise InvalidInput("crossplot_attributes names two different attributes",
                               [{"loc": "crossplot_attributes", "msg": "two different names"}])
        return wanted[0], wanted[1]
    if len(scenario_attrs) >= 2:
        return scenario_attrs[0], scenario_attrs[1]
    other = next(a for a in ("vp_vs", "acoustic_impedance", "intercept") if a != scenario_attrs[0])
    return scenario_attrs[0], other


def _attribute_values(res: forward.ForwardResult, name: str) -> tuple[np.ndarray, bool]:
    """Samples of one attribute, (n_nodes, n_facies, n); with noise when it is a
    scenario attribute (as the classifier is trained), noise-free otherwise."""
    if name in res.attributes:
        return res.samples[..., res.attributes.index(name)], True
    return res.fields[name], False


def _ellipse_entry(xs: np.ndarray, ys: np.ndarray) -> dict[str, Any]:
    mean = [float(xs.mean()), float(ys.mean())]
    cov = np.cov(np.stack([xs, ys]))
    ex, ey = confidence_ellipse(mean, cov)
    return {"mean": _finite_list(mean), "covariance": [_finite_list(r) for r in cov],
            "ellipse": {"x": _finite_list(ex, 5), "y": _finite_list(ey, 5)}}


def crossplot_part(
    sc: Scenario, row: np.ndarray, n: int, pair: tuple[str, str], location: int
) -> dict[str, Any]:
    """Attribute cloud, mean, covariance and 2-sigma ellipse per facies at one location."""
    res = _simulate(sc, row[None, :], n)
    xa, x_noise = _attribute_values(res, pair[0])
    ya, y_noise = _attribute_values(res, pair[1])
    keep = min(n, CLOUD_POINTS)
    facies = []
    for j, name in enumerate(res.facies):
        xs, ys = xa[0, j], ya[0, j]
        facies.append({"name": name, "x": _finite_list(xs[:keep], 5),
                       "y": _finite_list(ys[:keep], 5), **_ellipse_entry(xs, ys)})
    return {"location": location, "x": pair[0], "y": pair[1],
            "x_unit": forward.UNITS[pair[0]], "y_unit": forward.UNITS[pair[1]],
            "noise": {"x": x_noise, "y": y_noise}, "sigma": ELLIPSE_SIGMA,
            "coverage": ellipse_coverage(), "facies": facies}


def sweep_values(sc: Scenario, covariate: str, low: float | None, high: float | None,
                 steps: int) -> np.ndarray:
    """Evenly spaced covariate values: the given range, else the node range, else a default."""
    nodes = getattr(sc.burial.covariates, covariate).nodes
    lo = min(nodes) if low is None else low
    hi = max(nodes) if high is None else high
    if low is None and high is None and lo == hi:
        lo, hi = SWEEP_DEFAULTS[covariate]
    if not hi > lo:
        raise InvalidInput("sweep.high must be above sweep.low",
                           [{"loc": "sweep.high", "msg": f"must be above {lo:g}"}])
    return np.linspace(lo, hi, steps)


def sweep_part(
    sc: Scenario, row: np.ndarray, n: int, pair: tuple[str, str], covariate: str,
    values: np.ndarray,
) -> dict[str, Any]:
    """Facies means and ellipses at each value of one covariate (the slider's frames)."""
    k = COVARIATES.index(covariate)
    nodes = np.repeat(row[None, :], values.size, axis=0)
    nodes[:, k] = values
    res = _simulate(sc, nodes, n)
    xa, _ = _attribute_values(res, pair[0])
    ya, _ = _attribute_values(res, pair[1])
    facies = []
    for j, name in enumerate(res.facies):
        frames = [_ellipse_entry(xa[i, j], ya[i, j]) for i in range(values.size)]
        facies.append({"name": name, "means": [f["mean"] for f in frames],
                       "ellipses": [f["ellipse"] for f in frames]})
    return {"covariate": covariate, "unit": forward.UNITS[covariate],
            "values": _finite_list(values), "x": pair[0], "y": pair[1],
            "x_unit": forward.UNITS[pair[0]], "y_unit": forward.UNITS[pair[1]],
            "sigma": ELLIPSE_SIGMA, "facies": facies}


# --------------------------------------------------------------------------- entry points


def _validation_error(exc: ScenarioValidationError) -> InvalidInput:
    first = exc.errors[0] if exc.errors else {"loc": "", "msg": str(exc)}
    where = f" at {first['loc']}" if first.get("loc") else ""
    return InvalidInput(f"scenario is not valid{where}: {first['msg']}", list(exc.errors))


def validation_errors(doc: Any) -> list[dict[str, str]]:
    """Every problem of a scenario document as ``{"loc", "msg"}`` (empty when valid)."""
    if not isinstance(doc, dict):
        return [{"loc": "", "msg": "a scenario document is a JSON object"}]
    try:
        validate_scenario(doc)
    except ScenarioValidationError as exc:
        return [{"loc": str(e.get("loc", "")), "msg": str(e.get("msg", ""))} for e in exc.errors]
    return []


def preview(
    doc: dict[str, Any],
    *,
    locations: Sequence[Mapping[str, float]] | None = None,
    realisations: int = 200,
    parts: Iterable[str] = PARTS,
    crossplot_attributes: Sequence[str] | None = None,
    crossplot_location: int = 0,
    covariate_override: Mapping[str, float] | None = None,
    sweep: Mapping[str, Any] | None = None,
    depth_trend: Mapping[str, Any] | None = None,
) -> dict[str, Any]:
    """Compute the asked-for preview parts of a scenario document.

    Parameters
    ----------
    doc : dict
        A whole scenario document (validated here).
    locations : list of dict, optional
        Map locations as covariate values (``present_depth_m`` m,
        ``net_uplift_m`` m, ``gradient_c_per_km`` degC/km, ``overpressure_mpa``
        MPa); default one location at the middle nodes.
    realisations : int
        Realisations per facies and node (small: 20 to 2000).
    parts : iterable of str
        Subset of :data:`PARTS`.
    crossplot_attributes : two attribute names, optional
        Axes of the cross-plot and sweep; default the scenario's first two.
    crossplot_location : int
        Index of the location of the cross-plot.
    covariate_override : dict, optional
        ``{"name": covariate, "value": v}``: set that covariate at every location
        (the slider's current value).
    sweep : dict, optional
        ``{"covariate", "low", "high", "steps"}`` of the slider frames.
    depth_trend : dict, optional
        ``{"from_m", "to_m", "steps"}`` of the depth sweep.

    Returns
    -------
    dict
        JSON-ready parts, their units and the compute time of each part, ms.

    Raises
    ------
    InvalidInput
        When the document is not valid (field paths in ``errors``) or the
        science package refuses the inputs (stage named in the message).
    """
    wanted = set(parts)
    unknown = wanted - set(PARTS)
    if unknown:
        raise InvalidInput(f"unknown preview parts: {', '.join(sorted(unknown))}",
                           [{"loc": "parts", "msg": f"allowed: {', '.join(PARTS)}"}])
    try:
        sc = validate_scenario(doc)
    except ScenarioValidationError as exc:
        raise _validation_error(exc) from None
    locs = list(locations) if locations else default_locations(sc)
    rows = _location_rows(locs)
    if covariate_override:
        name = str(covariate_override["name"])
        if name not in COVARIATES:
            raise InvalidInput("covariate_override.name is not a covariate",
                               [{"loc": "covariate_override.name",
                                 "msg": f"allowed: {', '.join(COVARIATES)}"}])
        rows[:, COVARIATES.index(name)] = float(covariate_override["value"])
    if not 0 <= crossplot_location < len(rows):
        raise InvalidInput("crossplot_location is not one of the locations",
                           [{"loc": "crossplot_location", "msg": f"0 to {len(rows) - 1}"}])
    n = int(realisations)
    timing: dict[str, float] = {}
    out: dict[str, Any] = {
        "scenario": {
            "name": sc.name, "seed": sc.seed,
            "facies": [{"name": f.name, "rock": f.rock, "fluid": f.fluid,
                        "hydrocarbon": f.hydrocarbon, "proportion": f.proportion}
                       for f in sc.geology.facies],
            "attributes": list(sc.rockphysics.seismic.attributes),
            "cement_onset_c": sc.geology.cement_onset_c,
        },
        "locations": _location_dicts(rows),
        "realisations": n,
        "units": UNITS,
    }
    pair = _attribute_pair(sc, crossplot_attributes)

    def timed(name: str, fn: Any) -> None:
        t0 = time.perf_counter()
        out[name] = fn()
        timing[name] = round((time.perf_counter() - t0) * 1e3, 2)

    try:
        if "history" in wanted:
            timed("history", lambda: history_part(sc, rows))
        if "porosity" in wanted:
            timed("porosity", lambda: porosity_part(sc, rows, n))
        if "depth_trend" in wanted:
            d = dict(depth_trend or {})
            lo = float(d.get("from_m") or 300.0)
            hi = float(d.get("to_m") or default_depth_limit(sc, rows[0]))
            timed("depth_trend", lambda: depth_trend_part(
                sc, rows[0], n, lo, max(hi, lo + 100.0), int(d.get("steps") or 15)))
        if "crossplot" in wanted:
            timed("crossplot", lambda: crossplot_part(
                sc, rows[crossplot_location], n, pair, crossplot_location))
        if "sweep" in wanted:
            s = dict(sweep or {})
            cov = str(s.get("covariate", "net_uplift_m"))
            values = sweep_values(sc, cov, s.get("low"), s.get("high"), int(s.get("steps", 9)))
            timed("sweep", lambda: sweep_part(sc, rows[crossplot_location], n, pair, cov,
                                              values))
    except (ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
        if isinstance(exc, InvalidInput):
            raise
        raise InvalidInput(f"the preview could not be computed: {exc}",
                           [{"loc": "", "msg": str(exc)}]) from None
    out["timing_ms"] = timing
    return out


def distribution_density(dist: Mapping[str, Any], points: int = 61) -> dict[str, Any]:
    """Probability density of one input distribution for the field editors.

    Parameters
    ----------
    dist : dict
        A distribution of the scenario schema (``kind`` plus its parameters;
        a bare number is a constant).
    points : int
        Points of the density curve over the distribution's support.

    Returns
    -------
    dict
        ``x``, ``density`` (null for a constant), ``support``, ``mean`` and the
        10th, 50th and 90th percentiles, in the unit of the field.
    """
    from pydantic import TypeAdapter, ValidationError

    from porecast.physics.scenario import Dist

    raw = {"kind": "constant", "value": dist} if isinstance(dist, int | float) else dist
    try:
        model = TypeAdapter(Dist).validate_python(raw)
    except ValidationError as exc:
        errs = [{"loc": ".".join(str(p) for p in e["loc"] if p not in distributions.KINDS),
                 "msg": e["msg"].removeprefix("Value error, ")} for e in exc.errors()]
        raise InvalidInput(f"not a valid distribution: {errs[0]['msg']}", errs) from None
    p = dist_params(model)
    kind = model.kind
    sup = distributions.support(kind, p)
    summary = {
        "kind": kind,
        "support": _finite_list([sup.low, sup.high]),
        "mean": _number(distributions.mean(kind, p)),
        "q10": _number(distributions.quantile(kind, p, 0.1)),
        "q50": _number(distributions.quantile(kind, p, 0.5)),
        "q90": _number(distributions.quantile(kind, p, 0.9)),
    }
    if kind == "constant":
        return {**summary, "x": [p["value"]], "density": None}
    x = np.linspace(sup.low, sup.high, points)
    return {**summary, "x": _finite_list(x), "density": _finite_list(_pdf(kind, p, x))}


def _pdf(kind: str, p: Mapping[str, float], x: np.ndarray) -> np.ndarray:
    """Density of a scenario distribution at ``x`` (scipy.stats parameterisations)."""
    if kind == "normal":
        return stats.norm.pdf(x, p["mean"], p["sd"])
    if kind == "truncated_normal":
        a, b = (p["low"] - p["mean"]) / p["sd"], (p["high"] - p["mean"]) / p["sd"]
        return stats.truncnorm.pdf(x, a, b, loc=p["mean"], scale=p["sd"])
    if kind == "uniform":
        return stats.uniform.pdf(x, p["low"], p["high"] - p["low"])
    if kind == "triangular":
        width = p["high"] - p["low"]
        return stats.triang.pdf(x, (p["mode"] - p["low"]) / width, loc=p["low"], scale=width)
    if kind == "lognormal":
        return stats.lognorm.pdf(x, p["sd_log"], scale=p["median"])
    raise ValueError(f"kind must be one of {', '.join(distributions.KINDS)} (got {kind!r})")
