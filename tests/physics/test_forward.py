"""Monte Carlo forward model: shapes, reproducibility, and facts of the trade."""

import copy

import numpy as np
import pytest

from porecast.physics import avo, forward
from porecast.physics.scenario import COVARIATES, default_scenario, validate_scenario


@pytest.fixture(scope="module")
def example():
    return validate_scenario(default_scenario())


def _single_node(doc, depth, uplift, gradient):
    doc = copy.deepcopy(doc)
    covs = doc["burial"]["covariates"]
    covs["present_depth_m"] = {"nodes": [depth], "uncertainty": 0.0}
    covs["net_uplift_m"] = {"nodes": [uplift], "uncertainty": 0.0}
    covs["gradient_c_per_km"] = {"nodes": [gradient], "uncertainty": 0.0}
    return doc


def _clean_quartz_sand(doc):
    """Clean, fine, uncoated quartz sand, gas under a soft shale (illustrative)."""
    doc = copy.deepcopy(doc)
    doc["geology"]["sand"].update(
        quartz_fraction=0.95, clay_fraction=0.02, grain_size_mm=0.2, coating_fraction=0.02
    )
    return doc


def test_shapes_and_fields(example):
    res = forward.simulate(example, realisations=50)
    n_nodes = int(np.prod([len(getattr(example.burial.covariates, c).nodes) for c in COVARIATES]))
    assert res.samples.shape == (n_nodes, 4, 50, 2)
    assert set(res.fields) == set(forward.FIELDS)
    assert res.grid_shape == (4, 4, 3, 1)
    for name, arr in res.fields.items():
        assert arr.shape == (n_nodes, 4, 50), name
        assert np.all(np.isfinite(arr)), name


def test_same_seed_reproduces_bit_for_bit(example):
    a = forward.simulate(example, realisations=40)
    b = forward.simulate(example, realisations=40)
    np.testing.assert_array_equal(a.samples, b.samples)
    other = validate_scenario({**default_scenario(), "seed": example.seed + 1})
    c = forward.simulate(other, realisations=40)
    assert not np.array_equal(a.samples, c.samples)


def test_physical_ranges(example):
    res = forward.simulate(example, realisations=100)
    f = res.fields
    assert np.all((f["porosity"] > 0) & (f["porosity"] <= example.rockphysics.critical_porosity))
    assert np.all(f["k_dry"] <= f["k_mineral"])
    assert np.all(f["k_sat"] >= f["k_dry"])
    # Gas lowers Vp in a porous sand (Gassmann, common practice); nodes whose
    # sand is cemented shut (porosity below 5 %) have no fluid effect to show.
    shale, brine, oil, gas = range(4)
    porous = f["porosity"][:, brine].mean(-1) > 0.05
    assert porous.sum() > 10
    assert np.all(f["vp"][porous, gas].mean(-1) < f["vp"][porous, brine].mean(-1) - 50.0)
    # Quartz cement appears only where the onset temperature was reached.
    cold = f["max_temperature_c"] < example.geology.cement_onset_c
    assert np.all(f["cement"][cold] == 0.0)
    assert np.all(f["cement"][:, shale] == 0.0)


def test_uplift_does_not_restore_porosity():
    # Same present depth and gradient: the uplifted location was buried deeper,
    # so it keeps a lower mechanical porosity (irreversible compaction).
    doc = default_scenario()
    deep = validate_scenario(_single_node(doc, 1500.0, 800.0, 25.0))
    flat = validate_scenario(_single_node(doc, 1500.0, 0.0, 25.0))
    phi_deep = forward.simulate(deep, realisations=400).fields["porosity_mechanical"][0, 1]
    phi_flat = forward.simulate(flat, realisations=400).fields["porosity_mechanical"][0, 1]
    assert phi_deep.mean() < phi_flat.mean() - 0.02


