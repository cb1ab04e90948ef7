"""``porecast sensitivity``: tornado charts and first-order indices of prospect risk.

The maps are drawn from the bundled example scenario's own forward model (each
cell the attributes of a known facies at its covariates). The checks: the base
case equals what ``porecast classify`` reports for the same prospects (one chain,
not a second copy), a swing recomputed by hand through the service gives the
number in the chart, the bars are sorted by the size of the swing, and the
first-order indices rank the burial covariates first and agree with the
estimator called by hand.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from porecast.cli import main
from porecast.io import Grid, GridData, write_npz
from porecast.physics import forward
from porecast.physics.scenario import default_scenario, validate_scenario
from porecast.services import classification as cls
from porecast.services import sensitivity as sens
from porecast.services.run_execution import prospect_risks

REALISATIONS = 60
COVS = ("net_uplift_m", "present_depth_m", "gradient_c_per_km")


@pytest.fixture(scope="module")
def maps_folder(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sens")
    sc = validate_scenario(default_scenario())
    ny, nx = 14, 18
    rng = np.random.default_rng(8)
    cols, rows = np.meshgrid(np.arange(nx), np.arange(ny))
    maps = {"net_uplift_m": 1100.0 * cols / (nx - 1) + 50.0,
            "present_depth_m": 1450.0 + 1250.0 * rows / (ny - 1),
            "gradient_c_per_km": np.full((ny, nx), 33.0)}
    # Gas sand in the north-west corner, shale and brine sand elsewhere.
    truth = np.where((cols < 7) & (rows < 6), 3, rng.choice([0, 1], (ny, nx)))
    nodes = np.stack([maps["present_depth_m"].ravel(), maps["net_uplift_m"].ravel(),
                      maps["gradient_c_per_km"].ravel(), np.zeros(ny * nx)], -1)
    res = forward.simulate(sc, realisations=2, node_values=nodes)
    picked = res.samples[np.arange(ny * nx), truth.ravel(), 0]
    grid = Grid(kind="map", shape=(ny, nx), x0=0.0, y0=0.0, dx=50.0, dy=50.0)
    write_npz(folder / "attrs.npz", GridData(grid.with_attributes(("intercept", "gradient")), {
        "intercept": picked[:, 0].reshape(ny, nx), "gradient": picked[:, 1].reshape(ny, nx)}))
    for name, arr in maps.items():
        write_npz(folder / f"{name}.npz", GridData(grid.with_attributes((name,)), {name: arr}))
    prospects = [{"name": "corner", "outline": [[0, 0], [330, 0], [330, 280], [0, 280]]},
                 {"name": "flank", "outline": [[500, 300], [850, 300], [850, 650], [500, 650]]}]
    (folder / "prospects.json").write_text(json.dumps(prospects))
    (folder / "scenario.json").write_text(json.dumps(default_scenario()))
    return folder


def _args(folder):
    out = ["--attributes", f"intercept={folder / 'attrs.npz'}",
           f"gradient={folder / 'attrs.npz'}"]
    for name in COVS:
        out += ["--covariate", f"{name}={folder / (name + '.npz')}"]
    return out + ["--prospects", str(folder / "prospects.json"),
                  "--realisations", str(REALISATIONS), "--quiet"]


@pytest.mark.slow
def test_tornado_matches_classify_and_a_hand_recomputed_swing(maps_folder, tmp_path):
    folder = maps_folder
    out = tmp_path / "sens"
    rc = main(["sensitivity", str(folder / "scenario.json"), *_args(folder), "--out", str(out)])
    assert rc == 0
    doc = json.loads((out / "sensitivity.json").read_text())
    html = (out / "tornado.html").read_text()
    assert "corner" in html and "expected hydrocarbon area" in html

    sc = validate_scenario(default_scenario())
    n_inputs = len(forward.uncertain_inputs(sc))
    assert len(doc["inputs"]) == n_inputs
    assert doc["n_evaluations"] == 2 * n_inputs + 1  # one chain run per distinct case
    for name in ("corner", "flank"):
        for outcome in sens.OUTCOMES:
            swings = doc["tornado"][name][outcome]["swings"]
            assert len(swings) == n_inputs
            sizes = [abs(s["outcome_high"] - s["outcome_low"]) for s in swings]
            assert sizes == sorted(sizes, reverse=True)
    assert set(doc["indices"]) == {"oil sand", "gas sand"}
    # The gas-sand corner carries hydrocarbon area; the flank (shale, brine) little.
    corner = doc["tornado"]["corner"]["expected_area_km2"]
    flank = doc["tornado"]["flank"]["expected_area_km2"]
    assert corner["base"] > 0.05 > flank["base"]

    # Base case = the classify command's numbers for the same prospects.
    rc = main(["classify", str(folder / "scenario.json"), *_args(folder), "--out",
               str(tmp_path / "cls")])
    assert rc == 0
    summary = json.loads((tmp_path / "cls" / "summary.json").read_text())
    by_name = {p["name"]: p for p in summary["prospects"]}
    for name in ("corner", "flank"):
        assert doc["tornado"][name]["expected_area_km2"]["base"] == pytest.approx(
            by_name[name]["expected_area_m2"] / 1e6, rel=1e-12)
        assert doc["tornado"][name]["probability_hc"]["base"] == pytest.approx(
            by_name[name]["probability_hc"], rel=1e-12)

    # The largest swing of the corner, recomputed through the chain by hand.
    top = corner["swings"][0]
    grid, values = cls.map_attributes(
        type("Need", (), {"attributes": ("intercept", "gradient"), "axes": COVS}),
        {"intercept": folder / "attrs.npz", "gradient": folder / "attrs.npz"})
    covs = {c: cls.read_map(folder / f"{c}.npz", c).values[c] for c in COVS}
    model = cls.train(forward.simulate(sc, realisations=REALISATIONS,
                                       overrides={top["path"]: top["low_value"]}), sc)
    post = cls.classify_map(model, values, covs)["posterior"]
    rows = prospect_risks(post, grid, list(model.hydrocarbon),
                          json.loads((folder / "prospects.json").read_text()), seed=sc.seed,
                          correlation_length_m=None)
    assert rows[0]["expected_area_km2"] == pytest.approx(top["outcome_low"], rel=1e-12)


def test_first_order_indices_from_the_run_sample():
    # One forward run with its drawn inputs kept; P(hydrocarbon) of every gas- and
    # oil-sand realisation against them. Common practice (no source): burial
    # history -- depth, uplift, gradient -- is the first-order control on sand
    # properties through compaction and cementation, so over the node grid the
    # three burial covariates must rank above every rock or fluid input.
    sc = validate_scenario(default_scenario())
    res = forward.simulate(sc, realisations=40, keep_inputs=True)
    model = cls.train(res, sc)
    out = sens.realisation_indices(res, model, seed=sc.seed)
    assert set(out) == {"oil sand", "gas sand"}
    for name, entry in out.items():
        j = model.facies.index(name)
        assert entry["n_samples"] == res.samples.shape[0] * 40
        idx = entry["indices"]
        print(name, {k.split(".")[-1]: round(v["value"], 3) for k, v in list(idx.items())[:6]})
        top3 = list(idx)[:3]
        assert set(top3) == {f"burial: {c}" for c in
                             ("present_depth_m", "net_uplift_m", "gradient_c_per_km")}
        # Inputs the facies never reads, or that are constant, are left out.
        assert "geology.cap_rock.porosity_surface#facies" not in idx
        assert "burial: overpressure_mpa" not in idx
        if name == "gas sand":
            assert "rockphysics.fluids.oil_api" not in idx
        values = np.array([v["value"] for v in idx.values()])
        assert values.min() > -0.05 and values.sum() < 1.0
        for v in idx.values():
            assert v["ci_low"] <= v["value"] <= v["ci_high"]
        # Same numbers as the estimator called directly on the kept arrays.
        direct = sens.sensitivity.first_order_indices(
            {"g": res.fields["gradient_c_per_km"][:, j, :].ravel()},
            _p_hc(res, model)[:, j, :].ravel(), seed=sc.seed)
        assert direct["g"].value == pytest.approx(
            idx["burial: gradient_c_per_km"]["value"], rel=1e-12)
    with pytest.raises(ValueError, match="keep_inputs=True"):
        sens.realisation_indices(forward.simulate(sc, realisations=5), model, seed=1)
    with pytest.raises(ValueError, match="at least one prospect"):
        sens.prospect_sensitivity(sc, {}, None, None, [], realisations=40)


def _p_hc(res, model):
    """P(hydrocarbon) of every realisation classified at its node (by hand)."""
    n_nodes, k, n, d = res.samples.shape
    covs = {c: np.repeat(res.node_values[:, forward.COVARIATES.index(c)], k * n)
            for c in model.axes}
    post = model.classify(res.samples.reshape(-1, d), covs).posterior
    hc = np.array(model.hydrocarbon, dtype=bool)
    return post[:, hc].sum(axis=1).reshape(n_nodes, k, n)
