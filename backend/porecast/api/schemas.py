"""Request and response bodies of the API (pydantic), separate from the ORM models."""

from __future__ import annotations

from datetime import datetime
from typing import Any, Literal, cast

from pydantic import BaseModel, ConfigDict, Field

from porecast.db import models as m
from porecast.services import scenarios as scenario_service

Role = Literal["owner", "basin_modeller", "geologist", "geophysicist", "reviewer", "viewer"]
SectionName = Literal["burial", "geology", "rockphysics"]
Name = Field(min_length=1, max_length=120)
MAX_ID = 2**31 - 1


class _Out(BaseModel):
    model_config = ConfigDict(from_attributes=True)


# --------------------------------------------------------------------------- auth, users


class LoginIn(BaseModel):
    """User name and password."""

    username: str = Field(min_length=1, max_length=64)
    password: str = Field(min_length=1, max_length=1024)


class UserOut(_Out):
    """An account (never its password hash)."""

    id: int
    username: str
    email: str | None
    is_admin: bool
    created_at: datetime


class LoginOut(BaseModel):
    """The logged-in user and the CSRF token to send in X-CSRF-Token."""

    user: UserOut
    csrf_token: str


class PasswordChangeIn(BaseModel):
    """Current and new password (12 to 128 characters)."""

    current_password: str = Field(min_length=1, max_length=1024)
    new_password: str = Field(min_length=1, max_length=1024)


class UserCreateIn(BaseModel):
    """A new account (administrators)."""

    username: str = Field(min_length=2, max_length=64)
    password: str = Field(min_length=1, max_length=1024)
    email: str | None = Field(None, max_length=254)
    is_admin: bool = False


class TokenCreateIn(BaseModel):
    """Name and optional lifetime of a personal API token."""

    name: str = Field(min_length=1, max_length=100)
    expires_days: int | None = Field(None, ge=1, le=3650)


class TokenOut(_Out):
    """A personal API token without its value."""

    id: int
    name: str
    prefix: str
    created_at: datetime
    expires_at: datetime | None
    last_used_at: datetime | None


class TokenCreatedOut(TokenOut):
    """A new token; ``token`` is shown this once only."""

    token: str


# --------------------------------------------------------------------------- projects


class ProjectIn(BaseModel):
    """A new project."""

    name: str = Name
    description: str = Field("", max_length=4000)


class ProjectPatch(BaseModel):
    """Project fields to change."""

    name: str | None = Field(None, min_length=1, max_length=120)
    description: str | None = Field(None, max_length=4000)


class ProjectOut(_Out):
    """A project and the caller's role in it."""

    id: int
    name: str
    description: str
    created_at: datetime
    role: Role


class MemberIn(BaseModel):
    """A user to add and their role."""

    username: str = Field(min_length=1, max_length=64)
    role: Role


class MemberPatch(BaseModel):
    """A member's new role."""

    role: Role


class MemberOut(BaseModel):
    """A project member."""

    user_id: int
    username: str
    role: Role
    since: datetime

    @classmethod
    def of(cls, member: m.Membership) -> MemberOut:
        return cls(user_id=member.user_id, username=member.user.username,
                   role=cast(Role, member.role),
                   since=member.created_at)


class ActivityOut(BaseModel):
    """One entry of the activity feed."""

    id: int
    actor: str | None
    verb: str
    object_type: str
    object_id: int | None
    summary: str
    data: dict[str, Any]
    created_at: datetime

    @classmethod
    def of(cls, a: m.Activity) -> ActivityOut:
        return cls(id=a.id, actor=a.actor.username if a.actor else None, verb=a.verb,
                   object_type=a.object_type, object_id=a.object_id, summary=a.summary,
                   data=a.data, created_at=a.created_at)


# --------------------------------------------------------------------------- scenarios


class ScenarioCreateIn(BaseModel):
    """A new scenario; without ``document`` it starts from the bundled example."""

    name: str = Name
    description: str | None = Field(None, max_length=4000)
    document: dict[str, Any] | None = Field(
        None, description="A whole scenario document (science package schema)"
    )