def test_uncemented_gas_sand_is_class_iii():
    # Common practice: a clean quartz sand uplifted before it ever reaches about
    # 70 degC keeps no quartz cement and, gas-filled under a soft shale, gives a
    # class III response.
    doc = _clean_quartz_sand(_single_node(default_scenario(), 1200.0, 600.0, 30.0))
    res = forward.simulate(validate_scenario(doc), realisations=2000)
    gas = res.facies.index("gas sand")
    f = res.fields
    assert f["max_temperature_c"][0, gas].max() < 70.0
    assert f["cement"][0, gas].max() == 0.0
    cls = avo.avo_class(f["intercept"][0, gas].mean(), f["gradient"][0, gas].mean())
    assert cls == "III"


def test_cemented_gas_sand_moves_to_class_i_or_iip():
    # Common practice: the same sand held for tens of Myr above 100 degC gains
    # several percent quartz cement and its response moves to class I or IIp.
    doc = _clean_quartz_sand(_single_node(default_scenario(), 2900.0, 0.0, 36.0))
    res = forward.simulate(validate_scenario(doc), realisations=2000)
    gas = res.facies.index("gas sand")
    f = res.fields
    assert f["time_above_onset_myr"][0, gas].mean() > 20.0
    assert f["temperature_c"][0, gas].mean() > 100.0
    assert 0.03 < f["cement"][0, gas].mean() < 0.20
    cls = avo.avo_class(f["intercept"][0, gas].mean(), f["gradient"][0, gas].mean())
    assert cls in ("I", "IIp")


def test_override_fixes_one_input_and_keeps_the_others(example):
    base = forward.simulate(example, realisations=60)
    fixed = forward.simulate(
        example, realisations=60, overrides={"geology.sand.coating_fraction": 1.0}
    )
    # Fully coated grains take no quartz cement (Walderhaug 1996), ...
    assert np.all(fixed.fields["cement"] == 0.0)
    # ... while inputs on other streams are untouched (common random numbers).
    np.testing.assert_array_equal(base.fields["max_depth_m"], fixed.fields["max_depth_m"])
    np.testing.assert_array_equal(base.fields["rho_fluid"], fixed.fields["rho_fluid"])


def test_progress_is_monotonic(example):
    seen = []
    forward.simulate(example, realisations=10, progress=lambda d, t, s: seen.append((d, t, s)))
    done = [d for d, _, _ in seen]
    assert done == sorted(done) and done[-1] == seen[-1][1]


def test_node_values_override(example):
    nodes = np.array([[2000.0, 300.0, 33.0, 0.0], [2500.0, 0.0, 40.0, 0.0]])
    res = forward.simulate(example, realisations=20, node_values=nodes)
    assert res.samples.shape[:2] == (2, 4)
    with pytest.raises(ValueError, match="node_values must have shape"):
        forward.simulate(example, realisations=20, node_values=np.zeros((2, 3)))


def test_statistics_match_samples(example):
    res = forward.simulate(example, realisations=30)
    stats = forward.node_statistics(res)
    first = stats[0]
    np.testing.assert_allclose(first["mean"], res.samples[0, 0].mean(axis=0))
    np.testing.assert_allclose(first["covariance"], np.cov(res.samples[0, 0], rowvar=False))
    assert first["count"] == 30


def test_fully_cemented_sand_stays_inside_the_bounds():
    # A deep, hot, long-lived node cements the sand shut; the frame must stay
    # below the Hashin-Shtrikman upper bound of its mineral (RPH section 4.1),
    # which also keeps Gassmann's k_dry <= k_mineral.
    doc = _single_node(default_scenario(), 2400.0, 1750.0, 46.0)
    res = forward.simulate(validate_scenario(doc), realisations=400)
    f = res.fields
    sands = slice(1, 4)
    assert f["porosity"][:, sands].min() < 0.01
    assert np.all(f["k_dry"] <= f["k_mineral"] * (1 + 1e-12))
    assert np.all(f["g_dry"] <= f["g_mineral"] * (1 + 1e-12))
    # Cemented-shut sand approaches quartz: Vp close to the mineral's 6.0 km/s (RPH table).
    assert 5000.0 < f["vp"][:, sands].max() < 6100.0
