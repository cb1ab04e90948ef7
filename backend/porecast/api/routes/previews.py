"""Live previews for the scenario workspace: physics curves, validation, input densities."""

from __future__ import annotations

from typing import Annotated, Any, Literal

from fastapi import APIRouter
from pydantic import BaseModel, Field
from starlette.concurrency import run_in_threadpool

from porecast.physics.scenario import ATTRIBUTES, COVARIATES
from porecast.services import previews as svc
from porecast.services import scenarios as scenario_service
from porecast.services.errors import InvalidInput

from ..deps import CurrentUser, IdPath, SessionDep
from ..errors import AUTH, MEMBER

router = APIRouter(tags=["previews"])

PreviewPart = Literal["history", "porosity", "depth_trend", "crossplot", "sweep"]
Attribute = Literal["intercept", "gradient", "acoustic_impedance", "vp_vs"]
Covariate = Literal["present_depth_m", "net_uplift_m", "gradient_c_per_km", "overpressure_mpa"]
assert set(Attribute.__args__) == set(ATTRIBUTES)  # type: ignore[attr-defined]
assert set(Covariate.__args__) == set(COVARIATES)  # type: ignore[attr-defined]


class LocationIn(BaseModel):
    """A map location given by its covariate values (the ranges of the scenario schema)."""

    present_depth_m: float = Field(ge=50, le=8000, description="Present depth of the horizon, m")
    net_uplift_m: float = Field(0.0, ge=0, le=5000, description="Net uplift since max burial, m")
    gradient_c_per_km: float = Field(ge=5, le=120, description="Geothermal gradient, degC/km")
    overpressure_mpa: float = Field(0.0, ge=0, le=100, description="Present overpressure, MPa")


class OverrideIn(BaseModel):
    """One covariate set to a value at every location (the slider)."""

    name: Covariate
    value: float = Field(ge=0, le=8000, description="In the covariate's unit")


class SweepIn(BaseModel):
    """Covariate values of the slider frames; default range: the scenario's nodes."""

    covariate: Covariate = "net_uplift_m"
    low: float | None = Field(None, ge=0, le=8000)
    high: float | None = Field(None, ge=0, le=8000)
    steps: int = Field(9, ge=2, le=21)


class DepthTrendIn(BaseModel):
    """Present depths of the depth sweep, m (default 300 m to a depth kept below 130 degC)."""

    from_m: float | None = Field(None, ge=50, le=8000)
    to_m: float | None = Field(None, ge=50, le=8000)
    steps: int = Field(15, ge=2, le=40)


class PreviewIn(BaseModel):
    """What to preview: the stored document or an unsaved one, where, and which parts."""

    document: dict[str, Any] | None = Field(
        None, description="An unsaved whole scenario document; default the stored one"
    )
    locations: list[LocationIn] = Field(default_factory=list, max_length=5)
    realisations: int = Field(200, ge=20, le=2000, description="Per facies and node")
    parts: list[PreviewPart] = Field(
        default_factory=lambda: list(svc.PARTS), min_length=1, max_length=5
    )
    crossplot_attributes: Annotated[list[Attribute], Field(min_length=2, max_length=2)] | None = (
        None
    )
    crossplot_location: int = Field(0, ge=0, le=4)
    covariate_override: OverrideIn | None = None
    sweep: SweepIn | None = None
    depth_trend: DepthTrendIn | None = None


class PreviewOut(BaseModel):
    """Preview parts (only those asked for), units and compute times (ms)."""

    scenario: dict[str, Any]
    locations: list[dict[str, float]]
    realisations: int
    units: dict[str, str]
    history: list[dict[str, Any]] | None = None
    porosity: list[dict[str, Any]] | None = None
    depth_trend: dict[str, Any] | None = None
    crossplot: dict[str, Any] | None = None
    sweep: dict[str, Any] | None = None
    timing_ms: dict[str, float]


class ValidateIn(BaseModel):
    """A whole unsaved document, or one section to check against the stored others."""

    document: dict[str, Any] | None = None
    section: Literal["burial", "geology", "rockphysics"] | None = None
    data: dict[str, Any] | None = None


