"""The chunked forward chain against unchunked runs and against the module functions.

The forward model draws its inputs piece by piece, skips stretches of streams
nobody reads and runs the chain on cache-sized chunks. These tests pin that
down: results must not depend on the chunk size, and spot realisations must
equal the chain rebuilt by hand from the public functions of each module on
inputs drawn the plain way (each stream drawn over the whole run at once).
"""

import copy

import numpy as np
import pytest

from porecast.physics import (
    avo,
    burial,
    compaction,
    diagenesis,
    distributions,
    fluids,
    forward,
    rockphysics,
)
from porecast.physics._checks import as_finite, in_range
from porecast.physics.scenario import COVARIATES, default_scenario, dist_params, validate_scenario

# Relative tolerance of the brief: agreement to floating-point round-off.
RTOL = 1e-10
# Intercept and gradient are differences of nearly equal numbers and may be
# near zero; a round-off of 1e-16 in a velocity moves them by about 1e-16.
ATOL_CONTRAST = 1e-12


@pytest.fixture(scope="module")
def example():
    return validate_scenario(default_scenario())


def _variant(**changes):
    doc = copy.deepcopy(default_scenario())
    for path, value in changes.items():
        node = doc
        *parents, last = path.split("__")
        for key in parents:
            node = node[int(key)] if isinstance(node, list) else node[key]
        node[last] = value
    return validate_scenario(doc)


def _assert_same(a, b):
    assert a.facies == b.facies and a.attributes == b.attributes
    np.testing.assert_array_equal(a.node_values, b.node_values)
    for name in forward.FIELDS:
        np.testing.assert_allclose(a.fields[name], b.fields[name], rtol=RTOL, atol=0, err_msg=name)
    np.testing.assert_allclose(a.samples, b.samples, rtol=RTOL, atol=0)


# --------------------------------------------------------------------------- chunking


def test_chunk_size_does_not_change_the_example(example):
    # Chunks of five whole nodes, and of half a node, against one chunk for the run.
    huge = forward.simulate(example, realisations=200, chunk_size=10**9)
    _assert_same(forward.simulate(example, realisations=200, chunk_size=1000), huge)
    _assert_same(forward.simulate(example, realisations=200, chunk_size=150), huge)


def test_tiny_chunks_do_not_change_the_result(example):
    nodes = forward.covariate_grid(example)[1][::8]
    tiny = forward.simulate(example, realisations=30, node_values=nodes, chunk_size=7)
    huge = forward.simulate(example, realisations=30, node_values=nodes, chunk_size=10**9)
    _assert_same(tiny, huge)


def test_chunk_size_does_not_change_split_realisations(example):
    # More realisations than a chunk: each node and facies is split into pieces,
    # and streams a facies does not read are skipped between its pieces.
    nodes = np.array([[2300.0, 400.0, 35.0, 0.0], [1500.0, 0.0, 30.0, 0.0]])
    split = forward.simulate(example, realisations=500, node_values=nodes, chunk_size=96)
    whole = forward.simulate(example, realisations=500, node_values=nodes, chunk_size=10**9)
    _assert_same(split, whole)


@pytest.mark.parametrize(
    "changes",
    [
        {"rockphysics__sand_model": "friable"},
        {"rockphysics__sand_model": "contact_cement"},
        {"rockphysics__sand_model": "constant_cement"},
        {"geology__compaction_mode": "stress"},
        {"rockphysics__fluids__mixing": "patchy"},
        {"rockphysics__seismic__noise_sd": {}},
        {"geology__facies__2__sand": {
            "quartz_fraction": 0.9, "clay_fraction": {"kind": "uniform", "low": 0.0, "high": 0.05},
            "grain_size_mm": {"kind": "lognormal", "median": 0.3, "sd_log": 0.2},
            "coating_fraction": 0.05, "porosity_surface": 0.38, "compaction_per_km": 0.2}},
    ],
    ids=["friable", "contact_cement", "constant_cement", "stress", "patchy", "no_noise",
         "own_sand"],
)
def test_chunk_size_does_not_change_model_variants(changes):
    sc = _variant(**changes)
    nodes = forward.covariate_grid(sc)[1][::7]
    a = forward.simulate(sc, realisations=60, node_values=nodes, chunk_size=16)
    b = forward.simulate(sc, realisations=60, node_values=nodes, chunk_size=10**9)
    _assert_same(a, b)


