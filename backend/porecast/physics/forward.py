"""Monte Carlo forward model: from a scenario to facies training data.

For every covariate node (the Cartesian grid of the scenario's present depth,
net uplift, gradient and overpressure nodes) and every facies, ``N``
realisations are drawn and pushed, fully vectorised, through

burial history -> mechanical compaction -> quartz cementation (Walderhaug)
-> mineral mixing -> dry-rock model -> fluids (Batzle & Wang, Wood)
-> Gassmann -> velocities and density -> intercept and gradient against the
cap-rock shale, acoustic impedance and Vp/Vs -> seismic noise.

Every intermediate is kept for QC. All arrays of a :class:`ForwardResult`
have shape ``(n_nodes, n_facies, n_realisations)``.

Modelling choices (documented here once):

* Cementation stabilises the framework: once a sand reaches the onset
  temperature its mechanical compaction stops, and the porosity it had then
  (``porosity_onset``) is reduced by quartz cement only (common practice,
  after Walderhaug 1996). A sand that never reaches the onset keeps the
  mechanical porosity of its maximum burial.
* ``burial_aware`` sands take the stiffer of the friable-sand moduli at the
  present effective stress and the contact-cement moduli of the cement they
  carry (cement added to the pack at ``porosity_onset``), so an uncemented
  sand is friable and a cemented one stiffens continuously.
* Shales (cap rock and shale facies) compact by Athy's law and take the
  friable (soft-sand) dry-rock model of Dvorkin & Nur (1996) on their
  clay-quartz mineral at the shale critical porosity; Nur's linear
  critical-porosity model was tried and gives shales far too stiff in shear
  (Vp/Vs near 1.8 at 28 % porosity, against about 2.2 in compacting shales,
  common practice).
* The cap rock is a shale realisation at the same location, drawn
  independently of the reservoir realisation.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, NamedTuple

import numpy as np

from . import avo, burial, compaction, diagenesis, distributions, fluids, rockphysics
from ._checks import FloatArray
from .scenario import COVARIATES, Scenario, dist_params

#: Names of the per-realisation quantities kept in :attr:`ForwardResult.fields`.
FIELDS = (
    "present_depth_m",
    "net_uplift_m",
    "gradient_c_per_km",
    "overpressure_mpa",
    "max_depth_m",
    "max_temperature_c",
    "time_above_onset_myr",
    "temperature_c",
    "pore_pressure_mpa",
    "effective_stress_mpa",
    "porosity_mechanical",
    "cement",
    "porosity",
    "k_mineral",
    "g_mineral",
    "rho_mineral",
    "k_dry",
    "g_dry",
    "k_fluid",
    "rho_fluid",
    "k_sat",
    "g_sat",
    "density",
    "vp",
    "vs",
    "cap_vp",
    "cap_vs",
    "cap_density",
    "intercept",
    "gradient",
    "acoustic_impedance",
    "vp_vs",
)

#: Unit of each field, for plots and summaries.
UNITS = {
    "present_depth_m": "m",
    "net_uplift_m": "m",
    "gradient_c_per_km": "degC/km",
    "overpressure_mpa": "MPa",
    "max_depth_m": "m",
    "max_temperature_c": "degC",
    "time_above_onset_myr": "Myr",
    "temperature_c": "degC",
    "pore_pressure_mpa": "MPa",
    "effective_stress_mpa": "MPa",
    "porosity_mechanical": "fraction",
    "cement": "fraction",
    "porosity": "fraction",
    "k_mineral": "GPa",
    "g_mineral": "GPa",
    "rho_mineral": "g/cm3",
    "k_dry": "GPa",
    "g_dry": "GPa",
    "k_fluid": "GPa",
    "rho_fluid": "g/cm3",
    "k_sat": "GPa",
    "g_sat": "GPa",
    "density": "g/cm3",
    "vp": "m/s",
    "vs": "m/s",
    "cap_vp": "m/s",
    "cap_vs": "m/s",
    "cap_density": "g/cm3",
    "intercept": "",
    "gradient": "",
    "acoustic_impedance": "(m/s)(g/cm3)",
    "vp_vs": "",
}

Progress = Callable[[int, int, str], None]


class ForwardResult(NamedTuple):
    """Samples of one scenario run."""

    facies: tuple[str, ...]
    """Facies names, in scenario order."""
    attributes: tuple[str, ...]
    """Attribute names of :attr:`samples`, in scenario order."""
    node_axes: dict[str, FloatArray]
    """Covariate name -> node values (1-D, increasing)."""
    node_values: FloatArray
    """Covariate values of each node, shape (n_nodes, 4), columns in COVARIATES order."""
    samples: FloatArray
    """Attribute samples with noise, shape (n_nodes, n_facies, n_realisations, n_attributes)."""
    fields: dict[str, FloatArray]
    """Every intermediate (noise-free), name -> (n_nodes, n_facies, n_realisations)."""

    @property
    def grid_shape(self) -> tuple[int, ...]:
        """Shape of the covariate node grid, one axis per covariate."""
        return tuple(len(self.node_axes[c]) for c in COVARIATES)


def covariate_grid(scenario: Scenario) -> tuple[dict[str, FloatArray], FloatArray]:
    """Node axes and the flattened Cartesian grid of covariate nodes.

    Returns
    -------
    node_axes : dict
        Covariate name -> node values.
    node_values : ndarray of shape (n_nodes, 4)
        Columns in :data:`COVARIATES` order, C order over the grid.
    """
    covs = scenario.burial.covariates
    axes = {c: np.asarray(getattr(covs, c).nodes, dtype=np.float64) for c in COVARIATES}
    mesh = np.meshgrid(*(axes[c] for c in COVARIATES), indexing="ij")
    return axes, np.stack([m.ravel() for m in mesh], axis=-1)


def burial_template(scenario: Scenario) -> burial.BurialTemplate:
    """The scenario's burial template, extended to the present (0 Ma)."""
    b = scenario.burial
    ages = list(b.ages_ma)
    frac = list(b.depth_fraction)
    gf = list(b.gradient_factor) if b.gradient_factor else [1.0] * len(ages)
    of = list(b.overpressure_factor) if b.overpressure_factor else [1.0] * len(ages)
    if ages[-1] > 0.0:
        # After maximum burial the present-day maps apply: factors are 1 at 0 Ma.
        ages.append(0.0)
        frac.append(1.0)
        gf.append(1.0)
        of.append(1.0)
    return burial.BurialTemplate(
        ages_ma=tuple(ages),
        depth_fraction=tuple(frac),
        uplift_start_ma=b.uplift_start_ma,
        uplift_end_ma=b.uplift_end_ma,
        surface_temperature_c=b.surface_temperature_c,
        gradient_factor=tuple(gf),
        overpressure_factor=tuple(of),
    )


