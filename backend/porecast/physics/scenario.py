"""Scenario schema: the three discipline sections of a Porecast scenario.

A scenario is a JSON document (``schema_version`` 1) with three sections, each
owned by one discipline:

``burial``
    basin modeller: burial template, covariate nodes (present depth, net
    uplift, geothermal gradient, overpressure) and their uncertainties.
``geology``
    geologist: cap rock, sand mineralogy, grain size, coatings, compaction,
    cementation onset, and the facies list with proportions.
``rockphysics``
    geophysicist: rock-physics models, fluids, attribute set and noise.

Every uncertain input is a :data:`Dist` (a number is shorthand for a constant).
Validation errors carry the dotted field path and the allowed range in plain
words; :func:`validate_scenario` and :func:`validate_section` raise
:class:`ScenarioValidationError` holding all of them.
"""

from __future__ import annotations

import hashlib
import json
import math
from importlib import resources
from typing import Annotated, Any, ClassVar, Literal

from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    ValidationError,
    field_validator,
    model_validator,
)

from . import distributions
from ._checks import describe_range

SCHEMA_VERSION = 1
SECTIONS = ("burial", "geology", "rockphysics")
ATTRIBUTES = ("intercept", "gradient", "acoustic_impedance", "vp_vs")
COVARIATES = ("present_depth_m", "net_uplift_m", "gradient_c_per_km", "overpressure_mpa")


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


# --------------------------------------------------------------------------- distributions


class Constant(_Model):
    """A known value."""

    kind: Literal["constant"] = "constant"
    value: float


class Normal(_Model):
    """Normal law with mean and standard deviation."""

    kind: Literal["normal"]
    mean: float
    sd: float = Field(gt=0)


class TruncatedNormal(_Model):
    """Normal law cut to ``[low, high]``."""

    kind: Literal["truncated_normal"]
    mean: float
    sd: float = Field(gt=0)
    low: float
    high: float

    @model_validator(mode="after")
    def _ordered(self) -> TruncatedNormal:
        if not self.low < self.high:
            raise ValueError(f"low ({self.low:g}) must be below high ({self.high:g})")
        if not self.low <= self.mean <= self.high:
            raise ValueError(f"mean ({self.mean:g}) must lie between low and high")
        return self


class Uniform(_Model):
    """Uniform law on ``[low, high]``."""

    kind: Literal["uniform"]
    low: float
    high: float

    @model_validator(mode="after")
    def _ordered(self) -> Uniform:
        if not self.low < self.high:
            raise ValueError(f"low ({self.low:g}) must be below high ({self.high:g})")
        return self


class Triangular(_Model):
    """Triangular law with minimum, mode and maximum."""

    kind: Literal["triangular"]
    low: float
    mode: float
    high: float

    @model_validator(mode="after")
    def _ordered(self) -> Triangular:
        if not self.low <= self.mode <= self.high or self.low == self.high:
            raise ValueError("need low <= mode <= high with low below high")
        return self


class Lognormal(_Model):
    """Lognormal law given by its median and the standard deviation of ln(x)."""

    kind: Literal["lognormal"]
    median: float = Field(gt=0)
    sd_log: float = Field(gt=0)


Dist = Annotated[
    Constant | Normal | TruncatedNormal | Uniform | Triangular | Lognormal,
    Field(discriminator="kind"),
]


def _number_to_constant(value: Any) -> Any:
    if isinstance(value, int | float) and not isinstance(value, bool):
        return {"kind": "constant", "value": float(value)}
    return value


def dist_params(d: BaseModel) -> dict[str, float]:
    """Parameters of a distribution model as a plain dict (without ``kind``)."""
    return {k: v for k, v in d.model_dump().items() if k != "kind"}


class _Ranged(_Model):
    """Base for sections whose distribution fields have a physical range.

    ``_ranges`` maps a field name to ``(low, high, unit, low_open)``; the
    support of the field's distribution must lie in that range.
    """

    _ranges: ClassVar[dict[str, tuple[float | None, float | None, str, bool]]] = {}

    @model_validator(mode="before")
    @classmethod
    def _numbers_are_constants(cls, data: Any) -> Any:
        if isinstance(data, dict):
            return {k: (_number_to_constant(v) if k in cls._ranges else v) for k, v in data.items()}
        return data

    @field_validator("*", mode="after")
    @classmethod
    def _within_range(cls, d: Any, info: Any) -> Any:
        spec = cls._ranges.get(info.field_name)
        if spec is None or d is None:
            return d
        low, high, unit, low_open = spec
        _check_support(d, low, high, unit, low_open)
        return d