def test_progress_counts_every_stage_of_every_chunk(example):
    seen = []
    forward.simulate(example, realisations=10, chunk_size=100,
                     progress=lambda d, t, s: seen.append((d, t, s)))
    # 48 nodes of 10 realisations: 10 nodes per chunk, 5 chunks of 4 facies, 7 stages each.
    assert [d for d, _, _ in seen] == list(range(1, 5 * 4 * 7 + 1))
    assert {t for _, t, _ in seen} == {5 * 4 * 7}
    assert [s for _, _, s in seen[:7]] == list(forward._STAGES)


def test_chunk_size_must_be_positive(example):
    with pytest.raises(ValueError, match="chunk_size must be at least 1"):
        forward.simulate(example, realisations=10, chunk_size=0)


def test_the_earliest_failing_stage_is_reported_whatever_the_chunks(example):
    # The first node is too hot for the Batzle-Wang oil (fails in "fluids"),
    # the second is buried below 15 km (fails in "burial history"). Run stage
    # by stage over all realisations, the burial history fails first.
    nodes = np.array([[3000.0, 0.0, 60.0, 0.0], [15_500.0, 0.0, 30.0, 0.0]])
    messages = []
    for chunk in (10**9, 40, 7):
        with pytest.raises(ValueError, match="while computing burial history") as info:
            forward.simulate(example, realisations=40, node_values=nodes, chunk_size=chunk)
        messages.append(str(info.value))
    assert messages[1] == messages[0] and messages[2] == messages[0]
    with pytest.raises(ValueError, match="while computing fluids: temperature_c must be"):
        forward.simulate(example, realisations=40, node_values=nodes[:1], chunk_size=7)


def test_cap_rock_override_applies_to_the_shale_facies(example):
    res = forward.simulate(example, realisations=20,
                           overrides={"geology.cap_rock.clay_fraction": 0.7})
    shale = res.facies.index("shale")
    mix = rockphysics.mineral_mix([[0.7, 0.3]], ["clay", "quartz"])
    np.testing.assert_allclose(res.fields["k_mineral"][:, shale], mix.k[0], rtol=1e-15)
    np.testing.assert_allclose(res.fields["rho_mineral"][:, shale], mix.density[0], rtol=1e-15)


# --------------------------------------------------------------------------- spot values


def _plain_draws(sc, shape):
    """Every stream drawn over the whole run at once (the pre-chunking way)."""
    size = int(np.prod(shape))

    def draw(path, dist):
        rng = distributions.stream_for(sc.seed, path)
        return distributions.sample(dist.kind, dist_params(dist), rng, size).reshape(shape)

    return draw