class _Draws:
    """Draws of every uncertain input, one reproducible stream per field path.

    ``overrides`` maps a field path to a fixed value (one-at-a-time sensitivity
    runs); every other input keeps its own stream, so the swing of one input is
    measured with common random numbers for all the others.
    """

    def __init__(self, seed: int, size: int, overrides: dict[str, float] | None = None):
        self.seed = seed
        self.size = size
        self.overrides = overrides or {}

    def __call__(self, path: str, dist: Any) -> FloatArray:
        if path in self.overrides:
            return np.full(self.size, float(self.overrides[path]))
        rng = distributions.stream_for(self.seed, path)
        return distributions.sample(dist.kind, dist_params(dist), rng, self.size)


def uncertain_inputs(scenario: Scenario) -> dict[str, Any]:
    """Every uncertain input of a scenario: field path -> distribution model.

    Constant inputs are left out; the paths are those used by the streams of
    :func:`simulate` and by the ``overrides`` of a sensitivity run.
    """
    out: dict[str, Any] = {}
    covs = scenario.burial.covariates
    for c in COVARIATES:
        out[f"burial.covariates.{c}.uncertainty"] = getattr(covs, c).uncertainty
    g = scenario.geology
    for name in type(g.cap_rock).model_fields:
        out[f"geology.cap_rock.{name}"] = getattr(g.cap_rock, name)
    for name in type(g.sand).model_fields:
        out[f"geology.sand.{name}"] = getattr(g.sand, name)
    for i, f in enumerate(g.facies):
        if f.sand is not None:
            for name in type(f.sand).model_fields:
                out[f"geology.facies.{i}.sand.{name}"] = getattr(f.sand, name)
    rp = scenario.rockphysics
    out["rockphysics.coordination_number"] = rp.coordination_number
    for name in ("brine_salinity_ppm", "oil_api", "gor", "gas_gravity", "hydrocarbon_saturation"):
        out[f"rockphysics.fluids.{name}"] = getattr(rp.fluids, name)
    return {k: v for k, v in out.items() if v.kind != "constant"}