class FieldProblem(BaseModel):
    """One problem: dotted field path and a plain-words message."""

    loc: str
    msg: str


class ValidateOut(BaseModel):
    """Whether the document is valid, and every problem with its field path."""

    valid: bool
    errors: list[FieldProblem]


class DensityItemIn(BaseModel):
    """One distribution to draw (``key`` is echoed back, e.g. its field path)."""

    key: str = Field(min_length=1, max_length=300)
    dist: dict[str, Any] | float


class DensityIn(BaseModel):
    """Distributions of scenario inputs whose densities the field editors draw."""

    items: list[DensityItemIn] = Field(min_length=1, max_length=100)
    points: int = Field(61, ge=5, le=401)


class DensityItemOut(BaseModel):
    """Density curve and summary of one distribution, or its validation problems."""

    key: str
    kind: str | None = None
    x: list[float | None] = []
    density: list[float | None] | None = None
    support: list[float | None] = []
    mean: float | None = None
    q10: float | None = None
    q50: float | None = None
    q90: float | None = None
    errors: list[FieldProblem] = []


def _document(db, user, scenario_id: int, given: dict[str, Any] | None) -> dict[str, Any]:
    scenario, _ = scenario_service.get_scenario(db, user, scenario_id, "read_detail")
    return given if given is not None else scenario_service.document_of(scenario)


@router.post("/scenarios/{scenario_id}/preview", response_model=PreviewOut, responses=MEMBER)
async def preview(scenario_id: IdPath, body: PreviewIn, user: CurrentUser, db: SessionDep
                  ) -> PreviewOut:
    """Physics previews of the stored or an unsaved document (nothing is saved)."""
    doc = await run_in_threadpool(_document, db, user, scenario_id, body.document)
    # The preview reads nothing more from the database: end the transaction (and
    # its SQLite write lock, taken for every POST) before computing.
    await run_in_threadpool(db.commit)
    result = await run_in_threadpool(
        svc.preview, doc,
        locations=[loc.model_dump() for loc in body.locations],
        realisations=body.realisations, parts=body.parts,
        crossplot_attributes=body.crossplot_attributes,
        crossplot_location=body.crossplot_location,
        covariate_override=body.covariate_override.model_dump()
        if body.covariate_override else None,
        sweep=body.sweep.model_dump() if body.sweep else None,
        depth_trend=body.depth_trend.model_dump() if body.depth_trend else None,
    )
    return PreviewOut(**result)


@router.post("/scenarios/{scenario_id}/validate", response_model=ValidateOut, responses=MEMBER)
def validate(scenario_id: IdPath, body: ValidateIn, user: CurrentUser, db: SessionDep
             ) -> ValidateOut:
    """Check an unsaved document or section; problems are returned, not raised (nothing saved)."""
    doc = _document(db, user, scenario_id, body.document)
    if body.section is not None:
        if body.data is None:
            raise InvalidInput("give the section's data with the section name",
                               [{"loc": "data", "msg": "required with section"}])
        doc = dict(doc) | {body.section: body.data}
    errors = svc.validation_errors(doc)
    return ValidateOut(valid=not errors, errors=[FieldProblem(**e) for e in errors])


@router.post("/distributions/density", response_model=list[DensityItemOut], responses=AUTH)
def density(body: DensityIn, user: CurrentUser) -> list[DensityItemOut]:
    """Density curves of input distributions for the distribution editors."""
    out = []
    for item in body.items:
        try:
            out.append(DensityItemOut(key=item.key, **svc.distribution_density(
                item.dist, body.points)))
        except InvalidInput as exc:
            out.append(DensityItemOut(key=item.key,
                                      errors=[FieldProblem(loc=str(e.get("loc", "")),
                                                           msg=str(e.get("msg", "")))
                                              for e in exc.errors]))
        except ValueError as exc:
            out.append(DensityItemOut(key=item.key, errors=[FieldProblem(loc="", msg=str(exc))]))
    return out