def _spot(sc, grid, shape, node, fac, r):
    """One realisation rebuilt from the public module functions."""
    draw = _plain_draws(sc, shape)
    at = (node, fac, r)
    covs = sc.burial.covariates
    cov = {c: np.array([grid[node, i] + draw(f"burial.covariates.{c}.uncertainty",
                                             getattr(covs, c).uncertainty)[at]])
           for i, c in enumerate(COVARIATES)}
    hist = burial.burial_paths(
        forward.burial_template(sc), cov["present_depth_m"], cov["net_uplift_m"],
        cov["gradient_c_per_km"], cov["overpressure_mpa"],
        overburden_density=sc.burial.overburden_density, water_density=sc.burial.water_density,
    )
    onset = sc.geology.cement_onset_c
    t_now, p_now = hist.temperature_c[:, -1], hist.pore_pressure_mpa[:, -1]
    sigma = hist.effective_stress_mpa[:, -1]
    g, rp = sc.geology, sc.rockphysics
    assert g.compaction_mode == "depth" and rp.sand_model == "burial_aware"

    def cap_input(name, own=False):
        path = f"geology.cap_rock.{name}" + ("#facies" if own else "")
        return np.array([draw(path, getattr(g.cap_rock, name))[at]])

    def porosity_path(phi0, c):
        return compaction.mechanical_porosity(hist, porosity_surface=phi0, mode="depth",
                                              compaction_coefficient_per_km=c)

    phi_cap = porosity_path(cap_input("porosity_surface"), cap_input("compaction_per_km"))[:, -1]
    facies = g.facies[fac]
    quartz = rockphysics.MINERALS["quartz"]
    if facies.rock == "shale":
        phi = porosity_path(cap_input("porosity_surface", True),
                            cap_input("compaction_per_km", True))[:, -1]
        phi_mech, cement = phi, np.zeros(1)
        clay = cap_input("clay_fraction", True)
        f = np.stack([clay, 1.0 - clay], axis=-1)
        k_min = rockphysics.voigt_reuss_hill(f, [21.0, 36.6], [7.0, 45.0]).k
        g_min = rockphysics.voigt_reuss_hill(f, [21.0, 36.6], [7.0, 45.0]).g
        rho_min = rockphysics.voigt(f, [2.58, 2.65])
        k_dry, g_dry = rockphysics.friable_sand(k_min, g_min, phi, rp.shale_critical_porosity,
                                                rp.shale_coordination_number, sigma)
    else:
        sand = {n: np.array([draw(f"geology.sand.{n}", getattr(g.sand, n))[at]])
                for n in type(g.sand).model_fields}
        path = porosity_path(sand["porosity_surface"], sand["compaction_per_km"])
        age = burial.onset_age(hist, onset)
        cemented = bool(np.isfinite(age[0]))
        phi_onset = np.interp(age, hist.ages_ma[::-1], path[0, ::-1]) if cemented else None
        phi_mech = phi_onset if cemented else path[:, -1]
        cement = np.zeros(1)
        if cemented:
            cement = diagenesis.quartz_cement(
                hist.ages_ma, hist.temperature_c, grain_size_mm=sand["grain_size_mm"],
                quartz_fraction=diagenesis.bulk_quartz_fraction(sand["quartz_fraction"],
                                                                phi_mech),
                coating_fraction=sand["coating_fraction"], porosity_onset=phi_mech,
                onset_c=onset,
            )[:, -1]
        phi = phi_mech - cement
        q, cl = sand["quartz_fraction"], sand["clay_fraction"]
        grains = 1.0 - phi_mech
        solid = grains + cement  # quartz cement is part of the solid
        f = np.stack([(q * grains + cement) / solid, (1.0 - q - cl) * grains / solid,
                      cl * grains / solid], axis=-1)
        vrh = rockphysics.voigt_reuss_hill(f, [36.6, 37.5, 21.0], [45.0, 15.0, 7.0])
        k_min, g_min = vrh
        rho_min = rockphysics.voigt(f, [2.65, 2.62, 2.58])
        coord = np.array([draw("rockphysics.coordination_number", rp.coordination_number)[at]])
        k_dry, g_dry = rockphysics.friable_sand(k_min, g_min, phi, rp.critical_porosity, coord,
                                                sigma)
        if cement[0] > 0.0:
            k_c, g_c = rockphysics.contact_cement(k_min, g_min, quartz.k, quartz.g, phi,
                                                  phi_mech, coord, rp.cement_scheme)
            k_dry, g_dry = np.maximum(k_dry, k_c), np.maximum(g_dry, g_c)
        # held at the Hashin-Shtrikman upper bound of mineral and empty pores
        hs = rockphysics.hashin_shtrikman_bounds([[1.0 - phi[0], phi[0]]],
                                                 [[k_min[0], 0.0]], [[g_min[0], 0.0]])
        k_dry, g_dry = np.minimum(k_dry, hs.k_upper), np.minimum(g_dry, hs.g_upper)
    fl = rp.fluids

    def fluid_input(name):
        return np.array([draw(f"rockphysics.fluids.{name}", getattr(fl, name))[at]])

    b = fluids.brine(t_now, p_now, fluid_input("brine_salinity_ppm"))
    hc, s_hc = b, np.zeros(1)
    if facies.fluid == "gas":
        hc = fluids.gas(t_now, p_now, fluid_input("gas_gravity"))
    elif facies.fluid == "oil":
        hc = fluids.oil(t_now, p_now, fluid_input("oil_api"), fluid_input("gor"),
                        fluid_input("gas_gravity"))
    if facies.fluid != "brine":
        s_hc = fluid_input("hydrocarbon_saturation")
    sat = np.stack([1.0 - s_hc, s_hc], axis=-1)
    k_fl = fluids.wood(sat, np.stack([b.modulus, hc.modulus], axis=-1))
    rho_fl = fluids.mix_density(sat, np.stack([b.density, hc.density], axis=-1))
    k_sat, g_sat = rockphysics.gassmann(k_dry, g_dry, k_min, k_fl, phi)
    rho = (1.0 - phi) * rho_min + phi * rho_fl
    vp, vs = rockphysics.velocities(k_sat, g_sat, rho)
    clay = cap_input("clay_fraction")
    f = np.stack([clay, 1.0 - clay], axis=-1)
    k_m, g_m = rockphysics.voigt_reuss_hill(f, [21.0, 36.6], [7.0, 45.0])
    kd_cap, gd_cap = rockphysics.friable_sand(k_m, g_m, phi_cap, rp.shale_critical_porosity,
                                              rp.shale_coordination_number, sigma)
    k_cap, g_cap = rockphysics.gassmann(kd_cap, gd_cap, k_m, b.modulus, phi_cap)
    rho_cap = (1.0 - phi_cap) * rockphysics.voigt(f, [2.58, 2.65]) + phi_cap * b.density
    vp_cap, vs_cap = rockphysics.velocities(k_cap, g_cap, rho_cap)
    ig = avo.intercept_gradient(vp_cap, vs_cap, rho_cap, vp, vs, rho)
    return {
        **cov,
        "max_depth_m": burial.maximum_depth(hist),
        "time_above_onset_myr": burial.time_above(hist, onset),
        "temperature_c": t_now,
        "pore_pressure_mpa": p_now,
        "effective_stress_mpa": sigma,
        "porosity_mechanical": phi_mech,
        "cement": cement,
        "porosity": phi,
        "k_mineral": k_min,
        "rho_mineral": rho_min,
        "k_dry": k_dry,
        "g_dry": g_dry,
        "k_fluid": k_fl,
        "rho_fluid": rho_fl,
        "k_sat": k_sat,
        "vp": vp,
        "vs": vs,
        "cap_vp": vp_cap,
        "cap_density": rho_cap,
        "intercept": ig.intercept,
        "gradient": ig.gradient,
        "acoustic_impedance": avo.acoustic_impedance(vp, rho),
        "vp_vs": avo.vp_vs_ratio(vp, vs),
    }