def simulate(
    scenario: Scenario,
    *,
    realisations: int | None = None,
    node_values: FloatArray | None = None,
    overrides: dict[str, float] | None = None,
    progress: Progress | None = None,
) -> ForwardResult:
    """Run the Monte Carlo forward model of a scenario.

    Parameters
    ----------
    scenario : Scenario
        A validated scenario.
    realisations : int, optional
        Realisations per facies per node; default the scenario's own.
    node_values : ndarray of shape (n_nodes, 4), optional
        Covariate values to simulate at instead of the scenario's node grid
        (columns in :data:`COVARIATES` order), e.g. a single well location.
    overrides : dict, optional
        Field path -> fixed value, for one-at-a-time sensitivity runs.
    progress : callable, optional
        ``progress(done, total, stage)`` called after each stage.

    Returns
    -------
    ForwardResult
    """
    step = _Stepper(progress, _STAGES)
    try:
        return _simulate(scenario, realisations, node_values, overrides, step)
    except ValueError as exc:
        raise ValueError(
            f"simulation stopped while computing {step.current}: {exc}. Check the scenario "
            "inputs that feed this stage (for fluids: temperature and pressure at the hottest, "
            "deepest node must stay inside the Batzle-Wang ranges)"
        ) from exc


_STAGES = (
    "burial history",
    "compaction and cementation",
    "minerals",
    "dry rock",
    "fluids",
    "saturated rock",
    "attributes",
)


