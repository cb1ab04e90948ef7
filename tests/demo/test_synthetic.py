"""The demo's synthetic data: deterministic, smooth, consistent with its truth, usable.

Physical expectations checked here come from the published models the forward
model implements; each check names its source.
"""

from __future__ import annotations

import numpy as np
import pytest

from porecast.demo import synthetic
from porecast.io import open_cube, read_well, read_xyz, segy_geometry
from porecast.physics import forward
from porecast.physics.scenario import COVARIATES, validate_scenario
from porecast.services import classification
from porecast.services.calibration import calibrate_well
from porecast.services.prospects import shoelace_area, validate_outline


def _same(a: synthetic.DemoData, b: synthetic.DemoData) -> None:
    for c in COVARIATES:
        np.testing.assert_array_equal(getattr(a.maps, c), getattr(b.maps, c))
    np.testing.assert_array_equal(a.truth.facies, b.truth.facies)
    np.testing.assert_array_equal(a.truth.cube_facies, b.truth.cube_facies)
    for name in a.attributes:
        np.testing.assert_array_equal(a.attributes[name], b.attributes[name])
    np.testing.assert_array_equal(a.cube.intercept, b.cube.intercept)
    np.testing.assert_array_equal(a.cube.gradient, b.cube.gradient)
    for wa, wb in zip(a.wells, b.wells, strict=True):
        np.testing.assert_array_equal(wa.logs.depth, wb.logs.depth)
        for name in wa.logs.curves:
            np.testing.assert_array_equal(wa.logs.curves[name], wb.logs.curves[name])
    assert a.prospects == b.prospects
    assert a.scenarios == b.scenarios


def test_generation_is_deterministic(demo_data):
    _same(demo_data, synthetic.generate(synthetic.DEFAULT_SEED))


def test_another_seed_gives_other_data(demo_data):
    other = synthetic.covariate_maps(demo_data.seed + 1)
    assert not np.array_equal(other.present_depth_m, demo_data.maps.present_depth_m)
    truth = synthetic.truth_model(demo_data.seed + 1, other)
    assert not np.array_equal(truth.facies, demo_data.truth.facies)


def test_bed_boundaries_keep_every_bed_in_range():
    rng = np.random.default_rng(20261201)
    lo, hi = synthetic.BED_RANGE_M
    for _ in range(200):
        top = rng.uniform(1000.0, 3000.0)
        base = top + rng.uniform(lo, 60.0)
        edges = synthetic.bed_boundaries(rng, top, base)
        assert edges[0] == top and edges[-1] == pytest.approx(base, abs=1e-9)
        assert np.all(np.diff(edges) >= lo - 1e-9) and np.all(np.diff(edges) <= hi + 1e-9)


def test_bad_seed_is_refused():
    with pytest.raises(ValueError, match="seed"):
        synthetic.generate(-1)


@pytest.mark.parametrize("name", ["present_depth_m", "net_uplift_m", "gradient_c_per_km"])
def test_maps_are_smooth(demo_data, name):
    values = getattr(demo_data.maps, name)
    span = np.ptp(values)
    assert span > 0
    step = max(np.abs(np.diff(values, axis=0)).max(), np.abs(np.diff(values, axis=1)).max())
    bend = max(np.abs(np.diff(values, 2, axis=0)).max(), np.abs(np.diff(values, 2, axis=1)).max())
    # White noise would change by about its whole range from node to node; these maps
    # change by a few percent per node and bend by well under one percent.
    assert step < 0.06 * span
    assert bend < 0.01 * span


def test_maps_lie_inside_the_burial_aware_nodes(demo_data):
    covs = demo_data.scenarios["burial_aware"]["burial"]["covariates"]
    for c in COVARIATES:
        nodes = covs[c]["nodes"]
        values = getattr(demo_data.maps, c)
        assert nodes[0] <= values.min() and values.max() <= nodes[-1], c


def test_uplift_rises_to_the_east_and_the_wells_straddle_it(demo_data):
    uplift = demo_data.maps.net_uplift_m
    third = synthetic.NX // 3
    assert uplift[:, -third:].mean() - uplift[:, :third].mean() > 1000.0
    low, high = demo_data.wells
    assert low.covariates["net_uplift_m"] < 500.0 < 1200.0 < high.covariates["net_uplift_m"]


