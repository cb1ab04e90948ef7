"""Live previews of the scenario workspace: burial history, porosity and cement,
cross-plot ellipses, the covariate sweep, validation and input densities.

The reference values are hand calculations from the published equations
(named beside each check) on a scenario whose inputs are constants, so each
curve is one deterministic path.
"""

from __future__ import annotations

import copy
import math
from typing import Any

import numpy as np
import pytest
from scipy import integrate, stats

from porecast.physics.scenario import default_scenario
from porecast.services import previews

LOCATION = {"present_depth_m": 2000.0, "net_uplift_m": 400.0, "gradient_c_per_km": 35.0,
            "overpressure_mpa": 0.0}


def _constant_document() -> dict[str, Any]:
    """The bundled example with constant sand, cap-rock and covariate inputs."""
    doc = default_scenario()
    for cov in doc["burial"]["covariates"].values():
        cov["uncertainty"] = 0.0
    doc["geology"]["sand"] = {
        "quartz_fraction": 0.85, "clay_fraction": 0.05, "grain_size_mm": 0.25,
        "coating_fraction": 0.1, "porosity_surface": 0.39, "compaction_per_km": 0.17,
    }
    doc["geology"]["cap_rock"] = {"clay_fraction": 0.7, "porosity_surface": 0.6,
                                  "compaction_per_km": 0.51}
    return doc


def _preview(client, scenario_id: int, **body: Any):
    return client.post(f"/api/scenarios/{scenario_id}/preview", json=body)


def test_history_matches_hand_calculation(team, scenario):
    r = _preview(team["geologist"], scenario["id"], locations=[LOCATION], parts=["history"])
    assert r.status_code == 200, r.text
    h = r.json()["history"][0]
    # Hand calculation with the example template (ages 110, 80, 55, 30 Ma at depth
    # fractions 0, 0.45, 0.75, 1; uplift 30 -> 5 Ma): maximum burial 2000 + 400 m,
    # T = Ts + G z / 1000 (DESIGN.md burial model, Ts = 4 degC, G = 35 degC/km).
    assert h["ages_ma"] == [110.0, 80.0, 55.0, 30.0, 5.0, 0.0]
    np.testing.assert_allclose(h["depth_m"], [0.0, 1080.0, 1800.0, 2400.0, 2000.0, 2000.0])
    np.testing.assert_allclose(h["temperature_c"], [4.0, 41.8, 67.0, 88.0, 74.0, 74.0])
    assert h["max_depth_m"] == pytest.approx(2400.0)
    assert h["max_temperature_c"] == pytest.approx(88.0)
    # 70 degC is crossed between 55 Ma (67 degC) and 30 Ma (88 degC), linearly in time.
    onset = 55.0 - (70.0 - 67.0) / (88.0 - 67.0) * 25.0
    assert h["cement_onset_c"] == 70.0
    assert h["onset_age_ma"] == pytest.approx(onset, rel=1e-5)
    assert h["time_above_onset_myr"] == pytest.approx(onset, rel=1e-5)  # never cools below 70
    # Hydrostatic pressure rho_w g z: 1.03 g/cm3 x 9.80665 m/s2 x 2000 m = 20.2017 MPa.
    assert h["pore_pressure_mpa"][-1] == pytest.approx(1.03 * 9.80665 * 2000.0 * 1e-3, rel=1e-5)
    assert r.json()["porosity"] is None and r.json()["crossplot"] is None  # only what was asked
    assert set(r.json()["timing_ms"]) == {"history"}


def _walderhaug_reference(ages, temps, *, phi0, quartz, coating, grain_mm, onset_c, t_from):
    """Cement at 0 Ma by integrating Walderhaug's (1996) rate equation numerically.

    dVq/dt = M A0 (phi0 - Vq) / phi0 * a 10^(b T) / rho_q with A0 = 6 (1 - C) f / D
    (f per bulk volume, D in cm); a = 1.98e-22 mol/(cm2 s), b = 0.022 /degC,
    M = 60.08 g/mol, rho_q = 2.65 g/cm3 (values from memory, as in the physics module).
    """
    a, b, molar, rho_q, sec_per_ma = 1.98e-22, 0.022, 60.0843, 2.65, 3.15576e13
    f = quartz * (1.0 - phi0)
    area = 6.0 * (1.0 - coating) * f / (grain_mm * 0.1)

    def temperature(t: float) -> float:
        return float(np.interp(t, ages[::-1], temps[::-1]))

    def rate(t_before_present, v):
        age = -t_before_present
        temp = temperature(age)
        if temp < onset_c:
            return [0.0]
        return [molar * area * (phi0 - v[0]) / phi0 * a * 10.0 ** (b * temp) / rho_q
                * sec_per_ma]

    sol = integrate.solve_ivp(rate, (-t_from, 0.0), [0.0], rtol=1e-10, atol=1e-14,
                              max_step=0.05)
    return float(sol.y[0, -1])