def _plain_noise(sc, names, size):
    """Seismic noise drawn over the whole run at once, as a matrix product."""
    seis = sc.rockphysics.seismic
    sd = np.array([seis.noise_sd.get(a, 0.0) for a in names])
    cov = np.diag(sd**2)
    i, j = names.index("intercept"), names.index("gradient")
    cov[i, j] = cov[j, i] = seis.noise_correlation * sd[i] * sd[j]
    w, v = np.linalg.eigh(cov)
    rng = distributions.stream_for(sc.seed, "rockphysics.seismic.noise")
    return rng.standard_normal((size, len(names))) @ (v * np.sqrt(np.clip(w, 0.0, None))).T


def _check_spots(sc, res, spots):
    grid = res.node_values
    shape = res.fields["porosity"].shape
    noise = _plain_noise(sc, res.attributes, int(np.prod(shape))).reshape(
        shape + (len(res.attributes),))
    for node, fac, r in spots:
        expected = _spot(sc, grid, shape, node, fac, r)
        for name, value in expected.items():
            atol = ATOL_CONTRAST if name in ("intercept", "gradient") else 0.0
            np.testing.assert_allclose(res.fields[name][node, fac, r], value[0], rtol=RTOL,
                                       atol=atol, err_msg=f"{name} at {(node, fac, r)}")
        for a, name in enumerate(res.attributes):
            np.testing.assert_allclose(res.samples[node, fac, r, a],
                                       expected[name][0] + noise[node, fac, r, a],
                                       rtol=RTOL, atol=ATOL_CONTRAST)