def test_truth_facies_are_coherent_bodies_with_contacts(demo_data):
    truth = demo_data.truth
    sand = truth.sand
    agree = (np.mean(sand[1:] == sand[:-1]) + np.mean(sand[:, 1:] == sand[:, :-1])) / 2
    # Independent nodes at 60 % sand would agree with a neighbour 52 % of the time.
    assert agree > 0.9
    depth = demo_data.maps.present_depth_m
    hc = np.isin(truth.facies, [synthetic.OIL, synthetic.GAS])
    assert np.all(truth.closures[hc] >= 0)
    for k, ct in enumerate(truth.contacts):
        inside = truth.closures == k
        assert np.all(depth[inside & hc] < ct["fwl_m"])
        assert np.all(depth[inside & (truth.facies == synthetic.GAS)] < ct["goc_m"])
        assert np.all(depth[inside & (truth.facies == synthetic.OIL)] >= ct["goc_m"])
    assert np.all(truth.facies[~sand] == synthetic.SHALE)


def test_scenario_priors_are_the_truth_shares(demo_data):
    shares = np.bincount(demo_data.truth.facies.ravel(), minlength=4) / demo_data.truth.facies.size
    for doc in demo_data.scenarios.values():
        priors = [f["proportion"] for f in doc["geology"]["facies"]]
        np.testing.assert_allclose(priors, shares, atol=2e-3)


def test_attribute_maps_carry_the_burial_and_fluid_effects(demo_data):
    """Cemented, deeply buried sands are stiffer; gas softens a sand.

    Sources: quartz cement grows with time-temperature (Walderhaug 1996) and
    stiffens the frame (contact-cement model, Dvorkin & Nur 1996), so the brine-sand
    intercept against shale rises where uplift (former burial) is large; gas lowers
    the bulk modulus and density (Gassmann 1951, Batzle & Wang 1992), so a gas sand's
    intercept is below a brine sand's at the same place (Rutherford & Williams 1989).
    """
    facies = demo_data.truth.facies
    intercept = demo_data.attributes["intercept"]
    uplift = demo_data.maps.net_uplift_m
    west, east = uplift < 500.0, uplift > 1300.0
    brine = facies == synthetic.BRINE
    gas = facies == synthetic.GAS
    n_w, n_e = np.count_nonzero(brine & west), np.count_nonzero(brine & east)
    # Difference of means against 5 standard errors (sample sd from the data).
    se = np.hypot(intercept[brine & west].std() / np.sqrt(n_w),
                  intercept[brine & east].std() / np.sqrt(n_e))
    assert intercept[brine & east].mean() - intercept[brine & west].mean() > 5 * se
    for region in (west, east):
        g, b = intercept[gas & region], intercept[brine & region]
        se = np.hypot(g.std() / np.sqrt(g.size), b.std() / np.sqrt(b.size))
        assert b.mean() - g.mean() > 5 * se


def test_cube_is_readable_segy_on_the_map_grid(demo_data, demo_files):
    for name in synthetic.CUBE_FILES:
        geom = segy_geometry(demo_files.cubes[name])
        assert geom.structured
        assert geom.grid.geometry_difference(demo_data.cube.grid) is None
        with open_cube(demo_files.cubes[name]) as reader:
            data = reader.read(0, reader.n_traces)
        expected = getattr(demo_data.cube, name).reshape(-1, synthetic.CUBE_SAMPLES)
        np.testing.assert_allclose(data, expected, rtol=1e-6, atol=1e-7)  # float32 on disk
    # The horizon slice of the cube is the attribute map in the window.
    h = demo_data.cube.horizon_sample
    i, j = np.indices(h.shape)
    window = (slice(*synthetic.CUBE_ROWS), slice(*synthetic.CUBE_COLS))
    np.testing.assert_array_equal(demo_data.cube.intercept[i, j, h],
                                  demo_data.attributes["intercept"][window])
    # Layering in the sample direction: top reservoir and lower level hold sands.
    codes = demo_data.truth.cube_facies
    per_sample = (codes != synthetic.SHALE).mean(axis=(0, 1))
    assert np.count_nonzero(per_sample) >= 5 and per_sample.max() < 0.5


