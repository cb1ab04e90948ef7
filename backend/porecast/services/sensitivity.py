"""Sensitivity of the prospect risk numbers to each uncertain input of a scenario.

One evaluation of the outcome is the whole chain with some inputs fixed: the Monte
Carlo forward model (``overrides``), the facies PDFs trained from it, the
classification of the attribute maps and the risk numbers of every prospect
outline (:func:`porecast.services.run_execution.prospect_risks`, the same numbers a
classify run reports). Every evaluation uses the scenario seed, so the draws of the
inputs that are not fixed, and the probability-field realisations of the risk, are
common random numbers: a swing measures the input, not sampling noise.

* Tornado (:func:`porecast.physics.sensitivity.tornado_from_distributions`): each
  input at its 10th and then its 90th percentile (by default), 2 x inputs + 1
  evaluations, one chart per prospect and outcome (probability of hydrocarbon,
  expected hydrocarbon area).
* First-order indices (:func:`porecast.physics.sensitivity.first_order_indices`)
  where the sample allows, from the base run's own Monte Carlo sample
  (:func:`realisation_indices`): for every realisation of a hydrocarbon facies, its
  probability of being classified as hydrocarbon by the trained PDFs at its own
  location, against the values its inputs were drawn with. They answer "which input
  decides whether a hydrocarbon sand looks like one", over the whole node grid.
  (An outer Monte Carlo loop over runs with every input fixed was tried and
  dropped: with all inputs fixed, each run's PDFs shrink to the seismic noise and
  the risk numbers jump between runs for reasons no single input explains; all
  indices came out near zero.)

Nothing here touches the web or the database.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np

from ..physics import forward, sensitivity
from ..physics.scenario import Scenario, dist_params
from . import classification as cls
from .run_execution import prospect_risks

#: Outcomes a tornado is drawn for (keys of a prospect's risk entry) and their units.
OUTCOMES = {"probability_hc": "fraction", "expected_area_km2": "km2"}

Progress = Callable[[int, int, str], None]

#: Bar colours of the low and high swings: blue and vermillion of the Okabe-Ito
#: colour-blind-safe set, the set frontend/js/palette.js takes its colours from.
SWING_COLOURS = ("#0072B2", "#D55E00")


def input_distributions(sc: Scenario) -> dict[str, tuple[str, dict[str, float]]]:
    """Every uncertain input of the scenario: field path -> (kind, parameters)."""
    return {path: (d.kind, dist_params(d)) for path, d in forward.uncertain_inputs(sc).items()}


def prospect_sensitivity(
    sc: Scenario,
    attributes: Mapping[str, np.ndarray],
    grid: Any,
    covariates: Mapping[str, np.ndarray] | None,
    prospects: Sequence[Mapping[str, Any]],
    *,
    realisations: int | None = None,
    low_q: float = 0.1,
    high_q: float = 0.9,
    fix_others: str | None = None,
    correlation_length_m: float | None = None,
    progress: Progress | None = None,
) -> dict[str, Any]:
    """Tornado charts (and first-order indices) of every prospect's risk numbers.

    Parameters
    ----------
    sc : Scenario
        Validated scenario.
    attributes : mapping name -> (ny, nx) array
        Attribute maps the scenario classifies on.
    grid : porecast.io.Grid
        Geometry of the maps (cell centres for the prospect outlines).
    covariates : mapping name -> (ny, nx) array, optional
        Covariate maps the PDFs vary with.
    prospects : sequence of {"name", "outline", ...}
        Prospect outlines in map coordinates (m).
    realisations : int, optional
        Monte Carlo realisations per facies and node in each evaluation.
    low_q, high_q : float
        Quantiles of each input's distribution giving its low and high swing.
    fix_others : {None, "mean", "median"}
        Leave the other inputs uncertain (None) or fix them in every evaluation.
    correlation_length_m : float, optional
        Correlation length of the probability fields of the risk numbers.
    progress : callable(done, total, label), optional

    Returns
    -------
    dict
        ``inputs`` (path, kind, low and high value per input), ``tornado``
        (per prospect and outcome: base and swings, largest first), ``indices``
        (:func:`realisation_indices` of the base run), ``n_evaluations``.
    """
    if not prospects:
        raise ValueError("a sensitivity run needs at least one prospect outline")
    dists = input_distributions(sc)
    if not dists:
        raise ValueError("the scenario has no uncertain input to swing")
    names = [str(p["name"]) for p in prospects]
    total = 2 * len(dists) + 1
    done = [0]
    cache: dict[tuple[tuple[str, float], ...], dict[str, dict[str, float]]] = {}
    base_run: dict[str, Any] = {}

    def evaluate(overrides: dict[str, float], label: str) -> dict[str, dict[str, float]]:
        key = tuple(sorted(overrides.items()))
        if key not in cache:
            result = forward.simulate(sc, realisations=realisations, overrides=overrides,
                                      keep_inputs=not overrides)
            model = cls.train(result, sc)
            if not overrides:
                base_run.update(result=result, model=model)
            res = cls.classify_map(model, attributes, covariates)
            rows = prospect_risks(res["posterior"], grid, list(model.hydrocarbon), prospects,
                                  seed=sc.seed, correlation_length_m=correlation_length_m)
            for row in rows:
                if "error" in row:
                    raise ValueError(f"prospect {row['name']}: {row['error']}")
            cache[key] = {row["name"]: {o: float(row[o]) for o in OUTCOMES} for row in rows}
            if len(cache[key]) != len(names):
                raise ValueError("prospect names must be unique")
            done[0] += 1
            if progress is not None:
                progress(done[0], total, label)
        return cache[key]

    tornado: dict[str, dict[str, Any]] = {name: {} for name in names}
    inputs_out: list[dict[str, Any]] = []
    for name in names:
        for outcome in OUTCOMES:
            t = sensitivity.tornado_from_distributions(
                lambda o, name=name, outcome=outcome: evaluate(o, "tornado")[name][outcome],
                dists, low_q=low_q, high_q=high_q, fix_others=fix_others)
            tornado[name][outcome] = {
                "base": t.base, "unit": OUTCOMES[outcome],
                "swings": [s._asdict() for s in t.swings]}
    for path, (kind, params) in dists.items():
        low, high = sensitivity.swing_values(kind, params, low_q, high_q)
        inputs_out.append({"path": path, "kind": kind, "low_value": low, "high_value": high})

    if "result" not in base_run:  # fix_others: the base case had inputs fixed
        result = forward.simulate(sc, realisations=realisations, keep_inputs=True)
        base_run.update(result=result, model=cls.train(result, sc))
    indices = realisation_indices(base_run["result"], base_run["model"], seed=sc.seed)
    return {
        "inputs": inputs_out,
        "low_quantile": low_q,
        "high_quantile": high_q,
        "fix_others": fix_others,
        "realisations": realisations,
        "tornado": tornado,
        "indices": indices,
        "n_evaluations": len(cache),
    }


def realisation_indices(result: forward.ForwardResult, model: cls.FaciesModel, *,
                        seed: int) -> dict[str, Any]:
    """First-order indices of each hydrocarbon realisation's P(hydrocarbon), from one run.

    ``result`` must come from ``simulate(keep_inputs=True)``. Every realisation of a
    hydrocarbon facies is classified by ``model`` at its node's covariates; its
    outcome is the summed posterior of the hydrocarbon facies. The inputs are the
    values each realisation was drawn with; the burial covariates enter as the
    realisation's own present depth, uplift and gradient (node value plus its
    uncertainty draw). Inputs constant over the sample are left out.

    Returns
    -------
    dict
        Per hydrocarbon facies: ``n_samples``, ``mean_probability_hc`` and
        ``indices`` (input -> S_i, standard error, interval, bins), largest first;
        or a ``note`` when the sample is too small or the outcome does not vary.
    """
    if not result.inputs:
        raise ValueError("realisation_indices needs a run made with keep_inputs=True")
    n_nodes, k, n, d = result.samples.shape
    x = result.samples.reshape(-1, d)
    covs = None
    if model.axes:
        covs = {c: np.repeat(result.node_values[:, forward.COVARIATES.index(c)], k * n)
                for c in model.axes}
    post = model.classify(x, covs).posterior.reshape(n_nodes, k, n, len(model.facies))
    p_hc = post[..., np.array(model.hydrocarbon, dtype=bool)].sum(axis=-1)
    out: dict[str, Any] = {}
    for j, name in enumerate(model.facies):
        if not model.hydrocarbon[j]:
            continue
        y = p_hc[:, j, :].ravel()
        if y.size < sensitivity.MIN_SAMPLES:
            out[name] = {"note": f"{y.size} realisations; indices need at least "
                                 f"{sensitivity.MIN_SAMPLES}"}
            continue
        if np.var(y) == 0.0:
            out[name] = {"note": "P(hydrocarbon) is the same for every realisation"}
            continue
        inputs: dict[str, np.ndarray] = {}
        for c in forward.COVARIATES:
            v = result.fields[c][:, j, :].ravel()
            if np.ptp(v) > 0:
                inputs[f"burial: {c}"] = v
        for path, values in result.inputs.items():
            if path.startswith("burial.covariates."):
                continue  # carried by the realisation's own covariate values above
            v = values[:, j, :].ravel()
            if not np.isnan(v).any() and np.ptp(v) > 0:
                inputs[path] = v
        est = sensitivity.first_order_indices(inputs, y, seed=seed)
        ranked = sorted(est.items(), key=lambda kv: -kv[1].value)
        out[name] = {"n_samples": int(y.size), "mean_probability_hc": float(y.mean()),
                     "indices": {p: e._asdict() for p, e in ranked}}
    return out


def _short(path: str) -> str:
    """Readable label of an input path, e.g. ``sand: coating fraction``."""
    parts = path.split(".")
    if parts[-1] == "uncertainty":
        parts = parts[:-1]
    head = parts[-2] if len(parts) > 1 else ""
    head = {"covariates": "burial", "facies": "facies"}.get(head, head)
    return f"{head}: {parts[-1].replace('_', ' ')}" if head else parts[-1].replace("_", " ")


def tornado_figure(doc: Mapping[str, Any], max_bars: int = 12) -> Any:
    """Plotly figure of the tornado charts of :func:`prospect_sensitivity` output.

    One panel per prospect and outcome: for each input (largest swing on top) a bar
    from the base outcome to the outcome with the input at its low value and one to
    its high value.
    """
    import plotly.graph_objects as go
    from plotly.subplots import make_subplots

    low_colour, high_colour = SWING_COLOURS
    panels = [(name, outcome) for name in doc["tornado"] for outcome in OUTCOMES]
    units = {"fraction": "", "km2": " (km²)"}
    what = {"probability_hc": "probability of hydrocarbon",
            "expected_area_km2": "expected hydrocarbon area"}
    titles = [f"{name}: {what[o]}{units[OUTCOMES[o]]}" for name, o in panels]
    fig = make_subplots(rows=len(panels), cols=1, subplot_titles=titles, vertical_spacing=0.08)
    for row, (name, outcome) in enumerate(panels, start=1):
        t = doc["tornado"][name][outcome]
        swings = list(reversed(t["swings"][:max_bars]))  # plotly draws bottom-up
        labels = [_short(s["path"]) for s in swings]
        base = t["base"]
        for key, colour, side in (("outcome_low", low_colour, "low"),
                                  ("outcome_high", high_colour, "high")):
            fig.add_trace(go.Bar(
                y=labels, x=[s[key] - base for s in swings], base=base, orientation="h",
                marker_color=colour, name=f"input at its {side} value",
                showlegend=row == 1, legendgroup=side,
                customdata=[[s["low_value"] if side == "low" else s["high_value"], s[key]]
                            for s in swings],
                hovertemplate="%{y}<br>input %{customdata[0]:.4g}<br>outcome %{customdata[1]:.4g}"
                "<extra></extra>"), row=row, col=1)
        fig.add_vline(x=base, line_color="#444444", line_width=1, row=row, col=1)
    fig.update_layout(barmode="overlay", height=260 * len(panels) + 80, template="simple_white",
                      title=f"Sensitivity of the risk numbers: {doc.get('scenario', '')} "
                      f"(inputs at their P{int(round(100 * (1 - doc['low_quantile'])))} "
                      f"and P{int(round(100 * (1 - doc['high_quantile'])))} values)",
                      legend={"orientation": "h", "y": -0.05},
                      margin={"l": 220, "r": 30, "t": 80, "b": 60})
    return fig