def test_spot_realisations_match_the_module_functions(example):
    res = forward.simulate(example, realisations=200, chunk_size=1000)
    # One realisation per facies at the shallowest, a mid-basin and the deepest
    # hottest node, first and last realisations included.
    spots = [(0, 0, 0), (0, 1, 199), (13, 2, 57), (25, 3, 123), (47, 0, 199), (47, 1, 3),
             (47, 2, 100), (47, 3, 0), (30, 1, 42)]
    assert np.any(res.fields["cement"][[s[0] for s in spots], [s[1] for s in spots],
                                       [s[2] for s in spots]] > 0)
    _check_spots(example, res, spots)


def test_spot_realisations_of_split_chunks_match_the_module_functions(example):
    # Realisations split across chunks, so the streams are drawn in pieces and
    # skipped where a facies does not read them.
    nodes = np.array([[2750.0, 0.0, 42.0, 0.0], [1400.0, 1200.0, 28.0, 0.0]])
    res = forward.simulate(example, realisations=300, node_values=nodes, chunk_size=64)
    spots = [(0, 0, 0), (0, 1, 64), (0, 2, 299), (0, 3, 150), (1, 0, 77), (1, 1, 299),
             (1, 2, 0), (1, 3, 200)]
    _check_spots(example, res, spots)


# --------------------------------------------------------------------------- random streams


DISTRIBUTIONS = {
    "normal": {"mean": 1.0, "sd": 2.0},
    "truncated_normal": {"mean": 0.39, "sd": 0.01, "low": 0.36, "high": 0.4},
    "uniform": {"low": 1.0, "high": 3.0},
    "triangular": {"low": 0.75, "mode": 0.85, "high": 0.92},
    "lognormal": {"median": 0.22, "sd_log": 0.25},
    "constant": {"value": 3.0},
}


@pytest.mark.parametrize("kind", sorted(DISTRIBUTIONS))
def test_a_stream_drawn_in_pieces_equals_one_draw(kind):
    params = DISTRIBUTIONS[kind]
    whole = distributions.sample(kind, params, distributions.stream_for(7, "x"), 20_011)
    rng = distributions.stream_for(7, "x")
    pieces = [distributions.sample(kind, params, rng, n) for n in (1, 2, 17, 4096, 15_895)]
    np.testing.assert_array_equal(np.concatenate(pieces), whole)


@pytest.mark.parametrize("kind", sorted(DISTRIBUTIONS))
def test_skip_equals_drawing_or_declines(kind):
    params = DISTRIBUTIONS[kind]
    whole = distributions.sample(kind, params, distributions.stream_for(7, "x"), 10_000)
    rng = distributions.stream_for(7, "x")
    state = copy.deepcopy(rng.bit_generator.state)
    skipped = distributions.skip(kind, params, rng, 3_333)
    # Every sampler uses one generator output per value, so every stream can jump.
    assert skipped
    if kind == "constant":
        assert rng.bit_generator.state == state  # uses no random output at all
    np.testing.assert_array_equal(distributions.sample(kind, params, rng, 6_667),
                                  whole[3_333:])


def test_draws_skip_and_draw_keep_the_stream(example):
    dist = example.geology.sand.porosity_surface  # truncated normal
    path = "geology.sand.porosity_surface"
    whole = distributions.sample(dist.kind, dist_params(dist),
                                 distributions.stream_for(example.seed, path), 300)
    draws = forward._Draws(example.seed)
    first = draws(path, dist, 100)
    draws.skip(path, dist, 50)
    rest = draws(path, dist, 150)
    np.testing.assert_array_equal(first, whole[:100])
    np.testing.assert_array_equal(rest, whole[150:])
    # A normal stream is jumped the same way.
    dist = example.geology.sand.compaction_per_km
    path = "geology.sand.compaction_per_km"
    whole = distributions.sample(dist.kind, dist_params(dist),
                                 distributions.stream_for(example.seed, path), 30)
    draws.skip(path, dist, 10)
    np.testing.assert_array_equal(draws(path, dist, 20), whole[10:])


# ---------------------------------------------------------------------- helpers of the speed-up


