"""``porecast simulate``: output files, summary content, and clean failure."""

import json

import numpy as np

from porecast.cli import main
from porecast.physics.scenario import default_scenario


def test_simulate_example_writes_samples_and_summary(tmp_path, capsys):
    out = tmp_path / "run"
    assert main(["simulate", "--out", str(out), "--realisations", "30", "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["seed"] == default_scenario()["seed"]
    assert len(summary["scenario"]["hash"]) == 64
    assert summary["facies"] == ["shale", "brine sand", "oil sand", "gas sand"]
    assert len(summary["nodes"]) == summary["n_nodes"] * len(summary["facies"])
    with np.load(out / "samples.npz") as npz:
        samples = npz["samples"]
        assert samples.shape == (summary["n_nodes"], 4, 30, 2)
        first = summary["nodes"][0]
        np.testing.assert_allclose(first["mean"], samples[0, 0].mean(axis=0))
        assert "field_porosity" in npz.files


def test_simulate_is_reproducible(tmp_path):
    for name in ("a", "b"):
        assert main(["simulate", "--out", str(tmp_path / name), "--realisations", "20",
                     "--quiet"]) == 0
    with np.load(tmp_path / "a" / "samples.npz") as a, np.load(tmp_path / "b" / "samples.npz") as b:
        np.testing.assert_array_equal(a["samples"], b["samples"])


def test_invalid_scenario_exits_non_zero_and_writes_nothing(tmp_path, capsys):
    doc = default_scenario()
    doc["geology"]["sand"]["grain_size_mm"] = -0.2
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(doc))
    out = tmp_path / "out"
    assert main(["simulate", str(path), "--out", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "geology.sand.grain_size_mm" in err and "between 0 and 5 mm" in err
    assert not out.exists()


def test_failure_during_simulation_leaves_no_output(tmp_path, capsys):
    doc = default_scenario()
    # A 60 degC/km gradient makes the oil hotter than the Batzle-Wang oil range.
    doc["burial"]["covariates"]["gradient_c_per_km"]["nodes"] = [60.0]
    path = tmp_path / "hot.json"
    path.write_text(json.dumps(doc))
    out = tmp_path / "out"
    assert main(["simulate", str(path), "--out", str(out), "--quiet"]) == 2
    assert "while computing fluids" in capsys.readouterr().err
    assert not out.exists() or not any(out.iterdir())