class ScenarioPatch(BaseModel):
    """Top-level scenario fields to change (needs the scenario ETag)."""

    model_config = ConfigDict(extra="forbid")

    name: str | None = Field(None, min_length=1, max_length=120)
    description: str | None = Field(None, max_length=4000)
    seed: int | None = None
    realisations: int | None = None
    message: str = Field("", max_length=500)


class ForkIn(BaseModel):
    """Name of the fork and the revision to start from (default: latest)."""

    name: str = Name
    revision: int | None = Field(None, ge=1, le=MAX_ID)


class SectionStateOut(BaseModel):
    """State of one section: its ETag, last-change revision, ready flag, open comments."""

    section: SectionName
    etag: str
    revision: int
    ready: bool
    ready_by_id: int | None
    ready_at: datetime | None
    unresolved_comments: int


class ScenarioOut(BaseModel):
    """Scenario metadata and section states (no section contents)."""

    id: int
    project_id: int
    name: str
    description: str
    head_revision: int
    etag: str
    forked_from_scenario_id: int | None
    forked_from_revision: int | None
    created_at: datetime
    updated_at: datetime
    sections: list[SectionStateOut]
    runnable: bool

    @classmethod
    def of(cls, s: m.Scenario, counts: dict[str, int]) -> ScenarioOut:
        states = [
            SectionStateOut(
                section=cast(SectionName, row.section),
                etag=scenario_service.section_etag(s.id, row.section, row.revision),
                revision=row.revision, ready=row.ready, ready_by_id=row.ready_by_id,
                ready_at=row.ready_at, unresolved_comments=counts.get(row.section, 0),
            )
            for row in s.sections
        ]
        return cls(
            id=s.id, project_id=s.project_id, name=s.name,
            description=str(s.meta.get("description", "")), head_revision=s.head_revision,
            etag=scenario_service.scenario_etag(s),
            forked_from_scenario_id=s.forked_from_scenario_id,
            forked_from_revision=s.forked_from_revision, created_at=s.created_at,
            updated_at=s.updated_at, sections=states, runnable=all(x.ready for x in states),
        )


class DocumentOut(BaseModel):
    """The whole scenario document at its latest revision."""

    scenario_id: int
    revision: int
    etag: str
    document: dict[str, Any]
    section_etags: dict[str, str]


class SectionOut(BaseModel):
    """One section's JSON and state."""

    scenario_id: int
    section: SectionName
    etag: str
    revision: int
    ready: bool
    data: dict[str, Any]


class SectionPutIn(BaseModel):
    """A whole new section (science package schema)."""

    data: dict[str, Any]
    message: str = Field("", max_length=500)


class SectionPatchIn(BaseModel):
    """A JSON Merge Patch (RFC 7396) for the section: null deletes a key."""

    patch: dict[str, Any]
    message: str = Field("", max_length=500)


class ReadyIn(BaseModel):
    """Mark the section (at the version named by If-Match) ready or not."""

    ready: bool


class DiffEntry(BaseModel):
    """One differing field: dotted path, kind of change, old and new values."""

    path: str
    op: Literal["change", "add", "remove"]
    old: Any = None
    new: Any = None


class RevisionSummaryOut(BaseModel):
    """A revision without its document."""

    number: int
    kind: str
    section: str | None
    author: str | None
    created_at: datetime
    message: str
    changes: int
    document_hash: str

    @classmethod
    def of(cls, r: m.ScenarioRevision) -> RevisionSummaryOut:
        return cls(number=r.number, kind=r.kind, section=r.section,
                   author=r.author.username if r.author else None, created_at=r.created_at,
                   message=r.message, changes=len(r.diff), document_hash=r.document_hash)


class RevisionOut(RevisionSummaryOut):
    """A revision with its diff and the whole document after it."""

    diff: list[DiffEntry]
    document: dict[str, Any]

    @classmethod
    def of(cls, r: m.ScenarioRevision) -> RevisionOut:  # type: ignore[override]
        base = RevisionSummaryOut.of(r).model_dump()
        return cls(**base, diff=r.diff, document=r.document)


class RevertIn(BaseModel):
    """Revert the whole scenario, or one section only."""

    section: SectionName | None = None