def _check_support(
    d: BaseModel, low: float | None, high: float | None, unit: str, low_open: bool, shift=(0, 0)
) -> None:
    """Raise ValueError when a distribution's support leaves ``[low, high]``."""
    sup = distributions.support(d.kind, dist_params(d))  # type: ignore[attr-defined]
    lo_val, hi_val = sup.low + shift[0], sup.high + shift[1]
    too_low = low is not None and (lo_val <= low if low_open else lo_val < low)
    too_high = high is not None and hi_val > high
    if too_low or too_high:
        what = "value" if d.kind == "constant" else "distribution"  # type: ignore[attr-defined]
        reach = lo_val if too_low else hi_val
        hint = (
            " (normal laws are checked at mean +/- 4 sd)"
            if d.kind in ("normal", "lognormal")
            else ""
        )  # type: ignore[attr-defined]
        raise ValueError(
            f"{what} reaches {reach:g}{' ' + unit if unit else ''}, but it must be "
            f"{describe_range(low, high, unit, low_open)}{hint}"
        )


# --------------------------------------------------------------------------- burial section


class Covariate(_Model):
    """A map-driven covariate: training nodes plus per-realisation uncertainty.

    ``nodes`` are the covariate values at which training data are simulated
    (one node = stationary in this covariate); ``uncertainty`` is an additive
    perturbation drawn per realisation around the node value.
    """

    nodes: list[float] = Field(min_length=1, max_length=50)
    uncertainty: Dist = Field(default_factory=lambda: Constant(value=0.0))

    @field_validator("uncertainty", mode="before")
    @classmethod
    def _num(cls, v: Any) -> Any:
        return _number_to_constant(v)

    @field_validator("nodes")
    @classmethod
    def _increasing(cls, v: list[float]) -> list[float]:
        if any(not math.isfinite(x) for x in v):
            raise ValueError("nodes must be finite numbers")
        if any(b <= a for a, b in zip(v, v[1:], strict=False)):
            raise ValueError("nodes must be strictly increasing")
        return v


_COVARIATE_RANGES: dict[str, tuple[float, float, str]] = {
    "present_depth_m": (50.0, 8000.0, "m"),
    "net_uplift_m": (0.0, 5000.0, "m"),
    "gradient_c_per_km": (5.0, 120.0, "degC/km"),
    "overpressure_mpa": (0.0, 100.0, "MPa"),
}


class Covariates(_Model):
    """The four map-driven covariates of the burial history."""

    present_depth_m: Covariate = Field(description="Present depth of the horizon, m")
    net_uplift_m: Covariate = Field(description="Net uplift (erosion) since maximum burial, m")
    gradient_c_per_km: Covariate = Field(description="Present geothermal gradient, degC/km")
    overpressure_mpa: Covariate = Field(description="Present overpressure, MPa")

    @field_validator("*", mode="after")
    @classmethod
    def _nodes_in_range(cls, cov: Covariate, info: Any) -> Covariate:
        low, high, unit = _COVARIATE_RANGES[info.field_name]
        for node in (min(cov.nodes), max(cov.nodes)):
            if not low <= node <= high:
                raise ValueError(
                    f"node {node:g} {unit} is outside the allowed range "
                    f"{describe_range(low, high, unit)}"
                )
        try:
            _check_support(
                cov.uncertainty, low, high, unit, False, shift=(min(cov.nodes), max(cov.nodes))
            )
        except ValueError as exc:
            raise ValueError(f"nodes plus uncertainty: {exc}") from None
        return cov


