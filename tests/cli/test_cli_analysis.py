"""``porecast classify`` on maps and cubes, ``porecast calibrate`` at a synthetic well.

The synthetic data come from the scenario's own forward model: each map node
or log sample draws the attributes of a known facies at its own covariates, so
the classifier must recover that facies far above chance (1/4).
"""

import json

import numpy as np
import pytest

from porecast.cli import main
from porecast.io import Grid, GridData, WellLogs, write_npz, write_well
from porecast.physics import forward
from porecast.physics.scenario import default_scenario, validate_scenario
from porecast.services.simulation import load


@pytest.fixture(scope="module")
def scenario_path(tmp_path_factory):
    path = tmp_path_factory.mktemp("sc") / "scenario.json"
    path.write_text(json.dumps(default_scenario()))
    return str(path)


@pytest.fixture(scope="module")
def synthetic_map(tmp_path_factory):
    folder = tmp_path_factory.mktemp("maps")
    sc = validate_scenario(default_scenario())
    ny, nx = 24, 30
    rng = np.random.default_rng(3)
    cols, rows = np.meshgrid(np.arange(nx), np.arange(ny))
    maps = {
        "net_uplift_m": 1100.0 * cols / (nx - 1) + 50.0,
        "present_depth_m": 1450.0 + 1250.0 * rows / (ny - 1),
        "gradient_c_per_km": np.full((ny, nx), 33.0),
    }
    truth = rng.integers(0, 4, (ny, nx))
    nodes = np.stack([maps["present_depth_m"].ravel(), maps["net_uplift_m"].ravel(),
                      maps["gradient_c_per_km"].ravel(), np.zeros(ny * nx)], -1)
    res = forward.simulate(sc, realisations=2, node_values=nodes)
    picked = res.samples[np.arange(ny * nx), truth.ravel(), 0]
    grid = Grid(kind="map", shape=(ny, nx), x0=1000.0, y0=5000.0, dx=50.0, dy=50.0)
    write_npz(folder / "attrs.npz", GridData(grid.with_attributes(("intercept", "gradient")), {
        "intercept": picked[:, 0].reshape(ny, nx), "gradient": picked[:, 1].reshape(ny, nx)}))
    for name, arr in maps.items():
        write_npz(folder / f"{name}.npz", GridData(grid.with_attributes((name,)), {name: arr}))
    cube = np.stack([picked[:, 0].reshape(ny, nx), picked[:, 1].reshape(ny, nx)])
    # a 3-D cube: each trace carries its map value over 5 samples, one dead trace
    for j, name in enumerate(("intercept", "gradient")):
        c = np.repeat(cube[j][:, :, None], 5, axis=2)
        c[0, 0, :] = 0.0
        np.save(folder / f"{name}_cube.npy", c)
    (folder / "prospects.json").write_text(json.dumps([
        {"name": "north", "outline": [[1100, 5100], [1900, 5100], [1900, 5800], [1100, 5800]]}]))
    return folder, truth


def _cov_args(folder):
    out = []
    for name in ("net_uplift_m", "present_depth_m", "gradient_c_per_km"):
        out += ["--covariate", f"{name}={folder / (name + '.npz')}"]
    return out


def test_classify_map_recovers_truth_and_risks_prospect(scenario_path, synthetic_map, tmp_path):
    folder, truth = synthetic_map
    out = tmp_path / "out"
    rc = main(["classify", scenario_path, "--attributes", f"intercept={folder / 'attrs.npz'}",
               f"gradient={folder / 'attrs.npz'}", *_cov_args(folder), "--prospects",
               str(folder / "prospects.json"), "--realisations", "400", "--out", str(out),
               "--quiet"])
    assert rc == 0
    with np.load(out / "classification.npz") as npz:
        most = npz["most_likely"]
        post = np.stack([npz[f"posterior_{s}"] for s in
                         ("shale", "brine_sand", "oil_sand", "gas_sand")], -1)
    np.testing.assert_allclose(post.sum(-1), 1.0, atol=1e-9)
    accuracy = float(np.mean(most == truth))
    assert accuracy > 0.7, accuracy
    summary = json.loads((out / "summary.json").read_text())
    prospect = summary["prospects"][0]
    assert prospect["p90_area_m2"] <= prospect["p50_area_m2"] <= prospect["p10_area_m2"]
    assert 0 < prospect["expected_area_m2"] <= prospect["n_cells"] * 2500.0