class ComparisonOut(BaseModel):
    """Differences from document a to document b, field by field."""

    a_scenario_id: int
    a_revision: int
    b_scenario_id: int
    b_revision: int
    differences: list[DiffEntry]


# --------------------------------------------------------------------------- comments


class CommentIn(BaseModel):
    """A new thread (with an anchor) or a reply (``parent_id``, no anchor)."""

    body: str = Field(min_length=1, max_length=10000)
    parent_id: int | None = Field(None, ge=1, le=MAX_ID)
    scenario_id: int | None = Field(None, ge=1, le=MAX_ID)
    section: SectionName | None = None
    field_path: str | None = Field(None, max_length=300)
    x: float | None = Field(None, description="Map x, m")
    y: float | None = Field(None, description="Map y, m")
    grid_id: int | None = Field(None, ge=1, le=MAX_ID)


class CommentPatch(BaseModel):
    """New text of one's own comment."""

    body: str = Field(min_length=1, max_length=10000)


class ResolveIn(BaseModel):
    """Resolve (true) or reopen (false) a thread."""

    resolved: bool


class CommentOut(_Out):
    """A comment."""

    id: int
    project_id: int
    parent_id: int | None
    thread_id: int | None
    scenario_id: int | None
    section: str | None
    field_path: str | None
    grid_id: int | None
    x: float | None
    y: float | None
    author: str | None
    body: str
    created_at: datetime
    edited_at: datetime | None
    resolved_at: datetime | None
    resolved_by_id: int | None

    @classmethod
    def of(cls, c: m.Comment) -> CommentOut:
        return cls(
            id=c.id, project_id=c.project_id, parent_id=c.parent_id, thread_id=c.thread_id,
            scenario_id=c.scenario_id, section=c.section, field_path=c.field_path,
            grid_id=c.grid_id, x=c.x, y=c.y, author=c.author.username if c.author else None,
            body=c.body, created_at=c.created_at, edited_at=c.edited_at,
            resolved_at=c.resolved_at, resolved_by_id=c.resolved_by_id,
        )


# --------------------------------------------------------------------------- data


class CurveInfo(BaseModel):
    """A stored log curve: canonical name, unit and finite-value statistics."""

    name: str
    unit: str
    count: int
    min: float | None
    max: float | None


class WellOut(_Out):
    """A well's metadata."""

    id: int
    project_id: int
    name: str
    x: float | None
    y: float | None
    depth_min: float = Field(description="m, positive down")
    depth_max: float = Field(description="m, positive down")
    n_samples: int
    curves: list[CurveInfo]
    original_filename: str
    size_bytes: int
    sha256: str
    created_at: datetime


class CurveDataOut(BaseModel):
    """Depth (m) and values of one curve, thinned for plotting; null = no value."""

    well_id: int
    curve: str
    unit: str
    n_total: int
    depth: list[float]
    values: list[float | None]


class GridOut(_Out):
    """A map or cube: geometry and statistics (values stay in the file store)."""

    id: int
    project_id: int
    name: str
    kind: Literal["map", "cube"]
    source_format: str
    geometry: dict[str, Any]
    stats: dict[str, Any]
    original_filename: str
    size_bytes: int
    sha256: str
    created_at: datetime


class GridDataOut(BaseModel):
    """A thinned 2-D view of a grid for plotting; null = no value."""

    grid_id: int
    x: list[float]
    y: list[float]
    z: list[list[float | None]]
    slice: dict[str, Any]


class ProspectIn(BaseModel):
    """A prospect outline: at least 3 [x, y] vertices (m), not crossing itself."""

    name: str = Name
    outline: list[list[float]] = Field(min_length=3, max_length=5001)


class ProspectPatch(BaseModel):
    """Prospect fields to change."""

    name: str | None = Field(None, min_length=1, max_length=120)
    outline: list[list[float]] | None = Field(None, min_length=3, max_length=5001)


class ProspectOut(_Out):
    """A prospect outline and its area."""

    id: int
    project_id: int
    name: str
    outline: list[list[float]]
    area_m2: float
    created_at: datetime
    updated_at: datetime


class ReadinessOut(BaseModel):
    """Which sections are ready; a run needs all (owners may override)."""

    scenario_id: int
    runnable: bool
    not_ready: list[str]