class BurialSection(_Model):
    """Burial, thermal and pressure history (basin modeller)."""

    ages_ma: list[float] = Field(
        min_length=2, description="Control ages of the burial phase, Ma, decreasing"
    )
    depth_fraction: list[float] = Field(
        min_length=2,
        description="Fraction of maximum burial depth at each control age (last = 1)",
    )
    uplift_start_ma: float = Field(ge=0, description="Age at which uplift starts, Ma")
    uplift_end_ma: float = Field(ge=0, description="Age at which uplift ends, Ma")
    surface_temperature_c: float = Field(ge=-5, le=40, description="Sea-floor temperature, degC")
    gradient_factor: list[float] | None = Field(
        default=None, description="Paleo-gradient as a multiple of the present gradient"
    )
    overpressure_factor: list[float] | None = Field(
        default=None, description="Paleo-overpressure as a multiple of the present value"
    )
    overburden_density: float = Field(2.30, ge=1.5, le=3.0, description="g/cm3")
    water_density: float = Field(1.03, ge=0.95, le=1.25, description="g/cm3")
    covariates: Covariates

    @model_validator(mode="after")
    def _consistent_template(self) -> BurialSection:
        n = len(self.ages_ma)
        if len(self.depth_fraction) != n:
            raise ValueError(f"depth_fraction needs {n} values, one per entry of ages_ma")
        for name in ("gradient_factor", "overpressure_factor"):
            vals = getattr(self, name)
            if vals is not None and len(vals) != n:
                raise ValueError(f"{name} needs {n} values, one per entry of ages_ma")
            if vals is not None and any(not (0 <= x <= 5) for x in vals):
                raise ValueError(f"{name} values must be between 0 and 5")
        if any(b >= a for a, b in zip(self.ages_ma, self.ages_ma[1:], strict=False)):
            raise ValueError("ages_ma must be strictly decreasing (oldest first)")
        if any(not (0 <= f <= 1) for f in self.depth_fraction):
            raise ValueError("depth_fraction values must be between 0 and 1")
        if abs(self.depth_fraction[-1] - 1.0) > 1e-9:
            raise ValueError("depth_fraction must end at 1 (maximum burial at the uplift start)")
        if abs(self.ages_ma[-1] - self.uplift_start_ma) > 1e-9:
            raise ValueError(
                f"the last control age ({self.ages_ma[-1]:g} Ma) must equal uplift_start_ma "
                f"({self.uplift_start_ma:g} Ma): maximum burial is reached when uplift starts"
            )
        if not self.uplift_end_ma <= self.uplift_start_ma:
            raise ValueError("uplift_end_ma must not be older than uplift_start_ma")
        if self.ages_ma[0] > 500:
            raise ValueError("ages_ma must be at most 500 Ma")
        return self


# --------------------------------------------------------------------------- geology section


class SandProperties(_Ranged):
    """Detrital composition, texture and compaction of a sand."""

    _ranges: ClassVar[dict[str, tuple[float | None, float | None, str, bool]]] = {
        "quartz_fraction": (0.0, 1.0, "", False),
        "clay_fraction": (0.0, 0.5, "", False),
        "grain_size_mm": (0.0, 5.0, "mm", True),
        "coating_fraction": (0.0, 1.0, "", False),
        "porosity_surface": (0.05, 0.6, "", False),
        "compaction_per_km": (0.0, 2.0, "1/km", True),
    }

    quartz_fraction: Dist = Field(description="Detrital quartz, fraction of grains")
    clay_fraction: Dist = Field(description="Clay, fraction of grains; feldspar is the rest")
    grain_size_mm: Dist
    coating_fraction: Dist = Field(description="Fraction of quartz surface with clay coats")
    porosity_surface: Dist = Field(description="Depositional porosity (Athy phi0), fraction")
    compaction_per_km: Dist = Field(description="Athy coefficient c in phi0*exp(-c z), 1/km")

    @model_validator(mode="after")
    def _grains_add_up(self) -> SandProperties:
        q = distributions.support(self.quartz_fraction.kind, dist_params(self.quartz_fraction))
        c = distributions.support(self.clay_fraction.kind, dist_params(self.clay_fraction))
        if q.high + c.high > 1.0 + 1e-9:
            raise ValueError(
                f"quartz_fraction (up to {q.high:g}) plus clay_fraction (up to {c.high:g}) "
                "must not exceed 1; feldspar fills the rest"
            )
        return self


class ShaleProperties(_Ranged):
    """Cap-rock / non-reservoir shale."""

    _ranges: ClassVar[dict[str, tuple[float | None, float | None, str, bool]]] = {
        "clay_fraction": (0.3, 1.0, "", False),
        "porosity_surface": (0.2, 0.8, "", False),
        "compaction_per_km": (0.0, 2.0, "1/km", True),
    }

    clay_fraction: Dist = Field(description="Clay fraction of the shale; the rest is quartz")
    porosity_surface: Dist
    compaction_per_km: Dist


class Facies(_Model):
    """A facies: a rock type with a pore fluid and a prior proportion."""

    name: str = Field(min_length=1, max_length=40, pattern=r"^[A-Za-z0-9_\- ]+$")
    rock: Literal["sand", "shale"]
    fluid: Literal["brine", "oil", "gas"] = "brine"
    proportion: float = Field(gt=0, le=1, description="Prior proportion, fraction")
    sand: SandProperties | None = Field(
        default=None, description="Overrides the section's sand properties for this facies"
    )
    hydrocarbon: bool = Field(
        default=False, description="Counts as hydrocarbon facies in risk numbers"
    )

    @model_validator(mode="after")
    def _fluid_in_sand(self) -> Facies:
        if self.rock == "shale" and self.fluid != "brine":
            raise ValueError("a shale facies carries brine")
        if self.hydrocarbon and self.fluid == "brine":
            raise ValueError("a hydrocarbon facies needs fluid oil or gas")
        return self


