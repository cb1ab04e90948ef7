"""Use-case: calibrate a scenario at a well (blind test from LAS logs).

Reads the well's logs, derives facies from cut-offs, fits the shale background
trend, computes the scenario's attributes at every log sample, blocks them to
seismic scale, classifies them with the scenario's PDFs at the well's
covariates and compares the two facies logs in a confusion matrix.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from ..io import WellLogs, read_well
from ..physics import calibration as cal
from ..physics.scenario import COVARIATES, Scenario
from .classification import FaciesModel

#: Gamma-ray end members from the log's own distribution when no Vshale curve
#: exists: the 5th and 95th percentiles as clean sand and pure shale (common practice).
GR_PERCENTILES = (5.0, 95.0)


def _facies_roles(scenario: Scenario, hydrocarbon_facies: str | None) -> tuple[str, str, str]:
    facies = scenario.geology.facies
    shale = next((f.name for f in facies if f.rock == "shale"), None)
    brine = next((f.name for f in facies if f.rock == "sand" and f.fluid == "brine"), None)
    if hydrocarbon_facies is not None:
        names = [f.name for f in facies if f.hydrocarbon]
        if hydrocarbon_facies not in names:
            raise ValueError(
                f"--hydrocarbon-facies {hydrocarbon_facies!r} is not a hydrocarbon facies of the "
                f"scenario (those are {names})"
            )
        hc = hydrocarbon_facies
    else:
        hc = next((f.name for f in facies if f.hydrocarbon), None)
    if shale is None or brine is None or hc is None:
        raise ValueError(
            "calibration needs a shale facies, a brine sand facies and a hydrocarbon facies "
            "in the scenario"
        )
    return shale, brine, hc


def well_covariates(
    scenario: Scenario, logs: WellLogs, given: Mapping[str, float]
) -> tuple[dict[str, float], list[str]]:
    """Covariate values at the well: given ones, else documented defaults (reported)."""
    unknown = [k for k in given if k not in COVARIATES]
    if unknown:
        raise ValueError(f"unknown covariate(s) {unknown}; allowed: {', '.join(COVARIATES)}")
    values: dict[str, float] = {}
    assumed = []
    for c in COVARIATES:
        if c in given:
            values[c] = float(given[c])
        elif c == "present_depth_m":
            values[c] = float(np.median(logs.depth))
            assumed.append(f"{c} = {values[c]:.0f} m (median depth of the logged interval)")
        else:
            nodes = getattr(scenario.burial.covariates, c).nodes
            values[c] = float(np.median(nodes))
            assumed.append(f"{c} = {values[c]:g} (median of the scenario's nodes)")
    return values, assumed


def calibrate_well(
    scenario: Scenario,
    model: FaciesModel,
    well_path: str | Path,
    *,
    covariates: Mapping[str, float] | None = None,
    vshale_cutoff: float = cal.VSHALE_CUTOFF,
    sw_cutoff: float = cal.SW_CUTOFF,
    block_m: float = 10.0,
    hydrocarbon_facies: str | None = None,
) -> dict[str, Any]:
    """Blind test of a scenario at one well; returns logs and the confusion summary."""
    logs = read_well(well_path, required=("vp", "vs", "density", "sw"))
    notes = list(logs.notes)
    if "vshale" in logs.curves:
        vsh = logs.curves["vshale"]
    elif "gr" in logs.curves:
        gr = logs.curves["gr"]
        lo, hi = np.nanpercentile(gr, GR_PERCENTILES)
        vsh = cal.vshale_from_gamma_ray(gr, float(lo), float(hi))
        notes.append(f"Vshale from gamma ray with clean {lo:.0f} API and shale {hi:.0f} API "
                     f"(percentiles {GR_PERCENTILES[0]:g} and {GR_PERCENTILES[1]:g})")
    else:
        raise ValueError(
            f"{Path(well_path).name}: calibration needs a shale-volume (VSH, VCL) or gamma-ray "
            "(GR) curve to tell shale from sand"
        )
    shale, brine, hc = _facies_roles(scenario, hydrocarbon_facies)
    cutoff = cal.facies_from_cutoffs(vsh, logs.curves["sw"], shale=shale, brine_sand=brine,
                                     hydrocarbon_sand=hc, vshale_cutoff=vshale_cutoff,
                                     sw_cutoff=sw_cutoff)
    z = logs.depth
    vp, vs, rho = (logs.curves[c] for c in ("vp", "vs", "density"))
    trend = cal.fit_shale_trend(z, vp, vs, rho, cutoff == shale)
    attrs = cal.well_attributes(z, vp, vs, rho, trend, model.attributes)
    blocked = cal.block_logs(z, attrs, block_m) if block_m > 0 else attrs
    cov_values, assumed = well_covariates(scenario, logs, covariates or {})
    covs = {c: np.full(z.size, cov_values[c]) for c in model.axes}
    res = model.classify(blocked, covs)
    labels = np.array(list(model.facies) + ["unclassified"])
    predicted = labels[np.where(res.most_likely >= 0, res.most_likely, len(model.facies))]
    conf = cal.confusion(cutoff, predicted, list(model.facies))
    # Cut-offs cannot tell oil from gas: also score shale / brine sand / hydrocarbon sand.
    group = {f.name: ("hydrocarbon sand" if f.hydrocarbon else f.name)
             for f in scenario.geology.facies}
    grouped_labels = list(dict.fromkeys(group.values()))
    grouped = cal.confusion(np.array([group.get(x, "") for x in cutoff]),
                            np.array([group.get(x, "") for x in predicted]), grouped_labels)
    return {
        "well": logs.name,
        "location": logs.location,
        "covariates": cov_values,
        "assumed": assumed,
        "notes": notes,
        "cutoffs": {"vshale": vshale_cutoff, "sw": sw_cutoff, "block_m": block_m},
        "shale_trend": trend._asdict(),
        "confusion": {
            "labels": list(conf.labels),
            "matrix": conf.matrix.tolist(),
            "recall": [None if np.isnan(v) else float(v) for v in conf.recall],
            "precision": [None if np.isnan(v) else float(v) for v in conf.precision],
            "accuracy": conf.accuracy,
            "n_samples": conf.n_samples,
        },
        "grouped_confusion": {
            "labels": list(grouped.labels),
            "matrix": grouped.matrix.tolist(),
            "accuracy": grouped.accuracy,
        },
        "logs": {
            "depth_m": z,
            "vp": vp,
            "vs": vs,
            "density": rho,
            "vshale": vsh,
            "sw": logs.curves["sw"],
            "facies_cutoff": cutoff,
            "facies_predicted": predicted,
            "attributes": blocked,
            "posterior": res.posterior,
        },
    }