def _simulate(
    scenario: Scenario,
    realisations: int | None,
    node_values: FloatArray | None,
    overrides: dict[str, float] | None,
    step: _Stepper,
) -> ForwardResult:
    n = int(realisations or scenario.realisations)
    if n < 2:
        raise ValueError(f"realisations must be at least 2 (got {n})")
    axes, grid = covariate_grid(scenario)
    if node_values is not None:
        grid = np.atleast_2d(np.asarray(node_values, dtype=np.float64))
        if grid.shape[1] != len(COVARIATES):
            raise ValueError(
                f"node_values must have shape (n_nodes, {len(COVARIATES)}), got {grid.shape}"
            )
        axes = {c: np.unique(grid[:, i]) for i, c in enumerate(COVARIATES)}
    n_nodes = grid.shape[0]
    facies = scenario.geology.facies
    n_fac = len(facies)
    shape = (n_nodes, n_fac, n)
    size = n_nodes * n_fac * n
    draw = _Draws(scenario.seed, size, overrides)

    # --- burial history: node value + per-realisation perturbation
    covs = scenario.burial.covariates
    cov_vals = {}
    for i, c in enumerate(COVARIATES):
        base = np.broadcast_to(grid[:, i][:, None, None], shape).ravel()
        cov_vals[c] = base + draw(
            f"burial.covariates.{c}.uncertainty", getattr(covs, c).uncertainty
        )
    hist = burial.burial_paths(
        burial_template(scenario),
        cov_vals["present_depth_m"],
        cov_vals["net_uplift_m"],
        cov_vals["gradient_c_per_km"],
        cov_vals["overpressure_mpa"],
        overburden_density=scenario.burial.overburden_density,
        water_density=scenario.burial.water_density,
    )
    onset_c = scenario.geology.cement_onset_c
    step("burial history")

    # --- per-facies rock descriptors (sand or shale), flattened to `size`
    is_shale = (
        np.repeat(np.array([f.rock == "shale" for f in facies])[None, :, None], n_nodes, 0)
        .repeat(n, 2)
        .ravel()
    )
    sand = _sand_draws(scenario, draw, shape)
    shale = _shale_draws(scenario, draw, "geology.cap_rock", size)
    res_shale = _shale_draws(scenario, draw, "geology.cap_rock#facies", size)

    # --- mechanical compaction (irreversible) and cementation
    mode = scenario.geology.compaction_mode
    ob_gradient = (scenario.burial.overburden_density - scenario.burial.water_density) * (
        burial.STANDARD_GRAVITY * 1e-3
    )  # MPa per m of hydrostatic effective stress

    def mech(h: burial.BurialHistory, phi0: FloatArray, c_per_km: FloatArray) -> FloatArray:
        if mode == "depth":
            return compaction.mechanical_porosity(
                h, porosity_surface=phi0, mode="depth", compaction_coefficient_per_km=c_per_km
            )
        # Stress form with the coefficient that matches the depth form under a
        # hydrostatic pore pressure: beta = c / (d sigma'/dz).
        return compaction.mechanical_porosity(
            h,
            porosity_surface=phi0,
            mode="stress",
            compaction_coefficient_per_mpa=c_per_km / (ob_gradient * 1e3),
        )

    # Sand and reservoir-shale chains run only on their own realisations; the
    # draws above cover every realisation so the random streams stay aligned.
    in_sand = ~is_shale
    hs = _rows(hist, in_sand)
    sand = {k: v[in_sand] for k, v in sand.items()}
    phi_path_sand = mech(hs, sand["porosity_surface"], sand["compaction_per_km"])
    onset_age = burial.onset_age(hs, onset_c)
    cemented = np.isfinite(onset_age)
    phi_onset = np.where(cemented, _at_age(hs.ages_ma, phi_path_sand, onset_age), np.nan)
    phi_mech_sand = np.where(cemented, phi_onset, phi_path_sand[:, -1])
    cement_path = diagenesis.quartz_cement(
        hs.ages_ma,
        hs.temperature_c,
        grain_size_mm=sand["grain_size_mm"],
        quartz_fraction=diagenesis.bulk_quartz_fraction(sand["quartz_fraction"], phi_mech_sand),
        coating_fraction=sand["coating_fraction"],
        porosity_onset=phi_mech_sand,
        onset_c=onset_c,
    )
    cement_sand = np.where(cemented, cement_path[:, -1], 0.0)
    phi_sand = phi_mech_sand - cement_sand
    phi_cap = mech(hist, shale["porosity_surface"], shale["compaction_per_km"])[:, -1]
    hsh = _rows(hist, is_shale)
    res_shale = {k: v[is_shale] for k, v in res_shale.items()}
    phi_res_shale = mech(hsh, res_shale["porosity_surface"], res_shale["compaction_per_km"])[:, -1]
    step("compaction and cementation")

    # --- minerals (Voigt-Reuss-Hill)
    q, cl = sand["quartz_fraction"], sand["clay_fraction"]
    m_sand = _mineral_mix({"quartz": q, "feldspar": 1.0 - q - cl, "clay": cl})
    m_cap = _mineral_mix({"clay": shale["clay_fraction"], "quartz": 1.0 - shale["clay_fraction"]})
    m_res_shale = _mineral_mix(
        {"clay": res_shale["clay_fraction"], "quartz": 1.0 - res_shale["clay_fraction"]}
    )
    step("minerals")

    # --- dry rock
    sigma_now = hist.effective_stress_mpa[:, -1]
    rp = scenario.rockphysics
    coord = draw("rockphysics.coordination_number", rp.coordination_number)
    kd_sand, gd_sand = _sand_dry(
        rp, m_sand, phi_sand, phi_mech_sand, cement_sand, coord[in_sand], sigma_now[in_sand]
    )
    # Compaction-driven shale: its Athy porosity in the friable (soft-sand) model
    # on the clay-quartz mineral, at the shale's critical porosity and the
    # present effective stress.
    kd_cap, gd_cap = rockphysics.friable_sand(
        m_cap.k,
        m_cap.g,
        phi_cap,
        rp.shale_critical_porosity,
        rp.shale_coordination_number,
        sigma_now,
    )
    kd_rsh, gd_rsh = rockphysics.friable_sand(
        m_res_shale.k,
        m_res_shale.g,
        phi_res_shale,
        rp.shale_critical_porosity,
        rp.shale_coordination_number,
        sigma_now[is_shale],
    )
    step("dry rock")

    # --- fluids at present pore pressure and temperature
    t_now = hist.temperature_c[:, -1]
    p_now = hist.pore_pressure_mpa[:, -1]
    fl = rp.fluids
    sal = draw("rockphysics.fluids.brine_salinity_ppm", fl.brine_salinity_ppm)
    b = fluids.brine(t_now, p_now, sal)
    sh = draw("rockphysics.fluids.hydrocarbon_saturation", fl.hydrocarbon_saturation)
    fluid_kind = (
        np.repeat(np.array([f.fluid for f in facies])[None, :, None], n_nodes, 0)
        .repeat(n, 2)
        .ravel()
    )
    k_hc = np.full(size, np.nan)
    rho_hc = np.full(size, np.nan)
    gas_mask = fluid_kind == "gas"
    oil_mask = fluid_kind == "oil"
    if gas_mask.any():
        grav = draw("rockphysics.fluids.gas_gravity", fl.gas_gravity)
        gprops = fluids.gas(t_now[gas_mask], p_now[gas_mask], grav[gas_mask])
        k_hc[gas_mask], rho_hc[gas_mask] = gprops.modulus, gprops.density
    if oil_mask.any():
        api = draw("rockphysics.fluids.oil_api", fl.oil_api)
        gor = draw("rockphysics.fluids.gor", fl.gor)
        ggrav = draw("rockphysics.fluids.gas_gravity", fl.gas_gravity)
        oprops = fluids.oil(
            t_now[oil_mask], p_now[oil_mask], api[oil_mask], gor[oil_mask], ggrav[oil_mask]
        )
        k_hc[oil_mask], rho_hc[oil_mask] = oprops.modulus, oprops.density
    hc = gas_mask | oil_mask
    s_hc = np.where(hc, sh, 0.0)
    k_hc = np.where(hc, k_hc, b.modulus)
    rho_hc = np.where(hc, rho_hc, b.density)
    sat = np.stack([1.0 - s_hc, s_hc], axis=-1)
    k_fl = fluids.wood(sat, np.stack([b.modulus, k_hc], axis=-1))
    rho_fl = fluids.mix_density(sat, np.stack([b.density, rho_hc], axis=-1))
    step("fluids")

    # --- saturated rock: reservoir facies and cap rock
    phi = _merge(is_shale, phi_res_shale, phi_sand)
    k_min = _merge(is_shale, m_res_shale.k, m_sand.k)
    g_min = _merge(is_shale, m_res_shale.g, m_sand.g)
    rho_min = _merge(is_shale, m_res_shale.rho, m_sand.rho)
    k_dry = _merge(is_shale, kd_rsh, kd_sand)
    g_dry = _merge(is_shale, gd_rsh, gd_sand)
    if fl.mixing == "patchy":
        k_sat, g_sat = rockphysics.patchy_saturation(
            k_dry, g_dry, k_min, phi, np.stack([b.modulus, k_hc], axis=-1), sat
        )
    else:
        k_sat, g_sat = rockphysics.gassmann(k_dry, g_dry, k_min, k_fl, phi)
    rho = (1.0 - phi) * rho_min + phi * rho_fl
    vp, vs = rockphysics.velocities(k_sat, g_sat, rho)
    k_cap, g_cap = rockphysics.gassmann(kd_cap, gd_cap, m_cap.k, b.modulus, phi_cap)
    rho_cap = (1.0 - phi_cap) * m_cap.rho + phi_cap * b.density
    vp_cap, vs_cap = rockphysics.velocities(k_cap, g_cap, rho_cap)
    step("saturated rock")

    # --- attributes and noise
    ig = avo.intercept_gradient(vp_cap, vs_cap, rho_cap, vp, vs, rho)
    attrs_all = {
        "intercept": ig.intercept,
        "gradient": ig.gradient,
        "acoustic_impedance": avo.acoustic_impedance(vp, rho),
        "vp_vs": avo.vp_vs_ratio(vp, vs),
    }
    names = tuple(scenario.rockphysics.seismic.attributes)
    samples = np.stack([attrs_all[a] for a in names], axis=-1)
    samples = samples + _noise(scenario, names, size)
    step("attributes")

    fields = {
        "present_depth_m": cov_vals["present_depth_m"],
        "net_uplift_m": cov_vals["net_uplift_m"],
        "gradient_c_per_km": cov_vals["gradient_c_per_km"],
        "overpressure_mpa": cov_vals["overpressure_mpa"],
        "max_depth_m": burial.maximum_depth(hist),
        "max_temperature_c": burial.maximum_temperature(hist),
        "time_above_onset_myr": burial.time_above(hist, onset_c),
        "temperature_c": t_now,
        "pore_pressure_mpa": p_now,
        "effective_stress_mpa": sigma_now,
        "porosity_mechanical": _merge(is_shale, phi_res_shale, phi_mech_sand),
        "cement": _merge(is_shale, np.zeros(int(is_shale.sum())), cement_sand),
        "porosity": phi,
        "k_mineral": k_min,
        "g_mineral": g_min,
        "rho_mineral": rho_min,
        "k_dry": k_dry,
        "g_dry": g_dry,
        "k_fluid": k_fl,
        "rho_fluid": rho_fl,
        "k_sat": k_sat,
        "g_sat": g_sat,
        "density": rho,
        "vp": vp,
        "vs": vs,
        "cap_vp": vp_cap,
        "cap_vs": vs_cap,
        "cap_density": rho_cap,
        **attrs_all,
    }
    return ForwardResult(
        facies=tuple(f.name for f in facies),
        attributes=names,
        node_axes=axes,
        node_values=grid,
        samples=samples.reshape(shape + (len(names),)),
        fields={k: np.asarray(v).reshape(shape) for k, v in fields.items()},
    )