@pytest.mark.parametrize(
    ("values", "low", "high", "low_open", "high_open"),
    [
        ([0.0, 0.5, 1.0], 0.0, 1.0, False, False),
        ([0.0, 0.5], 0.0, 1.0, True, False),
        ([0.5, 1.0], 0.0, 1.0, False, True),
        ([0.5, np.nan], 0.0, 1.0, False, False),
        ([0.5, np.inf], None, None, False, False),
        ([-np.inf], None, 1.0, False, False),
        ([1e300, -1e300], None, None, False, False),
        ([], 0.0, 1.0, False, False),
        (0.3, 0.0, 1.0, False, False),
        ([[0.2, 1.5], [0.1, 0.3]], 0.0, 1.0, False, False),
    ],
)
def test_in_range_fast_path_decides_like_the_elementwise_test(values, low, high, low_open,
                                                              high_open):
    arr = np.asarray(values, dtype=np.float64)
    bad = ~np.isfinite(arr)
    if low is not None:
        bad |= (arr <= low) if low_open else (arr < low)
    if high is not None:
        bad |= (arr >= high) if high_open else (arr > high)
    if np.any(bad):
        with pytest.raises(ValueError, match="must be"):
            in_range("x", values, low, high, low_open=low_open, high_open=high_open)
    else:
        np.testing.assert_array_equal(
            in_range("x", values, low, high, low_open=low_open, high_open=high_open), arr)
    if np.any(~np.isfinite(arr)):
        with pytest.raises(ValueError, match="must be finite"):
            as_finite("x", values)
    else:
        np.testing.assert_array_equal(as_finite("x", values), arr)


def test_maximum_burial_porosity_is_the_last_age_of_the_path():
    rng = np.random.default_rng(11)
    depth = np.cumsum(rng.uniform(-300.0, 600.0, (50, 7)), axis=-1).clip(0.0, 9000.0)
    phi0, c = rng.uniform(0.3, 0.6, 50), rng.uniform(0.1, 0.6, 50)
    path = compaction.mechanical_porosity(depth, porosity_surface=phi0, mode="depth",
                                          compaction_coefficient_per_km=c)
    now = compaction.maximum_burial_porosity(depth, porosity_surface=phi0, mode="depth",
                                             compaction_coefficient_per_km=c)
    np.testing.assert_array_equal(now, path[:, -1])
    # The running maximum is np.maximum.accumulate, done age by age.
    np.testing.assert_array_equal(
        path, compaction.athy_depth(np.maximum.accumulate(depth, axis=-1), phi0[:, None],
                                    c[:, None]))
    with pytest.raises(ValueError, match="compaction_coefficient_per_km must be between"):
        compaction.maximum_burial_porosity(depth, porosity_surface=phi0, mode="depth",
                                           compaction_coefficient_per_km=-c)


def test_quartz_cement_at_present_is_the_last_age_of_quartz_cement():
    rng = np.random.default_rng(12)
    ages = np.array([120.0, 90.0, 60.0, 30.0, 10.0, 0.0])
    temps = np.cumsum(rng.uniform(-10.0, 35.0, (40, 6)), axis=-1) + 10.0
    kw = {"grain_size_mm": rng.uniform(0.1, 0.4, 40), "quartz_fraction": 0.55,
          "coating_fraction": rng.uniform(0.0, 0.5, 40), "porosity_onset": 0.3,
          "onset_c": 70.0}
    full = diagenesis.quartz_cement(ages, temps, **kw)
    np.testing.assert_array_equal(diagenesis.quartz_cement_at_present(ages, temps, **kw),
                                  full[:, -1])
    assert np.any(full[:, -1] > 0.0) and np.any(full[:, -1] == 0.0)


def test_time_above_matches_the_fraction_of_each_segment():
    rng = np.random.default_rng(13)
    ages = np.array([100.0, 70.0, 40.0, 20.0, 0.0])
    temps = rng.uniform(20.0, 140.0, (60, 5))
    thr = rng.uniform(50.0, 110.0, 60)
    direct = np.sum(burial.segment_fraction_above(temps[:, :-1], temps[:, 1:], thr[:, None])
                    * -np.diff(ages), axis=-1)
    np.testing.assert_allclose(burial.time_above_temperature(ages, temps, thr), direct,
                               rtol=1e-14, atol=1e-12)
    # Whole segments below every threshold add exactly nothing.
    cold = np.full((3, 5), 10.0)
    np.testing.assert_array_equal(burial.time_above_temperature(ages, cold, 50.0), 0.0)
    assert burial.time_above_temperature(ages, cold, 50.0).shape == (3,)


