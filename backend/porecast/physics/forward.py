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

How the run is organised for speed (results do not depend on it): the run is
cut into windows of consecutive realisations (:data:`CHUNK_SIZE`), each
window's inputs are drawn from random streams that continue from window to
window, and the chain runs on one facies of a window at a time, so that its
intermediate arrays stay in the CPU cache and a block never needs masks.
The equations are those of the physics modules, called through their public
functions (which check their arguments).
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
    inputs: dict[str, FloatArray] = {}
    """With ``simulate(keep_inputs=True)``: the drawn value of every uncertain input,
    stream path -> (n_nodes, n_facies, n_realisations), NaN where a facies does not
    read that input (e.g. oil gravity in a gas sand); empty otherwise."""

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

    Each call continues its path's stream, so a run drawn in consecutive pieces
    (``count`` values at a time, in the flat order of the result) gets exactly
    the values of a single draw over the whole run: numpy's generators carry no
    buffered state between calls (tested in tests/physics/test_forward_regression.py).
    Drawing piece by piece keeps the draws in cache and off the heap.
    """

    def __init__(self, seed: int, overrides: dict[str, float] | None = None):
        self.seed = seed
        self.overrides = overrides or {}
        self._streams: dict[str, tuple[np.random.Generator, dict[str, float]]] = {}

    def __call__(self, path: str, dist: Any, count: int) -> FloatArray:
        if path in self.overrides:
            return np.full(count, float(self.overrides[path]))
        rng, params = self._stream(path, dist)
        return distributions.sample(dist.kind, params, rng, count)

    def skip(self, path: str, dist: Any, count: int) -> None:
        """Move a path's stream past ``count`` values that nothing reads."""
        if path in self.overrides:
            return
        rng, params = self._stream(path, dist)
        if not distributions.skip(dist.kind, params, rng, count):
            distributions.sample(dist.kind, params, rng, count)

    def _stream(self, path: str, dist: Any) -> tuple[np.random.Generator, dict[str, float]]:
        # Generator and parameters are kept per path: the stream continues from
        # piece to piece, and the model is not dumped again for every piece.
        stream = self._streams.get(path)
        if stream is None:
            stream = self._streams[path] = (distributions.stream_for(self.seed, path),
                                            dist_params(dist))
        return stream


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


#: Realisations per chunk of the deterministic chain. The run is cut into
#: consecutive windows of its flat (node, facies, realisation) order; each
#: window's inputs are drawn from streams that continue from window to window
#: (so their values are those of one draw over the whole run), and the chain
#: runs on one facies of a window at a time. Its many intermediate arrays then
#: stay in the CPU cache instead of streaming through main memory, and nothing
#: but the outputs ever exists at full size. Chosen by measurement with
#: benchmarks/forward.py (one core, 2 MB of L2): 16384 to 49152 are within
#: the noise of a shared machine, smaller chunks pay per-call overhead, larger
#: ones spill the (n, n_ages) burial arrays out of the cache.
CHUNK_SIZE = 32_768