class GeologySection(_Model):
    """Sediment, compaction, cementation and facies (geologist)."""

    cap_rock: ShaleProperties
    sand: SandProperties
    facies: list[Facies] = Field(min_length=1, max_length=12)
    cement_onset_c: float = Field(70.0, ge=40, le=150, description="degC")
    compaction_mode: Literal["depth", "stress"] = "depth"

    @field_validator("facies")
    @classmethod
    def _facies_consistent(cls, v: list[Facies]) -> list[Facies]:
        names = [f.name for f in v]
        if len(set(names)) != len(names):
            raise ValueError(f"facies names must be unique (got {names})")
        total = sum(f.proportion for f in v)
        if abs(total - 1.0) > 1e-3:
            raise ValueError(f"facies proportions must add up to 1 (they add up to {total:.4g})")
        return v


# --------------------------------------------------------------------------- rock physics section


class FluidSection(_Ranged):
    """Pore fluids (Batzle & Wang 1992)."""

    _ranges: ClassVar[dict[str, tuple[float | None, float | None, str, bool]]] = {
        "brine_salinity_ppm": (0.0, 300000.0, "ppm", False),
        "oil_api": (10.0, 60.0, "API", False),
        "gor": (0.0, 400.0, "m3/m3", False),
        "gas_gravity": (0.55, 1.5, "", False),
        "hydrocarbon_saturation": (0.0, 1.0, "", False),
    }

    brine_salinity_ppm: Dist
    oil_api: Dist
    gor: Dist = Field(description="Gas-oil ratio, standard m3/m3")
    gas_gravity: Dist
    hydrocarbon_saturation: Dist = Field(description="Hydrocarbon saturation in hc facies")
    mixing: Literal["uniform", "patchy"] = "uniform"


class SeismicSection(_Model):
    """Attribute set and seismic noise."""

    attributes: list[Literal["intercept", "gradient", "acoustic_impedance", "vp_vs"]] = Field(
        min_length=1, max_length=4
    )
    noise_sd: dict[str, float] = Field(
        default_factory=dict, description="Noise standard deviation per attribute, its unit"
    )
    noise_correlation: float = Field(
        0.0, ge=-0.99, le=0.99, description="Correlation of intercept and gradient noise"
    )

    @model_validator(mode="after")
    def _noise_known(self) -> SeismicSection:
        if len(set(self.attributes)) != len(self.attributes):
            raise ValueError("attributes must not repeat")
        for name, sd in self.noise_sd.items():
            if name not in self.attributes:
                raise ValueError(f"noise_sd names {name!r}, which is not in attributes")
            if not (0 <= sd < 1e4) or not math.isfinite(sd):
                raise ValueError(f"noise_sd.{name} must be between 0 and 10000")
        return self


class RockPhysicsSection(_Ranged):
    """Rock-physics models, fluids and the seismic set-up (geophysicist)."""

    _ranges: ClassVar[dict[str, tuple[float | None, float | None, str, bool]]] = {
        "coordination_number": (4.0, 14.0, "", False),
    }

    sand_model: Literal["burial_aware", "friable", "contact_cement", "constant_cement"] = (
        "burial_aware"
    )
    critical_porosity: float = Field(0.40, gt=0.2, lt=0.5)
    shale_critical_porosity: float = Field(0.65, gt=0.3, lt=0.9)
    coordination_number: Dist
    shale_coordination_number: float = Field(9.0, ge=4, le=14)
    cement_scheme: Literal[1, 2] = 2
    constant_cement_porosity: float = Field(
        0.36, gt=0.1, lt=0.5, description="Porosity of the cemented end member (constant cement)"
    )
    fluids: FluidSection
    seismic: SeismicSection

    @model_validator(mode="after")
    def _porosities_ordered(self) -> RockPhysicsSection:
        if self.constant_cement_porosity > self.critical_porosity:
            raise ValueError(
                f"constant_cement_porosity ({self.constant_cement_porosity:g}) must not exceed "
                f"critical_porosity ({self.critical_porosity:g})"
            )
        return self


# --------------------------------------------------------------------------- scenario


class Scenario(_Model):
    """A whole scenario document."""

    schema_version: Literal[1] = SCHEMA_VERSION
    name: str = Field(min_length=1, max_length=120)
    description: str = Field("", max_length=4000)
    seed: int = Field(20261201, ge=0, le=2**32 - 1, description="Master random seed")
    realisations: int = Field(2000, ge=10, le=2_000_000, description="Per facies per node")
    burial: BurialSection
    geology: GeologySection
    rockphysics: RockPhysicsSection