def test_onset_age_matches_the_first_crossing():
    ages = np.array([100.0, 70.0, 40.0, 20.0, 0.0])
    temps = np.array([[20.0, 60.0, 100.0, 80.0, 90.0],   # crosses 70 between 70 and 40 Ma
                      [75.0, 80.0, 90.0, 60.0, 65.0],    # above at the oldest age
                      [20.0, 30.0, 40.0, 50.0, 60.0],    # never
                      [20.0, 70.0, 90.0, 60.0, 80.0]])   # exactly at 70 at 70 Ma
    h = burial.BurialHistory(ages, *(temps,) * 6)
    np.testing.assert_allclose(burial.onset_age(h, 70.0),
                               [70.0 - 30.0 * 10.0 / 40.0, 100.0, np.nan, 70.0], rtol=1e-15)


def test_mineral_mix_is_voigt_reuss_hill_and_mean_density():
    f = np.array([[0.8, 0.15, 0.05], [0.6, 0.3, 0.1], [1.0, 0.0, 0.0]])
    names = ["quartz", "feldspar", "clay"]
    mix = rockphysics.mineral_mix(f, names)
    k = [rockphysics.MINERALS[m].k for m in names]
    g = [rockphysics.MINERALS[m].g for m in names]
    rho = [rockphysics.MINERALS[m].density for m in names]
    vrh = rockphysics.voigt_reuss_hill(f, k, g)
    np.testing.assert_allclose(mix.k, vrh.k, rtol=1e-15)
    np.testing.assert_allclose(mix.g, vrh.g, rtol=1e-15)
    np.testing.assert_allclose(mix.density, rockphysics.voigt(f, rho), rtol=1e-15)
    # Pure quartz is quartz (RPH mineral table values of this module).
    assert mix.k[2] == pytest.approx(36.6) and mix.density[2] == pytest.approx(2.65)
    with pytest.raises(ValueError, match="minerals must be names"):
        rockphysics.mineral_mix(f, ["quartz", "feldspar", "basalt"])
    with pytest.raises(ValueError, match="one entry per mineral"):
        rockphysics.mineral_mix(f, ["quartz", "feldspar"])


def test_harmonic_sums_keep_the_void_rule_per_constituent():
    # Reuss (Wood) average, constituent by constituent: a void present gives 0,
    # an absent void is ignored, and the plain and masked divisions agree.
    f = np.array([[0.25, 0.75], [1.0, 0.0], [0.5, 0.5]])
    m = np.array([[40.0, 0.0], [40.0, 0.0], [40.0, 20.0]])
    np.testing.assert_allclose(rockphysics.reuss(f, m),
                               [0.0, 40.0, 1.0 / (0.5 / 40.0 + 0.5 / 20.0)], rtol=1e-15)
    np.testing.assert_allclose(rockphysics.voigt(f, m), [10.0, 40.0, 30.0], rtol=1e-15)


def test_the_loop_forms_accept_empty_batches_like_the_array_forms():
    ages, empty = [10.0, 0.0], np.empty((0, 2))
    assert burial.time_above_temperature(ages, empty, 50.0).shape == (0,)
    kw = {"grain_size_mm": 0.2, "quartz_fraction": 0.5, "coating_fraction": 0.1,
          "porosity_onset": 0.3}
    assert diagenesis.quartz_cement(ages, empty, **kw).shape == (0, 2)
    assert diagenesis.quartz_cement_at_present(ages, empty, **kw).shape == (0,)
    assert compaction.mechanical_porosity(empty, porosity_surface=0.4, mode="depth",
                                          compaction_coefficient_per_km=0.3).shape == (0, 2)
    bounds = rockphysics.hashin_shtrikman_bounds(np.empty((0, 2)), [30.0, 40.0], [10.0, 20.0])
    assert bounds.k_lower.shape == (0,)