def test_porosity_and_cement_follow_athy_and_walderhaug(team, scenario):
    doc = _constant_document()
    r = _preview(team["geologist"], scenario["id"], document=doc, locations=[LOCATION],
                 parts=["history", "porosity"], realisations=20)
    assert r.status_code == 200, r.text
    body = r.json()
    h = body["history"][0]
    sand = body["porosity"][0]["sands"][0]
    assert sand["facies"] == ["brine sand", "oil sand", "gas sand"]
    ages = np.array(sand["ages_ma"])
    phi = np.array(sand["porosity"]["q50"])
    cement = np.array(sand["cement"]["q50"])
    # Constant inputs: the percentiles coincide.
    np.testing.assert_allclose(sand["porosity"]["q10"], phi)
    onset = h["onset_age_ma"]
    hist_ages, hist_depth = np.array(h["ages_ma"]), np.array(h["depth_m"])
    before = ages > onset + 1e-3  # ages are sent to 6 significant digits
    depth = np.interp(ages[::-1], hist_ages[::-1], hist_depth[::-1])[::-1]
    # Athy (1930) depth form phi0 exp(-c z) before the onset of cementation, no cement.
    np.testing.assert_allclose(phi[before], 0.39 * np.exp(-0.17 * depth[before] / 1000.0),
                               rtol=1e-5)
    assert np.all(cement[before] == 0.0)
    # At onset: the forward model's porosity then (linear between control ages 55 and 30 Ma).
    w = (55.0 - onset) / 25.0
    phi_55, phi_30 = 0.39 * math.exp(-0.17 * 1.8), 0.39 * math.exp(-0.17 * 2.4)
    phi_onset = phi_55 + w * (phi_30 - phi_55)
    expected_cement = _walderhaug_reference(
        hist_ages, np.array(h["temperature_c"]), phi0=phi_onset, quartz=0.85, coating=0.1,
        grain_mm=0.25, onset_c=70.0, t_from=110.0)
    assert expected_cement > 0.01  # the check is not vacuous
    assert cement[-1] == pytest.approx(expected_cement, rel=2e-4)
    assert phi[-1] == pytest.approx(phi_onset - expected_cement, rel=2e-4)
    assert np.all(np.diff(cement) >= 0)  # cement only grows


def test_uplift_does_not_restore_porosity(team, scenario):
    cool = dict(LOCATION, gradient_c_per_km=20.0)  # 4 + 20 x 2.4 = 52 degC: no cement
    r = _preview(team["geologist"], scenario["id"], document=_constant_document(),
                 locations=[cool], parts=["history", "porosity"], realisations=20)
    assert r.status_code == 200, r.text
    h, sand = r.json()["history"][0], r.json()["porosity"][0]["sands"][0]
    assert h["onset_age_ma"] is None and h["time_above_onset_myr"] == 0.0
    ages, phi = np.array(sand["ages_ma"]), np.array(sand["porosity"]["q50"])
    after_max = ages <= 30.0
    # Irreversible compaction: the porosity of maximum burial (2400 m) is kept while
    # the rock is uplifted to 2000 m (Athy 1930 on the running maximum of depth).
    np.testing.assert_allclose(phi[after_max], 0.39 * math.exp(-0.17 * 2.4), rtol=2e-6)
    assert max(sand["cement"]["q90"]) == 0.0


def test_crossplot_ellipses_are_two_sigma(team, scenario):
    r = _preview(team["geophysicist"], scenario["id"], locations=[LOCATION],
                 parts=["crossplot"], realisations=300)
    assert r.status_code == 200, r.text
    cp = r.json()["crossplot"]
    assert (cp["x"], cp["y"]) == ("intercept", "gradient")
    assert cp["noise"] == {"x": True, "y": True}
    # Chi-square with 2 degrees of freedom: P(D^2 <= 4) = 1 - exp(-2).
    assert cp["coverage"] == pytest.approx(stats.chi2.cdf(4.0, 2), rel=1e-12)
    assert [f["name"] for f in cp["facies"]] == ["shale", "brine sand", "oil sand", "gas sand"]
    for f in cp["facies"]:
        xs, ys = np.array(f["x"]), np.array(f["y"])
        assert xs.size == 300  # the whole cloud (at most 400 points are sent)
        mean, cov = np.array(f["mean"]), np.array(f["covariance"])
        # Mean and covariance are those of the cloud (values rounded to 5-6 digits).
        np.testing.assert_allclose(mean, [xs.mean(), ys.mean()], rtol=1e-3, atol=1e-5)
        np.testing.assert_allclose(cov, np.cov(np.stack([xs, ys])), rtol=2e-3, atol=1e-8)
        d = np.stack([f["ellipse"]["x"], f["ellipse"]["y"]]).T - mean
        mahal = np.sqrt(np.einsum("ij,jk,ik->i", d, np.linalg.inv(cov), d))
        np.testing.assert_allclose(mahal, 2.0, rtol=2e-3)