class _Stepper:
    """Reports finished stages and remembers the one in progress (for error messages)."""

    def __init__(self, progress: Progress | None, stages: tuple[str, ...]):
        self.progress, self.stages, self.done = progress, stages, 0

    @property
    def current(self) -> str:
        return self.stages[min(self.done, len(self.stages) - 1)]

    def __call__(self, stage: str) -> None:
        self.done += 1
        if self.progress is not None:
            self.progress(self.done, len(self.stages), stage)


def _sand_draws(scenario: Scenario, draw: _Draws, shape: tuple[int, int, int]) -> dict[str, Any]:
    """Sand properties per realisation; facies with their own sand use their own streams."""
    g = scenario.geology
    out = {
        name: draw(f"geology.sand.{name}", getattr(g.sand, name))
        for name in type(g.sand).model_fields
    }
    for i, f in enumerate(g.facies):
        if f.sand is None:
            continue
        own = {
            name: draw(f"geology.facies.{i}.sand.{name}", getattr(f.sand, name))
            for name in type(f.sand).model_fields
        }
        for name, values in own.items():
            arr = out[name].reshape(shape).copy()
            arr[:, i, :] = values.reshape(shape)[:, i, :]
            out[name] = arr.ravel()
    return out


def _shale_draws(scenario: Scenario, draw: _Draws, path: str, size: int) -> dict[str, Any]:
    cap = scenario.geology.cap_rock
    base = "geology.cap_rock"
    out = {}
    for name in type(cap).model_fields:
        # The reservoir-shale facies draws from its own streams (path suffix)
        # but an override of the cap-rock input applies to both.
        full = f"{path}.{name}" if path == base else f"{base}.{name}#facies"
        if path != base and f"{base}.{name}" in draw.overrides:
            full = f"{base}.{name}"
        out[name] = draw(full, getattr(cap, name))
    return out


