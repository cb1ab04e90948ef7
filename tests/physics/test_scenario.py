"""Scenario schema: the bundled example validates, bad input names its field."""

import copy
import json

import numpy as np
import pytest
from scipy import stats

from porecast.physics import distributions
from porecast.physics.scenario import (
    ScenarioValidationError,
    default_scenario,
    load_scenario,
    scenario_hash,
    validate_scenario,
    validate_section,
)


def _errors(doc):
    with pytest.raises(ScenarioValidationError) as info:
        validate_scenario(doc)
    return {e["loc"]: e["msg"] for e in info.value.errors}


def test_example_scenario_validates():
    sc = validate_scenario(default_scenario())
    assert sc.schema_version == 1
    assert [f.name for f in sc.geology.facies] == ["shale", "brine sand", "oil sand", "gas sand"]


def test_negative_grain_size_names_field_and_range():
    doc = default_scenario()
    doc["geology"]["sand"]["grain_size_mm"] = -0.2
    errs = _errors(doc)
    assert "geology.sand.grain_size_mm" in errs
    assert "between 0 and 5 mm" in errs["geology.sand.grain_size_mm"]


def test_gradient_of_500_is_refused_with_range():
    doc = default_scenario()
    doc["burial"]["covariates"]["gradient_c_per_km"]["nodes"] = [30.0, 500.0]
    errs = _errors(doc)
    msg = errs["burial.covariates.gradient_c_per_km"]
    assert "500 degC/km" in msg and "between 5 and 120 degC/km" in msg


def test_porosity_above_critical_porosity_is_refused():
    doc = default_scenario()
    doc["geology"]["sand"]["porosity_surface"] = 0.45
    errs = _errors(doc)
    assert "critical porosity" in errs["geology.sand.porosity_surface"]


def test_normal_law_reaching_negative_values_is_refused():
    doc = default_scenario()
    doc["geology"]["sand"]["grain_size_mm"] = {"kind": "normal", "mean": 0.2, "sd": 0.1}
    errs = _errors(doc)
    assert "mean +/- 4 sd" in errs["geology.sand.grain_size_mm"]


def test_proportions_must_add_up():
    doc = default_scenario()
    doc["geology"]["facies"][0]["proportion"] = 0.9
    assert "add up to 1" in _errors(doc)["geology.facies"]


def test_unknown_field_is_refused():
    doc = default_scenario()
    doc["rockphysics"]["colour"] = "blue"
    assert "rockphysics.colour" in _errors(doc)


def test_validate_section_prefixes_path():
    section = copy.deepcopy(default_scenario()["burial"])
    section["surface_temperature_c"] = 90
    with pytest.raises(ScenarioValidationError) as info:
        validate_section("burial", section)
    assert info.value.errors[0]["loc"] == "burial.surface_temperature_c"


def test_hash_is_stable_and_sensitive():
    a = default_scenario()
    b = json.loads(json.dumps(a))
    assert scenario_hash(a) == scenario_hash(b)
    b["seed"] += 1
    assert scenario_hash(a) != scenario_hash(b)


def test_load_scenario_reports_bad_json(tmp_path):
    path = tmp_path / "bad.json"
    path.write_text('{"name": ')
    with pytest.raises(ScenarioValidationError, match="not valid JSON"):
        load_scenario(str(path))


@pytest.mark.parametrize(
    ("kind", "params", "reference"),
    [
        ("normal", {"mean": 2.0, "sd": 0.5}, stats.norm(2.0, 0.5)),
        (
            "truncated_normal",
            {"mean": 0.3, "sd": 0.1, "low": 0.2, "high": 0.5},
            stats.truncnorm(-1.0, 2.0, loc=0.3, scale=0.1),
        ),
        ("uniform", {"low": 1.0, "high": 3.0}, stats.uniform(1.0, 2.0)),
        ("triangular", {"low": 0.0, "mode": 1.0, "high": 4.0}, stats.triang(0.25, 0.0, 4.0)),
        ("lognormal", {"median": 0.25, "sd_log": 0.3}, stats.lognorm(0.3, scale=0.25)),
    ],
)
def test_sampling_matches_scipy_distribution(kind, params, reference):
    # Reference: scipy.stats laws. A Kolmogorov-Smirnov test on 20 000 draws
    # rejects a wrong law (or wrong parametrisation) with p << 1e-3.
    rng = np.random.default_rng(7)
    draws = distributions.sample(kind, params, rng, 20_000)
    assert stats.kstest(draws, reference.cdf).pvalue > 1e-3
    assert distributions.mean(kind, params) == pytest.approx(reference.mean(), rel=1e-9)
    assert distributions.quantile(kind, params, 0.9) == pytest.approx(reference.ppf(0.9), rel=1e-9)


def test_streams_are_independent_and_reproducible():
    a1 = distributions.stream_for(5, "geology.sand.grain_size_mm").random(4)
    a2 = distributions.stream_for(5, "geology.sand.grain_size_mm").random(4)
    b = distributions.stream_for(5, "geology.sand.coating_fraction").random(4)
    np.testing.assert_array_equal(a1, a2)
    assert not np.allclose(a1, b)