def test_confidence_ellipse_with_a_known_covariance():
    cov = np.array([[4.0, 1.5], [1.5, 1.0]])
    x, y = previews.confidence_ellipse([1.0, -2.0], cov, sigma=2.0)
    d = np.stack([x - 1.0, y + 2.0]).T
    np.testing.assert_allclose(np.einsum("ij,jk,ik->i", d, np.linalg.inv(cov), d), 4.0,
                               rtol=1e-12)
    # The ellipse's half-axes are 2 sqrt(eigenvalues) (principal axes of the covariance).
    radius = np.hypot(x - 1.0, y + 2.0)
    np.testing.assert_allclose(radius.max(), 2 * np.sqrt(np.linalg.eigvalsh(cov).max()),
                               rtol=1e-3)
    with pytest.raises(ValueError, match="positive semi-definite"):
        previews.confidence_ellipse([0, 0], [[1.0, 2.0], [2.0, 1.0]])


def test_sweep_moves_the_facies_ellipses(team, scenario):
    n = 200
    r = _preview(team["geophysicist"], scenario["id"], locations=[LOCATION], parts=["sweep"],
                 realisations=n, sweep={"covariate": "net_uplift_m", "steps": 5})
    assert r.status_code == 200, r.text
    sw = r.json()["sweep"]
    assert sw["values"] == [0.0, 300.0, 600.0, 900.0, 1200.0]  # the example's node range
    assert sw["unit"] == "m"
    brine = next(f for f in sw["facies"] if f["name"] == "brine sand")
    assert len(brine["means"]) == len(brine["ellipses"]) == 5
    first, last = np.array(brine["means"][0]), np.array(brine["means"][-1])
    # More uplift at the same present depth means deeper maximum burial: the sand is
    # more compacted and cemented and hardens against the shale, so the intercept
    # rises (AVO classes move from III towards I with burial, Rutherford & Williams
    # 1989; common practice). Tolerance: 6 standard errors of the mean.
    cloud = _preview(team["geophysicist"], scenario["id"], locations=[LOCATION],
                     parts=["crossplot"], realisations=n).json()["crossplot"]
    sd = math.sqrt(next(f for f in cloud["facies"] if f["name"] == "brine sand")
                   ["covariance"][0][0])
    assert last[0] - first[0] > 6 * sd / math.sqrt(n)


def test_slider_override_sets_the_covariate(team, scenario):
    r = _preview(team["basin_modeller"], scenario["id"], locations=[LOCATION],
                 parts=["history"], covariate_override={"name": "net_uplift_m", "value": 1000})
    assert r.status_code == 200, r.text
    assert r.json()["locations"][0]["net_uplift_m"] == 1000.0
    assert r.json()["history"][0]["max_depth_m"] == pytest.approx(3000.0)


def test_unsaved_document_is_previewed_not_saved(team, scenario):
    client, sid = team["basin_modeller"], scenario["id"]
    doc = client.get(f"/api/scenarios/{sid}/document").json()["document"]
    edited = copy.deepcopy(doc)
    edited["burial"]["surface_temperature_c"] = 10.0
    stored = _preview(client, sid, locations=[LOCATION], parts=["history"]).json()
    unsaved = _preview(client, sid, document=edited, locations=[LOCATION],
                       parts=["history"]).json()
    shift = np.array(unsaved["history"][0]["temperature_c"]) - np.array(
        stored["history"][0]["temperature_c"])
    np.testing.assert_allclose(shift, 6.0)  # T = Ts + G z: Ts moves every age by 6 degC
    assert client.get(f"/api/scenarios/{sid}").json()["head_revision"] == scenario[
        "head_revision"]


def test_invalid_document_is_refused_with_field_paths(team, scenario):
    doc = default_scenario()
    doc["geology"]["facies"][0]["proportion"] = 0.9
    r = _preview(team["geologist"], scenario["id"], document=doc)
    assert r.status_code == 422
    assert any(e["loc"] == "geology.facies" and "add up to 1" in e["msg"]
               for e in r.json()["errors"])