def _mineral_mix(fractions: dict[str, FloatArray]) -> Any:
    names = list(fractions)
    f = np.stack([fractions[m] for m in names], axis=-1)
    k = np.array([rockphysics.MINERALS[m].k for m in names])
    g = np.array([rockphysics.MINERALS[m].g for m in names])
    rho = np.array([rockphysics.MINERALS[m].density for m in names])
    mod = rockphysics.voigt_reuss_hill(f, k, g)
    return _Mineral(mod.k, mod.g, f @ rho)


class _Mineral(NamedTuple):
    k: FloatArray
    g: FloatArray
    rho: FloatArray


def _sand_dry(
    rp: Any,
    m: _Mineral,
    phi: FloatArray,
    phi_onset: FloatArray,
    cement: FloatArray,
    coord: FloatArray,
    sigma: FloatArray,
) -> tuple[FloatArray, FloatArray]:
    """Dry-rock moduli of the sands for the scenario's sand model."""
    phic = rp.critical_porosity
    quartz = rockphysics.MINERALS["quartz"]
    model = rp.sand_model
    if model == "friable":
        return rockphysics.friable_sand(m.k, m.g, phi, phic, coord, sigma)
    if model == "contact_cement":
        return rockphysics.contact_cement(
            m.k, m.g, quartz.k, quartz.g, phi, phic, coord, rp.cement_scheme
        )
    if model == "constant_cement":
        phib = rp.constant_cement_porosity
        low = phi <= phib
        k_cc, g_cc = rockphysics.contact_cement(
            m.k, m.g, quartz.k, quartz.g, np.maximum(phi, phib), phic, coord, rp.cement_scheme
        )
        k_c, g_c = rockphysics.constant_cement(
            m.k,
            m.g,
            quartz.k,
            quartz.g,
            np.minimum(phi, phib),
            phic,
            phib,
            coord,
            rp.cement_scheme,
        )
        return np.where(low, k_c, k_cc), np.where(low, g_c, g_cc)
    # burial_aware: friable pack, stiffened by the contact cement it carries.
    k_f, g_f = rockphysics.friable_sand(m.k, m.g, phi, phic, coord, sigma)
    has_cement = cement > 0.0
    k_c, g_c = rockphysics.contact_cement(
        m.k,
        m.g,
        quartz.k,
        quartz.g,
        phi,
        np.where(has_cement, phi_onset, phi),
        coord,
        rp.cement_scheme,
    )
    return (
        np.where(has_cement, np.maximum(k_f, k_c), k_f),
        np.where(has_cement, np.maximum(g_f, g_c), g_f),
    )


