"""Scenarios: sections, conditional saves, revisions, forks, comparison, readiness.

Concurrency design (per-section ETags)
--------------------------------------
A scenario document is stored as one row per section plus the scenario row with
the remaining top-level fields (``meta``). Two kinds of strong ETag exist:

* the scenario ETag ``"s<id>-r<head>"`` names the whole document at revision
  ``head``; it guards metadata edits, whole-document reverts and deletion;
* a section ETag ``"s<id>-<section>-r<n>"`` names the revision ``n`` that last
  changed that section; it guards saves, ready marks and reverts of that section.

So two disciplines editing different sections from the same starting point both
land (their section ETags are independent), while two people editing the same
section from the same ETag cannot both win: the second gets ``StaleVersion``
(HTTP 412) and the stored document keeps the first change. Every writer locks
the scenario row first, re-reads the sections and validates the whole document
(the science package's cross-section checks) against what is really stored.

Every change creates a revision holding the author, time, the section touched,
the diff (``{"path", "op", "old", "new"}`` entries) and the whole document after
the change; reverting is a new revision. Changing a section clears its ready flag.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from porecast.db.models import (
    SECTION_ROLES,
    Comment,
    Membership,
    Scenario,
    ScenarioRevision,
    ScenarioSection,
    User,
)
from porecast.physics import scenario as schema

from . import activity
from .authz import can_edit_section, load_in_project, membership, require_project
from .diff import json_diff, merge_patch
from .errors import (
    InvalidInput,
    NotFound,
    NotRunnable,
    PermissionDenied,
    PreconditionRequired,
    StaleVersion,
)

SECTIONS: tuple[str, ...] = tuple(schema.SECTIONS)


# --------------------------------------------------------------------------- ETags


def scenario_etag(scenario: Scenario) -> str:
    """Strong ETag of the whole document (quoted, as sent in the header)."""
    return f'"s{scenario.id}-r{scenario.head_revision}"'


def section_etag(scenario_id: int, section: str, revision: int) -> str:
    """Strong ETag of one section."""
    return f'"s{scenario_id}-{section}-r{revision}"'


def check_if_match(if_match: str | None, current: str) -> None:
    """RFC 9110 section 13.1.1 If-Match with strong comparison.

    A missing header is refused (428), and so is ``*``: it would skip the
    lost-update check this header exists for. A list of ETags matches if any
    entry equals the current one; weak ETags never match.
    """
    if if_match is None or not if_match.strip():
        raise PreconditionRequired(
            "this change needs an If-Match header with the ETag you last read"
        )
    candidates = [c.strip() for c in if_match.split(",")]
    if candidates == ["*"]:
        raise PreconditionRequired("If-Match: * is not accepted; send the ETag you last read")
    if current not in candidates:
        raise StaleVersion(
            "someone saved a newer version since you read it; reload and apply your change again",
            current,
        )


# --------------------------------------------------------------------------- documents


def _validation_error(exc: schema.ScenarioValidationError) -> InvalidInput:
    first = exc.errors[0] if exc.errors else {"loc": "", "msg": str(exc)}
    where = f" at {first['loc']}" if first.get("loc") else ""
    return InvalidInput(f"scenario is not valid{where}: {first['msg']}", list(exc.errors))


def normalise_document(doc: Any) -> dict[str, Any]:
    """Validate a whole document with the science package and return its JSON form."""
    if not isinstance(doc, dict):
        raise InvalidInput("a scenario document is a JSON object", [{"loc": "", "msg": "object"}])
    try:
        return schema.validate_scenario(doc).model_dump(mode="json")
    except schema.ScenarioValidationError as exc:
        raise _validation_error(exc) from None


def normalise_section(section: str, data: Any) -> dict[str, Any]:
    """Validate one section and return its normalised JSON form."""
    if not isinstance(data, dict):
        raise InvalidInput(
            f"section {section} is a JSON object", [{"loc": section, "msg": "must be an object"}]
        )
    try:
        return schema.validate_section(section, data)
    except schema.ScenarioValidationError as exc:
        raise _validation_error(exc) from None


def document_of(scenario: Scenario) -> dict[str, Any]:
    """The whole current document of a scenario."""
    doc = dict(scenario.meta)
    for sec in scenario.sections:
        doc[sec.section] = sec.data
    return doc


def _split(doc: dict[str, Any]) -> tuple[dict[str, Any], dict[str, dict[str, Any]]]:
    meta = {k: v for k, v in doc.items() if k not in SECTIONS}
    return meta, {s: doc[s] for s in SECTIONS}


def _check_section_name(section: str) -> None:
    if section not in SECTIONS:
        raise NotFound(f"no section {section!r}; sections are {', '.join(SECTIONS)}")


def _section_row(scenario: Scenario, section: str) -> ScenarioSection:
    for row in scenario.sections:
        if row.section == section:
            return row
    raise NotFound(f"section {section} not found")  # every scenario has all sections


# --------------------------------------------------------------------------- loading


def get_scenario(
    db: Session, user: User, scenario_id: int, capability: str = "read_summary"
) -> tuple[Scenario, Membership]:
    """A scenario the caller may access with ``capability``."""
    return load_in_project(db, Scenario, scenario_id, user, capability, "scenario")


def _lock(db: Session, scenario: Scenario) -> Scenario:
    """Lock the scenario row and reload it and its sections from the database."""
    locked = db.scalars(
        select(Scenario)
        .where(Scenario.id == scenario.id)
        .with_for_update()
        .execution_options(populate_existing=True)
    ).one()
    db.scalars(
        select(ScenarioSection)
        .where(ScenarioSection.scenario_id == scenario.id)
        .execution_options(populate_existing=True)
    ).all()
    return locked


def list_scenarios(db: Session, user: User, project_id: int) -> list[Scenario]:
    """Scenarios of a project, newest first."""
    require_project(db, user, project_id, "read_summary")
    return list(
        db.scalars(
            select(Scenario).where(Scenario.project_id == project_id).order_by(Scenario.id.desc())
        )
    )


def unresolved_counts(db: Session, scenario_id: int) -> dict[str, int]:
    """Unresolved comment threads per section (key "" for scenario-wide threads)."""
    rows = db.execute(
        select(Comment.section, func.count())
        .where(
            Comment.scenario_id == scenario_id,
            Comment.parent_id.is_(None),
            Comment.resolved_at.is_(None),
        )
        .group_by(Comment.section)
    )
    return {(section or ""): int(n) for section, n in rows}


# --------------------------------------------------------------------------- create, fork


def _new_scenario(
    db: Session,
    user: User,
    project_id: int,
    doc: dict[str, Any],
    *,
    now: datetime,
    kind: str,
    message: str,
    forked_from: tuple[int, int] | None = None,
) -> Scenario:
    meta, sections = _split(doc)
    scenario = Scenario(
        project_id=project_id,
        name=meta["name"],
        meta=meta,
        head_revision=1,
        meta_revision=1,
        forked_from_scenario_id=forked_from[0] if forked_from else None,
        forked_from_revision=forked_from[1] if forked_from else None,
        created_by_id=user.id,
        created_at=now,
        updated_at=now,
    )
    db.add(scenario)
    db.flush()
    for name, data in sections.items():
        db.add(ScenarioSection(scenario_id=scenario.id, section=name, data=data, revision=1))
    db.add(
        ScenarioRevision(
            scenario_id=scenario.id,
            number=1,
            kind=kind,
            section=None,
            author_id=user.id,
            created_at=now,
            message=message,
            diff=[],
            document=doc,
            document_hash=schema.scenario_hash(doc),
        )
    )
    db.flush()
    db.refresh(scenario)
    return scenario


def create_scenario(
    db: Session,
    user: User,
    project_id: int,
    *,
    name: str,
    description: str | None,
    document: dict[str, Any] | None,
    now: datetime,
) -> Scenario:
    """A new scenario from a document (default: the bundled example)."""
    require_project(db, user, project_id, "contribute")
    doc = dict(document) if document is not None else schema.default_scenario()
    doc["name"] = name
    if description is not None:
        doc["description"] = description
    doc = normalise_document(doc)
    scenario = _new_scenario(db, user, project_id, doc, now=now, kind="create", message="created")
    activity.record(db, project_id, user, "scenario.created", "scenario", scenario.id,
                    f"{user.username} created scenario {name!r}", now=now)
    return scenario


def fork_scenario(
    db: Session,
    user: User,
    scenario_id: int,
    *,
    name: str,
    revision: int | None,
    now: datetime,
) -> Scenario:
    """Copy a scenario (at its head or at a revision) into a new one in the same project."""
    source, _ = get_scenario(db, user, scenario_id, "read_detail")
    require_project(db, user, source.project_id, "contribute")
    rev = get_revision(db, user, scenario_id, revision or source.head_revision)
    doc = dict(rev.document)
    doc["name"] = name
    doc = normalise_document(doc)
    scenario = _new_scenario(
        db, user, source.project_id, doc, now=now, kind="fork",
        message=f"forked from {source.name!r} revision {rev.number}",
        forked_from=(source.id, rev.number),
    )
    activity.record(db, source.project_id, user, "scenario.forked", "scenario", scenario.id,
                    f"{user.username} forked {source.name!r} (revision {rev.number}) as {name!r}",
                    now=now, data={"source_scenario_id": source.id, "revision": rev.number})
    return scenario


# --------------------------------------------------------------------------- saving


@dataclass
class _Change:
    """A proposed new document and the sections it touches."""

    new_doc: dict[str, Any]
    sections: list[str] = field(default_factory=list)
    meta: bool = False


def _apply(
    db: Session,
    user: User,
    scenario: Scenario,
    new_doc: dict[str, Any],
    *,
    kind: str,
    section: str | None,
    message: str,
    now: datetime,
) -> ScenarioRevision | None:
    """Validate and store ``new_doc`` as the next revision; None when nothing changed."""
    old_doc = document_of(scenario)
    new_doc = normalise_document(new_doc)
    diff = json_diff(old_doc, new_doc)
    if not diff:
        return None
    number = scenario.head_revision + 1
    meta, sections = _split(new_doc)
    changed = [s for s in SECTIONS if json_diff(old_doc[s], sections[s])]
    for name in changed:
        row = _section_row(scenario, name)
        row.data = sections[name]
        row.revision = number
        row.ready, row.ready_by_id, row.ready_at = False, None, None
    if json_diff(scenario.meta, meta):
        scenario.meta = meta
        scenario.name = meta["name"]
        scenario.meta_revision = number
    scenario.head_revision = number
    scenario.updated_at = now
    rev = ScenarioRevision(
        scenario_id=scenario.id,
        number=number,
        kind=kind,
        section=section if section is not None else (changed[0] if len(changed) == 1 else None),
        author_id=user.id,
        created_at=now,
        message=message,
        diff=diff,
        document=new_doc,
        document_hash=schema.scenario_hash(new_doc),
    )
    db.add(rev)
    db.flush()
    return rev


def _require_section_role(member: Membership, section: str) -> None:
    if not can_edit_section(member.role, section):
        raise PermissionDenied(
            f"the {section} section is edited by the {SECTION_ROLES[section]} "
            f"(or an owner); your role is {member.role}"
        )


def save_section(
    db: Session,
    user: User,
    scenario_id: int,
    section: str,
    data: dict[str, Any],
    *,
    if_match: str | None,
    now: datetime,
    message: str = "",
    patch: bool = False,
) -> Scenario:
    """Replace (or merge-patch, RFC 7396) one section, conditional on its ETag."""
    scenario, member = get_scenario(db, user, scenario_id, "read_detail")
    _check_section_name(section)
    _require_section_role(member, section)
    scenario = _lock(db, scenario)
    row = _section_row(scenario, section)
    check_if_match(if_match, section_etag(scenario.id, section, row.revision))
    new_data = merge_patch(row.data, data) if patch else data
    new_data = normalise_section(section, new_data)
    new_doc = document_of(scenario) | {section: new_data}
    rev = _apply(db, user, scenario, new_doc, kind="edit", section=section, message=message,
                 now=now)
    if rev is not None:
        activity.record(
            db, scenario.project_id, user, "scenario.section_saved", "scenario", scenario.id,
            f"{user.username} changed {section} of {scenario.name!r} ({len(rev.diff)} field"
            f"{'s' if len(rev.diff) != 1 else ''}, revision {rev.number})",
            now=now, data={"section": section, "revision": rev.number},
        )
    return scenario


def update_meta(
    db: Session,
    user: User,
    scenario_id: int,
    changes: dict[str, Any],
    *,
    if_match: str | None,
    now: datetime,
    message: str = "",
) -> Scenario:
    """Change top-level fields (name, description, seed, realisations ...)."""
    scenario, _ = get_scenario(db, user, scenario_id, "contribute")
    bad = [k for k in changes if k in SECTIONS or k == "schema_version"]
    if bad:
        raise InvalidInput(f"{bad[0]} cannot be changed here", [{"loc": bad[0], "msg": "fixed"}])
    scenario = _lock(db, scenario)
    check_if_match(if_match, scenario_etag(scenario))
    new_doc = document_of(scenario) | changes
    rev = _apply(db, user, scenario, new_doc, kind="meta", section=None, message=message,
                 now=now)
    if rev is not None:
        activity.record(db, scenario.project_id, user, "scenario.updated", "scenario",
                        scenario.id, f"{user.username} changed {', '.join(changes)} of "
                        f"{scenario.name!r} (revision {rev.number})", now=now)
    return scenario


def delete_scenario(
    db: Session, user: User, scenario_id: int, *, if_match: str | None, now: datetime
) -> None:
    """Delete a scenario with its revisions and comments (owners)."""
    scenario, _ = get_scenario(db, user, scenario_id, "manage")
    scenario = _lock(db, scenario)
    check_if_match(if_match, scenario_etag(scenario))
    activity.record(db, scenario.project_id, user, "scenario.deleted", "scenario", scenario.id,
                    f"{user.username} deleted scenario {scenario.name!r}", now=now)
    db.delete(scenario)


def set_ready(
    db: Session,
    user: User,
    scenario_id: int,
    section: str,
    ready: bool,
    *,
    if_match: str | None,
    now: datetime,
) -> Scenario:
    """Mark a section ready (or not) for runs; the ETag says which content was reviewed."""
    scenario, member = get_scenario(db, user, scenario_id, "read_detail")
    _check_section_name(section)
    _require_section_role(member, section)
    scenario = _lock(db, scenario)
    row = _section_row(scenario, section)
    check_if_match(if_match, section_etag(scenario.id, section, row.revision))
    if row.ready != ready:
        row.ready = ready
        row.ready_by_id = user.id if ready else None
        row.ready_at = now if ready else None
        word = "ready" if ready else "not ready"
        activity.record(db, scenario.project_id, user, "scenario.section_ready", "scenario",
                        scenario.id, f"{user.username} marked {section} of {scenario.name!r} "
                        f"{word}", now=now, data={"section": section, "ready": ready})
    db.flush()
    return scenario


# --------------------------------------------------------------------------- revisions


def list_revisions(db: Session, user: User, scenario_id: int) -> list[ScenarioRevision]:
    """Revisions, newest first."""
    get_scenario(db, user, scenario_id, "read_detail")
    return list(
        db.scalars(
            select(ScenarioRevision)
            .where(ScenarioRevision.scenario_id == scenario_id)
            .order_by(ScenarioRevision.number.desc())
        )
    )


def get_revision(db: Session, user: User, scenario_id: int, number: int) -> ScenarioRevision:
    """One revision with its diff and document."""
    get_scenario(db, user, scenario_id, "read_detail")
    rev = db.scalar(
        select(ScenarioRevision).where(
            ScenarioRevision.scenario_id == scenario_id, ScenarioRevision.number == number
        )
    )
    if rev is None:
        raise NotFound(f"revision {number} not found")
    return rev


def revert(
    db: Session,
    user: User,
    scenario_id: int,
    number: int,
    *,
    section: str | None,
    if_match: str | None,
    now: datetime,
) -> Scenario:
    """Bring back revision ``number`` (whole, or one section) as a new revision.

    A whole revert needs the scenario ETag and the right to edit every section
    it changes; a section revert needs that section's ETag and role.
    """
    scenario, member = get_scenario(db, user, scenario_id, "contribute")
    if section is not None:
        _check_section_name(section)
        _require_section_role(member, section)
    target = get_revision(db, user, scenario_id, number)
    scenario = _lock(db, scenario)
    current = document_of(scenario)
    if section is not None:
        row = _section_row(scenario, section)
        check_if_match(if_match, section_etag(scenario.id, section, row.revision))
        new_doc = current | {section: target.document[section]}
    else:
        check_if_match(if_match, scenario_etag(scenario))
        new_doc = dict(target.document)
        for name in SECTIONS:
            if json_diff(current[name], new_doc[name]):
                _require_section_role(member, name)
    rev = _apply(db, user, scenario, new_doc, kind="revert", section=section,
                 message=f"revert to revision {number}", now=now)
    if rev is not None:
        what = section or "the scenario"
        activity.record(db, scenario.project_id, user, "scenario.reverted", "scenario",
                        scenario.id, f"{user.username} reverted {what} of {scenario.name!r} to "
                        f"revision {number} (revision {rev.number})", now=now,
                        data={"section": section, "revision": rev.number, "target": number})
    return scenario


@dataclass(frozen=True)
class Comparison:
    """Field-by-field differences from document ``a`` to document ``b``."""

    a_scenario_id: int
    a_revision: int
    b_scenario_id: int
    b_revision: int
    differences: list[dict[str, Any]]


def compare(
    db: Session,
    user: User,
    scenario_id: int,
    *,
    revision: int | None = None,
    other_scenario_id: int | None = None,
    other_revision: int | None = None,
) -> Comparison:
    """Compare two revisions of one scenario, or two scenarios (heads by default)."""
    a, _ = get_scenario(db, user, scenario_id, "read_detail")
    b = a
    if other_scenario_id is not None and other_scenario_id != scenario_id:
        b, _ = get_scenario(db, user, other_scenario_id, "read_detail")
    rev_a = get_revision(db, user, a.id, revision or a.head_revision)
    rev_b = get_revision(db, user, b.id, other_revision or b.head_revision)
    return Comparison(a.id, rev_a.number, b.id, rev_b.number,
                      json_diff(rev_a.document, rev_b.document))


# --------------------------------------------------------------------------- readiness


@dataclass(frozen=True)
class Readiness:
    """Outcome of :func:`assert_runnable`."""

    not_ready: list[str]
    overridden: bool


def assert_runnable(
    db: Session, scenario: Scenario, user: User, override: bool = False, *, now: datetime
) -> Readiness:
    """Refuse a run unless every section is marked ready.

    Members who may contribute can start runs; an owner may override missing
    ready marks, which is recorded in the activity feed (and should be stored on
    the run as ``readiness_override``). Raises ``NotRunnable``, ``PermissionDenied``
    or ``NotFound`` (caller not a member).
    """
    member = membership(db, user, scenario.project_id)
    if member is None:
        raise NotFound("scenario not found")
    if member.role not in ("owner", *SECTION_ROLES.values()):
        raise PermissionDenied(f"your role ({member.role}) cannot start runs")
    not_ready = [row.section for row in scenario.sections if not row.ready]
    if not not_ready:
        return Readiness(not_ready=[], overridden=False)
    if not override:
        raise NotRunnable(
            f"not every section is marked ready (missing: {', '.join(not_ready)})", not_ready
        )
    if member.role != "owner":
        raise PermissionDenied("only a project owner may start a run without all ready marks")
    activity.record(
        db, scenario.project_id, user, "run.readiness_override", "scenario", scenario.id,
        f"{user.username} overrode missing ready marks ({', '.join(not_ready)}) of "
        f"{scenario.name!r}", now=now, data={"not_ready": not_ready,
                                            "revision": scenario.head_revision},
    )
    return Readiness(not_ready=not_ready, overridden=True)


def readiness(db: Session, user: User, scenario_id: int) -> tuple[Scenario, list[str]]:
    """A scenario and the sections not yet marked ready."""
    scenario, _ = get_scenario(db, user, scenario_id, "read_summary")
    return scenario, [row.section for row in scenario.sections if not row.ready]