def test_stage_failure_is_a_422_naming_the_stage(team, scenario):
    hot = {"present_depth_m": 6000.0, "net_uplift_m": 0.0, "gradient_c_per_km": 60.0,
           "overpressure_mpa": 0.0}  # 364 degC at present: outside Batzle-Wang's range
    r = _preview(team["geophysicist"], scenario["id"], locations=[hot], parts=["crossplot"])
    assert r.status_code == 422
    assert "fluids" in r.json()["detail"]


def test_default_depth_trend_stays_inside_the_fluid_range_on_a_hot_location(team, scenario):
    # A hot location (43 degC/km, the example's gradient uncertainty sd 1.5 degC/km):
    # the default sweep must stop where the hottest realisation is still below the
    # 150 degC limit of Batzle & Wang (1992). Hand calculation of the limit:
    # (145 - Ts) / (43 + 4 x 1.5) km - (4 x sd of the depth uncertainty).
    doc = default_scenario()
    covs = doc["burial"]["covariates"]
    ts = doc["burial"]["surface_temperature_c"]
    z_unc = covs["present_depth_m"]["uncertainty"]
    z_hi = 4.0 * z_unc["sd"] if isinstance(z_unc, dict) and "sd" in z_unc else 0.0
    expected = (145.0 - ts) / (43.0 + 4.0 * 1.5) * 1000.0 - z_hi
    hot = {**LOCATION, "gradient_c_per_km": 43.0}
    r = _preview(team["geophysicist"], scenario["id"], locations=[hot], parts=["depth_trend"],
                 realisations=200)
    assert r.status_code == 200, r.text
    depths = r.json()["depth_trend"]["depth_m"]
    assert depths[-1] == pytest.approx(expected, abs=0.01)  # depths are sent to 0.01 m


def test_validate_reports_problems_without_saving(team, scenario):
    client, sid = team["geologist"], scenario["id"]
    geology = client.get(f"/api/scenarios/{sid}/sections/geology").json()["data"]
    geology["cement_onset_c"] = 20.0
    r = client.post(f"/api/scenarios/{sid}/validate", json={"section": "geology",
                                                             "data": geology})
    assert r.status_code == 200, r.text
    assert r.json()["valid"] is False
    assert [e["loc"] for e in r.json()["errors"]] == ["geology.cement_onset_c"]
    assert "40" in r.json()["errors"][0]["msg"]
    ok = client.post(f"/api/scenarios/{sid}/validate", json={})
    assert ok.json() == {"valid": True, "errors": []}
    assert client.get(f"/api/scenarios/{sid}").json()["head_revision"] == scenario[
        "head_revision"]


def test_densities_match_closed_forms(team):
    items = [
        {"key": "n", "dist": {"kind": "normal", "mean": 2.0, "sd": 0.5}},
        {"key": "u", "dist": {"kind": "uniform", "low": 1.0, "high": 5.0}},
        {"key": "t", "dist": {"kind": "triangular", "low": 0.0, "mode": 1.0, "high": 4.0}},
        {"key": "l", "dist": {"kind": "lognormal", "median": 0.22, "sd_log": 0.25}},
        {"key": "c", "dist": 3.5},
        {"key": "bad", "dist": {"kind": "normal", "mean": 1.0, "sd": -1.0}},
    ]
    r = team["geologist"].post("/api/distributions/density", json={"items": items,
                                                                   "points": 81})
    assert r.status_code == 200, r.text
    got = {d["key"]: d for d in r.json()}
    n = got["n"]
    # Normal density at its mean: 1 / (sd sqrt(2 pi)); mean +/- 4 sd holds all but 6.3e-5.
    assert max(n["density"]) == pytest.approx(1 / (0.5 * math.sqrt(2 * math.pi)), rel=1e-5)
    assert n["support"] == [0.0, 4.0]
    assert np.trapezoid(n["density"], n["x"]) == pytest.approx(1.0, abs=2e-3)
    assert got["u"]["density"][40] == pytest.approx(1 / 4.0)  # 1 / (high - low)
    assert max(got["t"]["density"]) == pytest.approx(2 / 4.0)  # 2 / (high - low) at the mode
    assert got["t"]["mean"] == pytest.approx(5.0 / 3.0)  # (low + mode + high) / 3
    assert got["l"]["q50"] == pytest.approx(0.22)  # the median of a lognormal law
    assert got["c"]["density"] is None and got["c"]["x"] == [3.5]
    assert got["bad"]["errors"] and got["bad"]["errors"][0]["loc"] == "sd"