def _cross_section_problems(sc: Scenario) -> list[dict[str, str]]:
    """Checks that join two sections; each problem names the field it is about."""
    problems = []
    phic = sc.rockphysics.critical_porosity
    sands = [("geology.sand", sc.geology.sand)] + [
        (f"geology.facies.{i}.sand", f.sand)
        for i, f in enumerate(sc.geology.facies)
        if f.sand is not None
    ]
    for path, s in sands:
        sup = distributions.support(s.porosity_surface.kind, dist_params(s.porosity_surface))
        if sup.high > phic + 1e-12:
            problems.append(
                {
                    "loc": f"{path}.porosity_surface",
                    "msg": f"reaches {sup.high:g}, above the critical porosity "
                    f"rockphysics.critical_porosity = {phic:g}; a sand is deposited at or "
                    "below its critical porosity",
                }
            )
    shale = sc.geology.cap_rock.porosity_surface
    sup = distributions.support(shale.kind, dist_params(shale))
    phic_sh = sc.rockphysics.shale_critical_porosity
    if sup.high > phic_sh + 1e-12:
        problems.append(
            {
                "loc": "geology.cap_rock.porosity_surface",
                "msg": f"reaches {sup.high:g}, above "
                f"rockphysics.shale_critical_porosity = {phic_sh:g}",
            }
        )
    return problems


class ScenarioValidationError(ValueError):
    """A scenario failed validation; ``errors`` lists ``{"loc", "msg"}`` dicts."""

    def __init__(self, errors: list[dict[str, str]]):
        self.errors = errors
        lines = [f"{e['loc']}: {e['msg']}" if e["loc"] else e["msg"] for e in errors]
        super().__init__("scenario is not valid:\n  " + "\n  ".join(lines))


def _convert(exc: ValidationError, prefix: str = "") -> ScenarioValidationError:
    errors = []
    for err in exc.errors():
        # Drop pydantic's union-tag segments so paths read like the JSON.
        loc = [str(p) for p in err["loc"] if not (isinstance(p, str) and p in distributions.KINDS)]
        path = ".".join(([prefix] if prefix else []) + loc)
        msg = err["msg"]
        if msg.startswith("Value error, "):
            msg = msg[len("Value error, ") :]
        if err["type"] == "greater_than_equal" or err["type"] == "less_than_equal":
            msg = f"{msg} (got {err.get('input')!r})"
        errors.append({"loc": path, "msg": msg})
    return ScenarioValidationError(errors)


_SECTION_MODELS: dict[str, type[BaseModel]] = {
    "burial": BurialSection,
    "geology": GeologySection,
    "rockphysics": RockPhysicsSection,
}


def validate_scenario(doc: dict[str, Any]) -> Scenario:
    """Validate a whole scenario document.

    Raises
    ------
    ScenarioValidationError
        With one entry per problem, each naming the dotted field path.
    """
    try:
        sc = Scenario.model_validate(doc)
    except ValidationError as exc:
        raise _convert(exc) from None
    problems = _cross_section_problems(sc)
    if problems:
        raise ScenarioValidationError(problems)
    return sc


def validate_section(name: str, data: dict[str, Any]) -> dict[str, Any]:
    """Validate one section and return its normalised JSON form."""
    if name not in _SECTION_MODELS:
        raise ScenarioValidationError(
            [{"loc": name, "msg": f"unknown section; allowed: {', '.join(SECTIONS)}"}]
        )
    try:
        model = _SECTION_MODELS[name].model_validate(data)
    except ValidationError as exc:
        raise _convert(exc, prefix=name) from None
    return model.model_dump(mode="json")


def scenario_hash(doc: dict[str, Any]) -> str:
    """SHA-256 of the canonical JSON of a (validated) scenario document."""
    canonical = json.dumps(doc, sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(canonical.encode()).hexdigest()


def default_scenario() -> dict[str, Any]:
    """The bundled example scenario (an invented basin), as a JSON dict."""
    text = resources.files("porecast.examples").joinpath("example_scenario.json").read_text()
    return json.loads(text)


def load_scenario(path: str) -> Scenario:
    """Read and validate a scenario JSON file."""
    with open(path, encoding="utf-8") as fh:
        try:
            doc = json.load(fh)
        except json.JSONDecodeError as exc:
            raise ScenarioValidationError(
                [{"loc": "", "msg": f"{path} is not valid JSON: {exc.msg} at line {exc.lineno}"}]
            ) from None
    return validate_scenario(doc)