def test_map_files_read_back(demo_data, demo_files):
    for name, path in demo_files.maps.items():
        data = read_xyz(path)
        assert data.grid.geometry_difference(demo_data.maps.grid) is None
        expected = (getattr(demo_data.maps, name) if name in COVARIATES
                    else demo_data.attributes[name])
        np.testing.assert_array_equal(data.values[name], expected)


def test_prospects_are_valid_outlines_of_the_closures(demo_data):
    node_area = synthetic.SPACING_M**2
    for k, p in enumerate(demo_data.prospects):
        pts = np.asarray(validate_outline(p["outline"]))
        closure_area = np.count_nonzero(demo_data.truth.closures == k) * node_area
        assert shoelace_area(pts) == pytest.approx(closure_area, rel=0.25)
        # The high's centre lies inside its outline (even-odd ray crossing rule).
        x, y = synthetic.node_xy(synthetic.HIGHS[k].centre)
        xa, ya = pts[:, 0], pts[:, 1]
        xb, yb = np.roll(xa, -1), np.roll(ya, -1)
        crosses = ((ya > y) != (yb > y)) & (x < xa + (y - ya) * (xb - xa) / (yb - ya))
        assert np.count_nonzero(crosses) % 2 == 1


def test_scenarios_tell_the_story(demo_data):
    aware, stat, hot = (demo_data.scenarios[k] for k in ("burial_aware", "stationary", "hot"))
    well = demo_data.wells[0].covariates
    for c in COVARIATES:
        assert stat["burial"]["covariates"][c]["nodes"] == [pytest.approx(well[c], abs=0.05)]
        n_aware = len(aware["burial"]["covariates"][c]["nodes"])
        assert n_aware == 1 if c == "overpressure_mpa" else n_aware >= 3
        assert hot["burial"]["covariates"][c]["nodes"] == aware["burial"]["covariates"][c]["nodes"]
    assert hot["burial"]["covariates"]["gradient_c_per_km"]["uncertainty"]["mean"] == 8.0
    for key in ("geology", "rockphysics", "seed", "realisations"):
        assert aware[key] == stat[key] == hot[key]


def test_wells_are_readable_thin_bedded_logs(demo_data, demo_files):
    for well in demo_data.wells:
        logs = read_well(demo_files.wells[well.logs.name],
                         required=("vp", "vs", "density", "gr", "sw"))
        assert logs.location == pytest.approx(synthetic.node_xy(well.node))
        np.testing.assert_allclose(logs.depth, well.logs.depth, rtol=1e-9)
        np.testing.assert_allclose(logs.curves["vp"], well.logs.curves["vp"], rtol=1e-9)
        thick = np.array([b["base_m"] - b["top_m"] for b in well.beds])
        lo, hi = synthetic.BED_RANGE_M
        assert np.all(thick >= lo - 1e-9) and np.all(thick <= hi + 1e-9)
        top = well.covariates["present_depth_m"]
        assert any(abs(b["top_m"] - top) < 1e-3 and b["facies"] != "shale" for b in well.beds)
        assert {"shale", "gas sand"} <= {b["facies"] for b in well.beds}


@pytest.fixture(scope="module")
def aware_model(demo_data):
    sc = validate_scenario(demo_data.scenarios["burial_aware"])
    return sc, classification.train(forward.simulate(sc), sc)


def test_wells_pass_calibration_and_blocking_matters(demo_data, demo_files, aware_model):
    sc, model = aware_model
    for well in demo_data.wells:
        path = demo_files.wells[well.logs.name]
        fine = calibrate_well(sc, model, path, covariates=well.covariates, block_m=2.0)
        coarse = calibrate_well(sc, model, path, covariates=well.covariates, block_m=10.0)
        # Shale / brine sand / hydrocarbon sand from cut-offs against the blind
        # prediction; 3 classes by chance would score about 1/3.
        assert fine["grouped_confusion"]["accuracy"] > 0.75
        # Beds of 0.5-5 m: 10 m blocks mix sand and shale and lose accuracy.
        assert coarse["grouped_confusion"]["accuracy"] < fine["grouped_confusion"]["accuracy"]