def test_classify_cube_streams_and_marks_dead_traces(scenario_path, synthetic_map, tmp_path):
    folder, truth = synthetic_map
    out = tmp_path / "cube"
    rc = main(["classify", scenario_path, "--attributes",
               f"intercept={folder / 'intercept_cube.npy'}",
               f"gradient={folder / 'gradient_cube.npy'}", *_cov_args(folder),
               "--realisations", "400", "--out", str(out), "--quiet"])
    assert rc == 0
    most = np.load(out / "most_likely.npy")
    assert most.shape == (24, 30, 5)
    assert np.all(np.isnan(most[0, 0]))  # the dead trace is never classified
    ok = np.ones((24, 30), bool)
    ok[0, 0] = False
    assert np.mean(most[ok][:, 0] == truth[ok]) > 0.7
    summary = json.loads((out / "summary.json").read_text())
    assert summary["n_dead_traces"] == 1


def test_classify_refuses_mismatched_covariate(scenario_path, synthetic_map, tmp_path, capsys):
    folder, _ = synthetic_map
    bad = tmp_path / "net_uplift_m.npz"
    write_npz(bad, GridData(Grid(kind="map", shape=(5, 5), attributes=("net_uplift_m",)),
                            {"net_uplift_m": np.zeros((5, 5))}))
    args = _cov_args(folder)
    args[1] = f"net_uplift_m={bad}"
    out = tmp_path / "none"
    rc = main(["classify", scenario_path, "--attributes", f"intercept={folder / 'attrs.npz'}",
               f"gradient={folder / 'attrs.npz'}", *args, "--realisations", "50", "--out",
               str(out), "--quiet"])
    assert rc == 2
    err = capsys.readouterr().err
    assert "(5, 5)" in err and "(24, 30)" in err
    assert not out.exists()


def _synthetic_well(path, sc):
    """Layered well: shale, brine sand, gas sand, from the forward model at the well."""
    z = np.arange(2000.0, 2300.0, 0.5)
    layer = ((z - 2000.0) // 25).astype(int) % 3  # 0 shale, 1 brine sand, 2 gas sand
    facies_index = np.array([0, 1, 3])[layer]
    node = np.array([[2150.0, 400.0, 35.0, 0.0]])
    res = forward.simulate(sc, realisations=z.size, node_values=node)
    f = res.fields
    pick = (0, facies_index, np.arange(z.size))
    logs = WellLogs(
        name="SYNTH-1", depth=z,
        curves={"vp": f["vp"][pick], "vs": f["vs"][pick], "density": f["density"][pick],
                "vshale": np.where(layer == 0, 0.85, 0.08),
                "sw": np.where(layer == 2, 0.25, 1.0)})
    write_well(path, logs)
    return layer


def test_calibrate_blind_test(scenario_path, tmp_path, capsys):
    sc, _ = load(scenario_path)
    well = tmp_path / "synth.las"
    _synthetic_well(well, sc)
    out = tmp_path / "cal"
    rc = main(["calibrate", scenario_path, "--well", str(well), "--covariate",
               "present_depth_m=2150", "--covariate", "net_uplift_m=400", "--covariate",
               "gradient_c_per_km=35", "--block", "2", "--realisations", "400",
               "--hydrocarbon-facies", "gas sand", "--out", str(out), "--quiet"])
    assert rc == 0
    doc = json.loads((out / "calibration.json").read_text())
    conf = doc["confusion"]
    assert conf["n_samples"] > 500
    # Shale, brine sand and gas sand are recovered well above chance.
    assert conf["accuracy"] > 0.8
    assert doc["grouped_confusion"]["accuracy"] >= conf["accuracy"]
    assert (out / "well_facies.csv").read_text().startswith("depth_m,")


def test_calibrate_names_missing_curve(scenario_path, tmp_path, capsys):
    sc, _ = load(scenario_path)
    well = tmp_path / "nosw.las"
    logs = WellLogs(name="X", depth=np.arange(100.0), curves={
        "vp": np.full(100, 3000.0), "vs": np.full(100, 1500.0), "density": np.full(100, 2.3)})
    write_well(well, logs)
    rc = main(["calibrate", scenario_path, "--well", str(well), "--out", str(tmp_path / "o"),
               "--realisations", "50", "--quiet"])
    assert rc == 2
    assert "sw" in capsys.readouterr().err