def simulate(
    scenario: Scenario,
    *,
    realisations: int | None = None,
    node_values: FloatArray | None = None,
    overrides: dict[str, float] | None = None,
    progress: Progress | None = None,
    chunk_size: int | None = None,
    keep_inputs: bool = False,
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
        ``progress(done, total, stage)`` called after each stage of each
        chunk of realisations.
    chunk_size : int, optional
        Realisations per chunk of the deterministic chain (default
        :data:`CHUNK_SIZE`); a tuning knob for speed and memory only, the
        results do not depend on it.
    keep_inputs : bool
        Also return the drawn value of every uncertain input per realisation
        (:attr:`ForwardResult.inputs`, for variance-based sensitivity from the
        sample); costs one full-size array per input.

    Returns
    -------
    ForwardResult

    Notes
    -----
    When some inputs make a stage fail, the error names the earliest stage
    that fails for any realisation, and reports the first such realisation
    in (node, facies, realisation) order, as if every stage ran over the
    whole run before the next.
    """
    chunk = CHUNK_SIZE if chunk_size is None else int(chunk_size)
    if chunk < 1:
        raise ValueError(f"chunk_size must be at least 1 (got {chunk_size})")
    step = _Stepper(progress, _STAGES)
    try:
        return _simulate(scenario, realisations, node_values, overrides, step, chunk,
                         keep_inputs)
    except _StageFailure as failure:
        stage, exc = failure.stage, failure.error
    except ValueError as error:
        stage, exc = step.current, error
    raise ValueError(
        f"simulation stopped while computing {stage}: {exc}. Check the scenario "
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
    chunk: int,
    keep_inputs: bool = False,
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
    shape = (n_nodes, len(facies), n)
    names = tuple(scenario.rockphysics.seismic.attributes)
    draw = _Draws(scenario.seed, overrides)
    inputs = _input_streams(scenario, draw.overrides)
    noise = _Noise(scenario, names)

    # Outputs are allocated once at full size and filled chunk by chunk.
    fields = {name: np.empty(shape) for name in FIELDS}
    samples = np.empty(shape + (len(names),))
    kept: dict[str, FloatArray] = {}
    windows = _windows(n_nodes, len(facies), n, chunk)
    step.total = sum(f.stop - f.start for _, f, _ in windows) * len(_STAGES)
    chain = _Chain(scenario)
    _keep_chunk_memory(chunk)
    # The earliest failing stage over the run, with the first error raised in it.
    failure: tuple[int, ValueError] | None = None
    for rows, fac_range, cols in windows:
        dims = (rows.stop - rows.start, fac_range.stop - fac_range.start, cols.stop - cols.start)
        count = dims[0] * dims[1] * dims[2]
        window = _WindowInputs(draw, inputs, dims)
        eps = noise(count)
        base = {c: np.repeat(grid[rows, i], dims[2]) for i, c in enumerate(COVARIATES)}
        for jj, j in enumerate(range(fac_range.start, fac_range.stop)):
            step.start_chunk()
            try:
                out = chain(j, window.reader(jj, j), base, step)
            except _StopChunk:
                continue
            except ValueError as exc:
                # Finish the run only up to the failing stage, so that an earlier
                # stage failing in a later chunk is the one reported, as it would
                # be if each stage ran over all realisations first.
                if failure is None or step.stage < failure[0]:
                    failure = (step.stage, exc)
                    step.limit = step.stage
                continue
            if failure is not None:
                continue
            part = (rows, j, cols)
            for name, values in out.items():
                fields[name][part] = values.reshape(dims[0], dims[2])
            for a, name in enumerate(names):
                target = samples[part + (a,)]
                if eps is None:
                    target[...] = fields[name][part]
                else:
                    np.add(fields[name][part], eps[a].reshape(dims)[:, jj, :], out=target)
        if keep_inputs:
            for path, values in window.drawn.items():
                if path not in kept:
                    kept[path] = np.full(shape, np.nan)
                read = window.read_by.get(path, set())
                for jj, j in enumerate(range(fac_range.start, fac_range.stop)):
                    if j in read:
                        kept[path][rows, j, cols] = values[:, jj, :]
        window.skip_unread()
    if failure is not None:
        raise _StageFailure(_STAGES[failure[0]], failure[1])
    return ForwardResult(
        facies=tuple(f.name for f in facies),
        attributes=names,
        node_axes=axes,
        node_values=grid,
        samples=samples,
        fields=fields,
        inputs=kept,
    )


def _keep_chunk_memory(chunk: int) -> None:
    """Let the C allocator keep the memory of one chunk's temporaries for the next chunk.

    glibc's malloc serves blocks of 128 KiB or more by mmap and returns freed
    heap memory above 128 KiB to the system, so by default each chunk's
    temporaries are faulted in anew: measured, 20 to 30 % of the run time on
    the first run in a process (a CLI run), none on later runs. The
    allocator raises both thresholds for good once an mmap block is freed
    (documented glibc behaviour, up to 32 MiB, as happens in any numpy program
    after its first large temporary); freeing one block a few times the chunk's
    working set does that up front. Elsewhere this is an allocation and a free.
    """
    size = min(32 << 20, max(4 << 20, 512 * chunk))
    block = np.empty(size, dtype=np.uint8)
    del block


def _windows(n_nodes: int, n_fac: int, n: int, chunk: int) -> list[tuple[slice, slice, slice]]:
    """Consecutive pieces of the flat (node, facies, realisation) order of a run.

    Each piece is ``(node rows, facies, realisations)`` slices; taken in list
    order they cover the run once, in flat order, which is the order the
    random streams are drawn in. Large runs give one node and facies per piece
    with the realisations split into near-equal parts of at most ``chunk`` (no
    tiny last part); small runs group whole nodes, all facies, so that a
    chunk of the chain is not dominated by per-call overhead.
    """
    if n >= chunk:
        parts = -(-n // chunk)
        edges = [k * n // parts for k in range(parts + 1)]
        return [
            (slice(i, i + 1), slice(j, j + 1), slice(a, b))
            for i in range(n_nodes)
            for j in range(n_fac)
            for a, b in zip(edges[:-1], edges[1:], strict=True)
        ]
    per = max(1, chunk // n)
    return [
        (slice(i, min(i + per, n_nodes)), slice(0, n_fac), slice(0, n))
        for i in range(0, n_nodes, per)
    ]


def _input_streams(scenario: Scenario, overrides: dict[str, float]) -> dict[str, tuple[str, Any]]:
    """Every input the chain reads: its key -> (stream path, distribution).

    Keys are stream paths except for two families: ``sand.<name>#<facies index>``
    reads the facies' own sand stream when it has one, the section's sand
    stream otherwise; ``geology.cap_rock.<name>#facies`` is the reservoir-shale
    facies' own stream, or the cap-rock input when that is overridden. Each
    stream covers every realisation of the run even where only some facies
    read it (the stretches nobody reads are skipped), so its values do not
    depend on the facies list; streams no facies reads are not drawn at all.
    """
    out: dict[str, tuple[str, Any]] = {}
    covs = scenario.burial.covariates
    for c in COVARIATES:
        path = f"burial.covariates.{c}.uncertainty"
        out[path] = (path, getattr(covs, c).uncertainty)
    g = scenario.geology
    facies = g.facies
    for name in type(g.cap_rock).model_fields:
        path = f"geology.cap_rock.{name}"
        out[path] = (path, getattr(g.cap_rock, name))
        if any(f.rock == "shale" for f in facies):
            # The reservoir-shale facies draws from its own streams (path suffix)
            # but an override of the cap-rock input applies to both.
            own = path if path in overrides else f"{path}#facies"
            out[f"{path}#facies"] = (own, getattr(g.cap_rock, name))
    sands = [i for i, f in enumerate(facies) if f.rock == "sand"]
    for i in sands:
        own = facies[i].sand
        for name in type(g.sand).model_fields:
            if own is not None:
                out[f"sand.{name}#{i}"] = (f"geology.facies.{i}.sand.{name}", getattr(own, name))
            else:
                out[f"sand.{name}#{i}"] = (f"geology.sand.{name}", getattr(g.sand, name))
    rp = scenario.rockphysics
    fl = rp.fluids
    kinds = {f.fluid for f in facies}
    wanted = [
        ("coordination_number", rp.coordination_number, bool(sands)),
        ("fluids.brine_salinity_ppm", fl.brine_salinity_ppm, True),
        ("fluids.hydrocarbon_saturation", fl.hydrocarbon_saturation, bool(kinds - {"brine"})),
        # One stream serves the gas of gas sands and the dissolved gas of oil.
        ("fluids.gas_gravity", fl.gas_gravity, bool(kinds & {"gas", "oil"})),
        ("fluids.oil_api", fl.oil_api, "oil" in kinds),
        ("fluids.gor", fl.gor, "oil" in kinds),
    ]
    for name, dist, needed in wanted:
        if needed:
            out[f"rockphysics.{name}"] = (f"rockphysics.{name}", dist)
    return out


class _WindowInputs:
    """The inputs of one window of the run, each stream drawn when first read.

    A stream is drawn for the whole window (all its facies) at its first read;
    :meth:`skip_unread` then moves every stream that no facies of the window
    read past the window (by jumping, or by drawing and dropping), so that
    all streams stay aligned with the flat order of the run.
    """

    def __init__(self, draw: _Draws, inputs: dict[str, tuple[str, Any]],
                 dims: tuple[int, int, int]):
        self.draw, self.inputs, self.dims = draw, inputs, dims
        self.count = dims[0] * dims[1] * dims[2]
        self.drawn: dict[str, FloatArray] = {}
        # path -> facies indices of the run (not of the window) that read it
        self.read_by: dict[str, set[int]] = {}

    def reader(self, facies: int, run_facies: int | None = None) -> Callable[[str], FloatArray]:
        """``read(key)`` of the window's ``facies``-th facies: flat values of that input."""

        def read(key: str) -> FloatArray:
            path, dist = self.inputs[key]
            if path not in self.drawn:
                self.drawn[path] = self.draw(path, dist, self.count).reshape(self.dims)
            self.read_by.setdefault(path, set()).add(facies if run_facies is None
                                                      else run_facies)
            return self.drawn[path][:, facies, :].reshape(-1)

        return read

    def skip_unread(self) -> None:
        for path, dist in dict(self.inputs.values()).items():
            if path not in self.drawn:
                self.draw.skip(path, dist, self.count)


class _Noise:
    """Seismic noise per attribute; intercept and gradient noise may be correlated.

    Drawn piece by piece like the inputs: each call continues the noise stream.
    """

    def __init__(self, scenario: Scenario, names: tuple[str, ...]):
        seis = scenario.rockphysics.seismic
        sd = np.array([seis.noise_sd.get(a, 0.0) for a in names])
        cov = np.diag(sd**2)
        if "intercept" in names and "gradient" in names:
            i, j = names.index("intercept"), names.index("gradient")
            cov[i, j] = cov[j, i] = seis.noise_correlation * sd[i] * sd[j]
        self.rng = None
        if np.any(sd > 0):
            self.rng = distributions.stream_for(scenario.seed, "rockphysics.seismic.noise")
        # Cholesky of a possibly singular covariance (zero sd): use eigen-decomposition.
        w, v = np.linalg.eigh(cov)
        self.factor = v * np.sqrt(np.clip(w, 0.0, None))

    def __call__(self, count: int) -> FloatArray | None:
        """Noise of the next ``count`` realisations, shape (n_attributes, count); None if none."""
        if self.rng is None:
            return None
        z = self.rng.standard_normal((count, self.factor.shape[0]))
        # z @ factor.T written as sums in a fixed order: a BLAS product may round
        # differently depending on how the run is split, this does not.
        out = np.empty((self.factor.shape[0], count))
        for a, row in enumerate(self.factor):
            np.multiply(z[:, 0], row[0], out=out[a])
            for b in range(1, row.size):
                out[a] += z[:, b] * row[b]
        return out


class _Chain:
    """The deterministic chain for one block of realisations of one facies.

    A block holds a single facies, so its rock (sand or shale) and pore fluid
    are fixed: no masks, gathers or merges are needed inside the chain.
    """

    def __init__(self, scenario: Scenario):
        self.scenario = scenario
        self.template = burial_template(scenario)
        self.onset_c = scenario.geology.cement_onset_c
        b = scenario.burial
        self.mode = scenario.geology.compaction_mode
        # MPa per m of hydrostatic effective stress.
        self.ob_gradient = (b.overburden_density - b.water_density) * (
            burial.STANDARD_GRAVITY * 1e-3
        )

    def _athy(self, c_per_km: FloatArray) -> dict[str, Any]:
        if self.mode == "depth":
            return {"mode": "depth", "compaction_coefficient_per_km": c_per_km}
        # Stress form with the coefficient that matches the depth form under a
        # hydrostatic pore pressure: beta = c / (d sigma'/dz).
        return {
            "mode": "stress",
            "compaction_coefficient_per_mpa": c_per_km / (self.ob_gradient * 1e3),
        }

    def __call__(
        self,
        j: int,
        take: Callable[[str], FloatArray],
        base: dict[str, FloatArray],
        step: _Stepper,
    ) -> dict[str, FloatArray]:
        sc = self.scenario
        rp = sc.rockphysics
        fac = sc.geology.facies[j]
        onset_c = self.onset_c

        # --- burial history: node value + per-realisation perturbation
        cov = {c: base[c] + take(f"burial.covariates.{c}.uncertainty") for c in COVARIATES}
        hist = burial.burial_paths(
            self.template,
            cov["present_depth_m"],
            cov["net_uplift_m"],
            cov["gradient_c_per_km"],
            cov["overpressure_mpa"],
            overburden_density=sc.burial.overburden_density,
            water_density=sc.burial.water_density,
        )
        t_now = hist.temperature_c[:, -1]
        p_now = hist.pore_pressure_mpa[:, -1]
        sigma_now = hist.effective_stress_mpa[:, -1]
        out = dict(cov)
        out["max_depth_m"] = burial.maximum_depth(hist)
        out["max_temperature_c"] = burial.maximum_temperature(hist)
        out["time_above_onset_myr"] = burial.time_above(hist, onset_c)
        out["temperature_c"] = t_now
        out["pore_pressure_mpa"] = p_now
        out["effective_stress_mpa"] = sigma_now
        step("burial history")

        # --- mechanical compaction (irreversible) and cementation
        cap_path = "geology.cap_rock"
        phi_cap = compaction.maximum_burial_porosity(
            hist,
            porosity_surface=take(f"{cap_path}.porosity_surface"),
            **self._athy(take(f"{cap_path}.compaction_per_km")),
        )
        if fac.rock == "shale":
            phi = compaction.maximum_burial_porosity(
                hist,
                porosity_surface=take(f"{cap_path}.porosity_surface#facies"),
                **self._athy(take(f"{cap_path}.compaction_per_km#facies")),
            )
            phi_mech = phi
            cement = np.zeros(phi.shape)
        else:
            sand = {name: take(f"sand.{name}#{j}") for name in type(sc.geology.sand).model_fields}
            phi_path = compaction.mechanical_porosity(
                hist,
                porosity_surface=sand["porosity_surface"],
                **self._athy(sand["compaction_per_km"]),
            )
            onset_age = burial.onset_age(hist, onset_c)
            cemented = np.isfinite(onset_age)
            phi_onset = np.where(cemented, _at_age(hist.ages_ma, phi_path, onset_age), np.nan)
            phi_mech = np.where(cemented, phi_onset, phi_path[:, -1])
            cement_now = diagenesis.quartz_cement_at_present(
                hist.ages_ma,
                hist.temperature_c,
                grain_size_mm=sand["grain_size_mm"],
                quartz_fraction=diagenesis.bulk_quartz_fraction(
                    sand["quartz_fraction"], phi_mech
                ),
                coating_fraction=sand["coating_fraction"],
                porosity_onset=phi_mech,
                onset_c=onset_c,
            )
            cement = np.where(cemented, cement_now, 0.0)
            phi = phi_mech - cement
        step("compaction and cementation")

        # --- minerals (Voigt-Reuss-Hill)
        cap_clay = take(f"{cap_path}.clay_fraction")
        m_cap = _mineral_mix({"clay": cap_clay, "quartz": 1.0 - cap_clay})
        if fac.rock == "shale":
            clay = take(f"{cap_path}.clay_fraction#facies")
            m = _mineral_mix({"clay": clay, "quartz": 1.0 - clay})
        else:
            # The solid of a cemented sand is its grains plus the quartz cement.
            q, cl = sand["quartz_fraction"], sand["clay_fraction"]
            grains = 1.0 - phi_mech
            solid = grains + cement
            m = _mineral_mix({
                "quartz": (q * grains + cement) / solid,
                "feldspar": (1.0 - q - cl) * grains / solid,
                "clay": cl * grains / solid,
            })
        step("minerals")

        # --- dry rock
        # Compaction-driven shale: its Athy porosity in the friable (soft-sand)
        # model on the clay-quartz mineral, at the shale's critical porosity and
        # the present effective stress.
        kd_cap, gd_cap = rockphysics.friable_sand(
            m_cap.k, m_cap.g, phi_cap, rp.shale_critical_porosity,
            rp.shale_coordination_number, sigma_now,
        )
        if fac.rock == "shale":
            k_dry, g_dry = rockphysics.friable_sand(
                m.k, m.g, phi, rp.shale_critical_porosity, rp.shale_coordination_number,
                sigma_now,
            )
        else:
            coord = take("rockphysics.coordination_number")
            k_dry, g_dry = _sand_dry(rp, m, phi, phi_mech, cement, coord, sigma_now)
        step("dry rock")

        # --- fluids at present pore pressure and temperature
        fl = rp.fluids
        b = fluids.brine(t_now, p_now, take("rockphysics.fluids.brine_salinity_ppm"))
        if fac.fluid == "gas":
            hc = fluids.gas(t_now, p_now, take("rockphysics.fluids.gas_gravity"))
        elif fac.fluid == "oil":
            hc = fluids.oil(
                t_now,
                p_now,
                take("rockphysics.fluids.oil_api"),
                take("rockphysics.fluids.gor"),
                take("rockphysics.fluids.gas_gravity"),
            )
        else:
            # Brine facies: a zero "hydrocarbon" saturation of brine.
            hc = b
        s_hc = (
            take("rockphysics.fluids.hydrocarbon_saturation")
            if fac.fluid != "brine"
            else np.zeros(t_now.shape)
        )
        # Constituents along the last axis, stored constituent-major so that the
        # mixing rules work on contiguous columns.
        sat = np.stack([1.0 - s_hc, s_hc]).T
        k_fluids = np.stack([b.modulus, hc.modulus]).T
        k_fl = fluids.wood(sat, k_fluids)
        rho_fl = fluids.mix_density(sat, np.stack([b.density, hc.density]).T)
        step("fluids")

        # --- saturated rock: reservoir facies and cap rock
        if fl.mixing == "patchy":
            k_sat, g_sat = rockphysics.patchy_saturation(k_dry, g_dry, m.k, phi, k_fluids, sat)
        else:
            k_sat, g_sat = rockphysics.gassmann(k_dry, g_dry, m.k, k_fl, phi)
        rho = (1.0 - phi) * m.density + phi * rho_fl
        vp, vs = rockphysics.velocities(k_sat, g_sat, rho)
        k_cap, g_cap = rockphysics.gassmann(kd_cap, gd_cap, m_cap.k, b.modulus, phi_cap)
        rho_cap = (1.0 - phi_cap) * m_cap.density + phi_cap * b.density
        vp_cap, vs_cap = rockphysics.velocities(k_cap, g_cap, rho_cap)
        step("saturated rock")

        # --- attributes (noise is added by the caller)
        ig = avo.intercept_gradient(vp_cap, vs_cap, rho_cap, vp, vs, rho)
        out.update(
            porosity_mechanical=phi_mech,
            cement=cement,
            porosity=phi,
            k_mineral=m.k,
            g_mineral=m.g,
            rho_mineral=m.density,
            k_dry=k_dry,
            g_dry=g_dry,
            k_fluid=k_fl,
            rho_fluid=rho_fl,
            k_sat=k_sat,
            g_sat=g_sat,
            density=rho,
            vp=vp,
            vs=vs,
            cap_vp=vp_cap,
            cap_vs=vs_cap,
            cap_density=rho_cap,
            intercept=ig.intercept,
            gradient=ig.gradient,
            acoustic_impedance=avo.acoustic_impedance(vp, rho),
            vp_vs=avo.vp_vs_ratio(vp, vs),
        )
        step("attributes")
        return out


class _Stepper:
    """Reports finished stages and remembers the one in progress (for error messages).

    The stages repeat for every chunk: ``total`` is set once the number of
    chunks is known, :meth:`start_chunk` starts a chunk at the first stage,
    and a chunk stops (``_StopChunk``) before reaching stage ``limit``.
    """

    def __init__(self, progress: Progress | None, stages: tuple[str, ...]):
        self.progress, self.stages, self.done = progress, stages, 0
        self.total = len(stages)
        self.stage = 0
        self.limit = len(stages)

    @property
    def current(self) -> str:
        return self.stages[min(self.stage, len(self.stages) - 1)]

    def start_chunk(self) -> None:
        self.stage = 0

    def __call__(self, stage: str) -> None:
        self.done += 1
        self.stage += 1
        if self.progress is not None:
            self.progress(self.done, self.total, stage)
        if self.limit <= self.stage < len(self.stages):
            raise _StopChunk


class _StopChunk(Exception):
    """A chunk stops before a stage that has already failed elsewhere in the run."""


class _StageFailure(Exception):
    """The earliest stage that failed in a run, and the error it raised."""

    def __init__(self, stage: str, error: ValueError):
        super().__init__(stage)
        self.stage, self.error = stage, error


def _mineral_mix(fractions: dict[str, FloatArray]) -> rockphysics.MineralMix:
    names = list(fractions)
    # Constituents along the last axis, stored constituent-major (contiguous
    # columns) so that the mixing sums run as whole-column operations.
    return rockphysics.mineral_mix(np.stack([fractions[m] for m in names]).T, names)


def _sand_dry(
    rp: Any,
    m: rockphysics.MineralMix,
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
    k = np.where(has_cement, np.maximum(k_f, k_c), k_f)
    g = np.where(has_cement, np.maximum(g_f, g_c), g_f)
    # The contact-cement fit extrapolated to large cement volumes (porosity
    # near zero) can overshoot what any frame of this mineral can reach; no dry
    # frame is stiffer than the Hashin-Shtrikman upper bound of mineral and
    # empty pores (RPH section 4.1), so the frame is held at that bound.
    k_up, g_up = rockphysics.hashin_shtrikman_upper_dry(m.k, m.g, phi)
    return np.minimum(k, k_up), np.minimum(g, g_up)


def _at_age(ages: FloatArray, values: FloatArray, age: FloatArray) -> FloatArray:
    """Per-path linear interpolation of ``values`` (n, n_times) at ``age`` (n,)."""
    a = np.where(np.isfinite(age), age, ages[-1])
    # ages decrease: index of the first control age younger than or equal to `a`,
    # i.e. the number of ages older than `a` (a few whole-array comparisons are
    # cheaper than a binary search per path for a short age grid).
    count = np.zeros(a.shape, dtype=np.intp)
    for older in ages:
        count += older > a
    idx = np.clip(count, 1, ages.size - 1)
    a0, a1 = ages[idx - 1], ages[idx]
    w = (a0 - a) / (a0 - a1)
    rows = np.arange(values.shape[0])
    return values[rows, idx - 1] + w * (values[rows, idx] - values[rows, idx - 1])


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
