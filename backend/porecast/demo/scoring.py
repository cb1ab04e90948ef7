"""Score the demo scenarios against the hidden truth of :mod:`porecast.demo.synthetic`.

Each scenario is run exactly as a real run would be (its own node grid, seed and
realisations through :func:`porecast.physics.forward.simulate`), trained with
:func:`porecast.services.classification.train` and applied to the demo's
attribute maps with :func:`porecast.services.classification.classify_map`,
with the covariate maps the PDFs vary with. The most-likely facies map is then
compared node by node with the truth:

``accuracy``
    fraction of map nodes whose most-likely facies is the true one;
``hydrocarbon_accuracy``
    fraction of nodes where "hydrocarbon facies or not" is right;
``hydrocarbon_found``
    fraction of the true hydrocarbon nodes predicted as a hydrocarbon facies;
``flank_accuracy``
    ``accuracy`` on the uplifted flank (net uplift above :data:`FLANK_UPLIFT_M`).

Per structural high, the expected hydrocarbon area (sum of the posterior
probability of the hydrocarbon facies over the closure's nodes times the node
area) is set beside the true one.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any, NamedTuple

import numpy as np

from ..physics import forward
from ..physics.scenario import COVARIATES, validate_scenario
from ..services import classification
from . import synthetic

#: Net uplift above which a node counts as the uplifted flank, m.
FLANK_UPLIFT_M = 1000.0

Progress = Callable[[str], None]


class ScenarioScore(NamedTuple):
    """How one scenario's classification compares with the hidden truth."""

    key: str
    name: str
    accuracy: float
    hydrocarbon_accuracy: float
    hydrocarbon_found: float
    flank_accuracy: float
    prospects: dict[str, dict[str, float]]
    """High name -> ``true_km2`` and ``expected_km2`` hydrocarbon area in its closure."""
    most_likely: np.ndarray
    """Most-likely facies code per map node (-1 unclassified), shape (ny, nx)."""
    n_clamped: int
    """Map nodes whose covariates lay outside the scenario's nodes (clamped)."""


def score_scenario(key: str, doc: Mapping[str, Any], data: synthetic.DemoData) -> ScenarioScore:
    """Run, train, classify and score one scenario document against the truth."""
    sc = validate_scenario(dict(doc))
    model = classification.train(forward.simulate(sc), sc)
    covs = {c: np.asarray(getattr(data.maps, c)) for c in COVARIATES}
    out = classification.classify_map(model, data.attributes, {c: covs[c] for c in model.axes})
    ml = np.asarray(out["most_likely"])
    truth = data.truth.facies
    hc_flags = np.array(model.hydrocarbon)
    true_hc = np.array(synthetic.HYDROCARBON)[truth]
    pred_hc = np.where(ml >= 0, hc_flags[np.maximum(ml, 0)], False)
    flank = data.maps.net_uplift_m > FLANK_UPLIFT_M
    p_hc = np.nansum(np.asarray(out["posterior"])[..., hc_flags], axis=-1)
    node_km2 = synthetic.SPACING_M**2 / 1e6
    prospects = {}
    for k, high in enumerate(synthetic.HIGHS):
        inside = data.truth.closures == k
        prospects[high.name] = {
            "true_km2": float(np.count_nonzero(true_hc & inside) * node_km2),
            "expected_km2": float(p_hc[inside].sum() * node_km2),
        }
    return ScenarioScore(
        key=key,
        name=sc.name,
        accuracy=float(np.mean(ml == truth)),
        hydrocarbon_accuracy=float(np.mean(pred_hc == true_hc)),
        hydrocarbon_found=float(np.mean(pred_hc[true_hc])) if true_hc.any() else float("nan"),
        flank_accuracy=float(np.mean((ml == truth)[flank])) if flank.any() else float("nan"),
        prospects=prospects,
        most_likely=ml,
        n_clamped=int(out["n_clamped"]),
    )


def score_scenarios(
    data: synthetic.DemoData, *, progress: Progress | None = None
) -> list[ScenarioScore]:
    """Scores of every demo scenario, in the order of ``data.scenarios``.

    ``progress(stage)`` is called after each scenario (stage ``"scoring <key>"``).
    """
    out = []
    for key, doc in data.scenarios.items():
        out.append(score_scenario(key, doc, data))
        if progress is not None:
            progress(f"scoring {key}")
    return out


def _pct(value: float) -> str:
    return "   n/a" if not np.isfinite(value) else f"{100.0 * value:5.1f}%"


def score_table(scores: list[ScenarioScore]) -> str:
    """Plain-text table of the scores (percentages), one row per scenario."""
    width = max(len(s.name) for s in scores)
    head = f"{'scenario':<{width}}   facies   hc y/n  hc found    flank"
    lines = [head, "-" * len(head)]
    for s in scores:
        lines.append(
            f"{s.name:<{width}}   {_pct(s.accuracy)}   {_pct(s.hydrocarbon_accuracy)}"
            f"    {_pct(s.hydrocarbon_found)}   {_pct(s.flank_accuracy)}"
        )
    lines.append("facies: most-likely facies right; hc y/n: hydrocarbon or not right;")
    lines.append(f"hc found: true hydrocarbon nodes found; flank: facies right where net uplift "
                 f"> {FLANK_UPLIFT_M:g} m")
    highs = [h.name for h in synthetic.HIGHS]
    lines.append("")
    lines.append("hydrocarbon area per closure, km2 (true vs expected from the posterior):")
    lines.append(f"{'':<{width}}  " + "  ".join(f"{h:>14}" for h in highs))
    truth_row = "  ".join(f"{scores[0].prospects[h]['true_km2']:14.2f}" for h in highs)
    lines.append(f"{'hidden truth':<{width}}  {truth_row}")
    for s in scores:
        row = "  ".join(f"{s.prospects[h]['expected_km2']:14.2f}" for h in highs)
        lines.append(f"{s.name:<{width}}  {row}")
    return "\n".join(lines)


def scores_document(scores: list[ScenarioScore], data: synthetic.DemoData) -> dict[str, Any]:
    """JSON form of the scores (without the maps)."""
    return {
        "kind": "porecast.demo.scores",
        "seed": data.seed,
        "n_map_nodes": int(data.truth.facies.size),
        "flank_uplift_m": FLANK_UPLIFT_M,
        "definitions": {
            "accuracy": "fraction of map nodes whose most-likely facies is the true facies",
            "hydrocarbon_accuracy": "fraction of map nodes where hydrocarbon-or-not is right",
            "hydrocarbon_found": "fraction of true hydrocarbon nodes predicted as hydrocarbon",
            "flank_accuracy": f"accuracy where net uplift > {FLANK_UPLIFT_M:g} m",
            "prospects": "hydrocarbon area in each closure, km2: true, and expected from the "
                         "posterior probability of the hydrocarbon facies",
        },
        "scenarios": [
            {
                "key": s.key,
                "name": s.name,
                "accuracy": round(s.accuracy, 4),
                "hydrocarbon_accuracy": round(s.hydrocarbon_accuracy, 4),
                "hydrocarbon_found": round(s.hydrocarbon_found, 4),
                "flank_accuracy": round(s.flank_accuracy, 4),
                "prospects": {k: {n: round(v, 3) for n, v in p.items()}
                              for k, p in s.prospects.items()},
                "n_clamped": s.n_clamped,
            }
            for s in scores
        ],
    }