def _rows(hist: burial.BurialHistory, mask: np.ndarray) -> burial.BurialHistory:
    """The paths of ``hist`` selected by a boolean mask over its first axis."""
    return burial.BurialHistory(hist.ages_ma, *(a[mask] for a in hist[1:]))


def _merge(mask: np.ndarray, where_true: FloatArray, where_false: FloatArray) -> FloatArray:
    """Full-length array from the values of the masked and the unmasked realisations."""
    out = np.empty(mask.shape, dtype=np.float64)
    out[mask] = where_true
    out[~mask] = where_false
    return out


def _at_age(ages: FloatArray, values: FloatArray, age: FloatArray) -> FloatArray:
    """Per-path linear interpolation of ``values`` (n, n_times) at ``age`` (n,)."""
    a = np.where(np.isfinite(age), age, ages[-1])
    # ages decrease: index of the first control age younger than or equal to `a`
    idx = np.clip(np.searchsorted(-ages, -a, side="left"), 1, ages.size - 1)
    a0, a1 = ages[idx - 1], ages[idx]
    w = (a0 - a) / (a0 - a1)
    rows = np.arange(values.shape[0])
    return values[rows, idx - 1] + w * (values[rows, idx] - values[rows, idx - 1])


def _noise(scenario: Scenario, names: tuple[str, ...], size: int) -> FloatArray:
    """Seismic noise per attribute; intercept and gradient noise may be correlated."""
    seis = scenario.rockphysics.seismic
    sd = np.array([seis.noise_sd.get(a, 0.0) for a in names])
    cov = np.diag(sd**2)
    if "intercept" in names and "gradient" in names:
        i, j = names.index("intercept"), names.index("gradient")
        cov[i, j] = cov[j, i] = seis.noise_correlation * sd[i] * sd[j]
    if not np.any(sd > 0):
        return np.zeros((size, len(names)))
    rng = distributions.stream_for(scenario.seed, "rockphysics.seismic.noise")
    # Cholesky of a possibly singular covariance (zero sd): use eigen-decomposition.
    w, v = np.linalg.eigh(cov)
    factor = v * np.sqrt(np.clip(w, 0.0, None))
    return rng.standard_normal((size, len(names))) @ factor.T


def node_statistics(result: ForwardResult) -> list[dict[str, Any]]:
    """Per facies and node: count, mean and covariance of the attribute samples.

    Returns
    -------
    list of dict
        One entry per (node, facies) with keys ``node`` (covariate values),
        ``facies``, ``count``, ``mean`` and ``covariance``.
    """
    out = []
    for i in range(result.node_values.shape[0]):
        node = dict(zip(COVARIATES, map(float, result.node_values[i]), strict=True))
        for j, name in enumerate(result.facies):
            x = result.samples[i, j]
            out.append(
                {
                    "node": node,
                    "facies": name,
                    "count": int(x.shape[0]),
                    "mean": x.mean(axis=0).tolist(),
                    "covariance": np.atleast_2d(np.cov(x, rowvar=False)).tolist(),
                }
            )
    return out
