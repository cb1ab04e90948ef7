"""Well calibration: cut-offs, shale trend, attributes, confusion matrix, scale factor."""

import numpy as np
import pytest
from sklearn.metrics import confusion_matrix, precision_recall_fscore_support

from porecast.physics import avo, calibration


def test_cutoffs_classify_by_vshale_then_saturation():
    vsh = np.array([0.8, 0.1, 0.1, 0.39, np.nan])
    sw = np.array([1.0, 0.3, 0.9, 0.59, 0.5])
    out = calibration.facies_from_cutoffs(
        vsh, sw, shale="sh", brine_sand="bs", hydrocarbon_sand="gs"
    )
    assert out.tolist() == ["sh", "gs", "bs", "gs", ""]


def test_cutoffs_refuse_percent_saturation():
    with pytest.raises(ValueError, match="water_saturation must be a fraction"):
        calibration.facies_from_cutoffs(
            [0.1], [45.0], shale="a", brine_sand="b", hydrocarbon_sand="c"
        )


def test_gamma_ray_index():
    np.testing.assert_allclose(
        calibration.vshale_from_gamma_ray([30, 75, 120, 200], 30, 120), [0, 0.5, 1, 1]
    )
    with pytest.raises(ValueError, match="below gr_shale"):
        calibration.vshale_from_gamma_ray([50], 100, 80)


def test_shale_trend_recovers_a_linear_trend(rng):
    z = np.linspace(1500, 2500, 400)
    vp = 1200 + 0.8 * z + rng.normal(0, 20, z.size)
    vs = 300 + 0.45 * z + rng.normal(0, 15, z.size)
    rho = 1.9 + 0.0002 * z + rng.normal(0, 0.01, z.size)
    trend = calibration.fit_shale_trend(z, vp, vs, rho, np.ones(z.size, bool))
    # Reference: numpy.polyfit of the same samples (independent least-squares route).
    np.testing.assert_allclose(trend.vp[::-1], np.polyfit(z, vp, 1), rtol=1e-9)
    assert trend.vp[1] == pytest.approx(0.8, abs=0.02)
    assert trend.n_samples == 400


def test_shale_trend_needs_enough_shale():
    z = np.arange(5.0)
    with pytest.raises(ValueError, match="at least 10 shale samples"):
        calibration.fit_shale_trend(z, z, z, z, np.ones(5, bool))


def test_attributes_against_background():
    trend = calibration.ShaleTrend((2400.0, 0.0), (1100.0, 0.0), (2.25, 0.0), (0, 1), 10)
    z = np.array([2000.0, 2000.0, 2010.0])
    vp = np.array([2400.0, 2100.0, np.nan])
    vs = np.array([1100.0, 1350.0, 1000.0])
    rho = np.array([2.25, 2.05, 2.2])
    x = calibration.well_attributes(
        z, vp, vs, rho, trend, ["intercept", "gradient", "acoustic_impedance", "vp_vs"]
    )
    # A sample equal to the background has no contrast.
    np.testing.assert_allclose(x[0, :2], 0.0, atol=1e-15)
    ig = avo.intercept_gradient(2400.0, 1100.0, 2.25, 2100.0, 1350.0, 2.05)
    np.testing.assert_allclose(x[1], [ig.intercept, ig.gradient, 2100 * 2.05, 2100 / 1350])
    assert np.all(np.isnan(x[2]))


def test_confusion_matches_scikit_learn(rng):
    labels = ["shale", "brine sand", "gas sand"]
    true = rng.choice(labels, 500)
    pred = np.where(rng.random(500) < 0.7, true, rng.choice(labels, 500))
    res = calibration.confusion(true, pred, labels)
    # Reference: scikit-learn's confusion_matrix and precision/recall.
    np.testing.assert_array_equal(res.matrix, confusion_matrix(true, pred, labels=labels))
    p, r, _, _ = precision_recall_fscore_support(true, pred, labels=labels, zero_division=0)
    np.testing.assert_allclose(res.recall, r)
    np.testing.assert_allclose(res.precision, p)
    assert res.accuracy == pytest.approx(np.mean(true == pred))


def test_confusion_leaves_out_unlabelled_samples():
    res = calibration.confusion(["a", "", "b"], ["a", "a", "unclassified"], ["a", "b"])
    assert res.n_samples == 1 and res.matrix.tolist() == [[1, 0], [0, 0]]
    assert np.isnan(res.recall[1])


def test_scale_factor_matches_lstsq(rng):
    a = rng.normal(0, 1000, 200)
    r = 1e-4 * a + rng.normal(0, 0.005, 200)
    res = calibration.amplitude_scale_factor(a, r)
    # Reference: numpy.linalg.lstsq without an intercept column.
    ref = np.linalg.lstsq(a[:, None], r, rcond=None)[0][0]
    assert res.scale == pytest.approx(ref, rel=1e-12)
    assert res.scale == pytest.approx(1e-4, rel=0.05)
    assert 0.9 < res.r_squared <= 1.0


def test_block_logs_matches_a_loop(rng):
    z = np.cumsum(rng.uniform(0.1, 0.3, 300)) + 1000
    v = rng.normal(size=300)
    v[[5, 50]] = np.nan
    out = calibration.block_logs(z, v, 5.0)
    for i in (0, 10, 150, 299):
        win = np.abs(z - z[i]) <= 2.5
        assert out[i] == pytest.approx(np.nanmean(v[win]))
