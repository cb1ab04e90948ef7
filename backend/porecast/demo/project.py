"""Create the demo project in a Porecast database through the ordinary services.

Nothing here writes rows directly: users come from
:func:`porecast.services.auth.create_user`, the project and its members from
:mod:`porecast.services.projects`, wells and grids from the same import
functions the upload routes call (each file first copied into the upload
staging folder, as a web upload would be), prospects from
:mod:`porecast.services.prospects` and scenarios, forks, section saves and ready
marks from :mod:`porecast.services.scenarios`, each by the member whose role
owns that step. Everything happens in one transaction: a failure leaves no
rows and (through the file-store hooks) no stored files behind.
"""

from __future__ import annotations

import secrets
import shutil
import uuid
from collections.abc import Callable, Mapping
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, NamedTuple

from sqlalchemy.orm import Session

from ..db.models import ROLES, User
from ..db.session import make_engine, make_session_factory, open_session
from ..physics.scenario import COVARIATES
from ..services import auth, comments, grids, projects, prospects, scenarios, uploads, wells
from ..settings import Settings
from . import synthetic

PROJECT_NAME = f"{synthetic.BASIN} demo"
PROJECT_DESCRIPTION = (
    "Invented demonstration project: a fictional basin, synthetic maps, cube and wells "
    "generated from a hidden truth. Scenario predictions are screening estimates for "
    "exploration decisions and carry large uncertainty; pore pressure and temperature "
    "outputs are not for well design, drilling or well control."
)
#: Demo user name of each project role.
USERNAMES = {role: f"demo-{role.replace('_', '-')}" for role in ROLES}
#: Length of the generated demo passwords (token_urlsafe of 12 bytes gives 16 characters).
PASSWORD_BYTES = 12

Progress = Callable[[str], None]


class DemoLogin(NamedTuple):
    """A demo account and its generated password (demo use only)."""

    username: str
    role: str
    password: str


class DemoProject(NamedTuple):
    """Ids of what :func:`create_demo_project` created."""

    project_id: int
    user_ids: dict[str, int]
    """Role -> user id."""
    scenario_ids: dict[str, int]
    """Scenario key (``burial_aware``, ``stationary``, ``hot``) -> scenario id."""
    grid_ids: dict[str, int]
    """``map:<attribute>`` or ``cube:<attribute>`` -> grid id."""
    well_ids: dict[str, int]
    prospect_ids: dict[str, int]


def generate_logins() -> list[DemoLogin]:
    """One account per project role, each with a fresh random password."""
    return [DemoLogin(USERNAMES[role], role, secrets.token_urlsafe(PASSWORD_BYTES))
            for role in ROLES]


def _stage(src: Path, settings: Settings) -> Path:
    """Copy a file into a private folder of the upload staging area, as an upload would land."""
    folder = settings.tmp_dir / uuid.uuid4().hex
    folder.mkdir(parents=True)
    dst = folder / uploads.safe_filename(src.name)
    shutil.copyfile(src, dst)
    return dst


def _upload_grid(db: Session, user: User, project_id: int, src: Path, name: str,
                 settings: Settings, now: datetime) -> int:
    staged = _stage(src, settings)
    try:
        grids.check_upload(db, user, project_id, staged.name)
        return grids.import_grid(db, user, project_id, staged, name=name,
                                 files_dir=settings.files_dir, now=now).id
    finally:
        uploads.discard(staged)


def _upload_well(db: Session, user: User, project_id: int, src: Path, settings: Settings,
                 now: datetime) -> int:
    staged = _stage(src, settings)
    try:
        wells.check_upload(db, user, project_id, staged.name)
        return wells.import_well(db, user, project_id, staged, name=None,
                                 files_dir=settings.files_dir, now=now).id
    finally:
        uploads.discard(staged)


def _section_etag(db: Session, user: User, scenario_id: int, section: str) -> str:
    scenario, _ = scenarios.get_scenario(db, user, scenario_id, "read_detail")
    row = next(r for r in scenario.sections if r.section == section)
    return scenarios.section_etag(scenario.id, section, row.revision)


def _fork_with_burial(db: Session, users: Mapping[str, User], source_id: int,
                      doc: Mapping[str, Any], now: datetime) -> int:
    """A fork of ``source_id`` whose burial section (basin modeller) and description become
    those of ``doc``."""
    basin = users["basin_modeller"]
    fork = scenarios.fork_scenario(db, basin, source_id, name=doc["name"], revision=None, now=now)
    scenarios.update_meta(db, basin, fork.id, {"description": doc["description"]},
                          if_match=scenarios.scenario_etag(fork), now=now,
                          message="describe the hypothesis")
    scenarios.save_section(db, basin, fork.id, "burial", dict(doc["burial"]),
                           if_match=_section_etag(db, basin, fork.id, "burial"), now=now,
                           message="covariate nodes of this hypothesis")
    return fork.id


def _mark_ready(db: Session, users: Mapping[str, User], scenario_id: int,
                now: datetime) -> None:
    for section, role in (("burial", "basin_modeller"), ("geology", "geologist"),
                          ("rockphysics", "geophysicist")):
        user = users[role]
        scenarios.set_ready(db, user, scenario_id, section, True,
                            if_match=_section_etag(db, user, scenario_id, section), now=now)


def create_demo_project(
    settings: Settings,
    data: synthetic.DemoData,
    files: synthetic.DemoFiles,
    logins: list[DemoLogin],
    *,
    now: datetime | None = None,
    progress: Progress | None = None,
) -> DemoProject:
    """Create the demo users, project, uploads, prospects and scenarios in one transaction.

    The database must be migrated already (``porecast db upgrade``).

    Parameters
    ----------
    settings : Settings
        Gives the database URL, the file store and the password-hash profile.
    data, files : DemoData, DemoFiles
        From :func:`porecast.demo.synthetic.generate` and
        :func:`porecast.demo.synthetic.write_files`.
    logins : list of DemoLogin
        One per role (:func:`generate_logins`).
    now : datetime, optional
        Time stamp of every row (default: now, UTC).
    progress : callable, optional
        ``progress(stage)`` after each step.
    """
    def step(stage: str) -> None:
        if progress is not None:
            progress(stage)

    now = now or datetime.now(UTC)
    by_role = {login.role: login for login in logins}
    if set(by_role) != set(ROLES):
        raise ValueError(f"the demo needs one login per role {ROLES}")
    engine = make_engine(settings.sqlalchemy_url)
    try:
        db = open_session(make_session_factory(engine), write=True)
        try:
            result = _create(db, settings, data, files, by_role, now, step)
            db.commit()
        except BaseException:
            db.rollback()
            raise
        finally:
            db.close()
    finally:
        engine.dispose()
    return result


def _create(db: Session, settings: Settings, data: synthetic.DemoData,
            files: synthetic.DemoFiles, by_role: Mapping[str, DemoLogin], now: datetime,
            step: Progress) -> DemoProject:
    hasher = auth.password_hasher(settings.password_hash_profile)
    users = {role: auth.create_user(db, login.username, login.password, now=now, hasher=hasher)
             for role, login in by_role.items()}
    step("users")
    owner = users["owner"]
    project = projects.create_project(db, owner, PROJECT_NAME, PROJECT_DESCRIPTION, now=now)
    pid = project.id
    for role in ROLES:
        if role != "owner":
            projects.add_member(db, owner, pid, users[role].username, role, now=now)
    step("project and members")

    grid_ids = {}
    for name, path in files.maps.items():
        uploader = users["basin_modeller" if name in COVARIATES else "geophysicist"]
        grid_ids[f"map:{name}"] = _upload_grid(db, uploader, pid, path,
                                               synthetic.MAP_FILES[name], settings, now)
    for name, path in files.cubes.items():
        grid_ids[f"cube:{name}"] = _upload_grid(db, users["geophysicist"], pid, path,
                                                synthetic.CUBE_FILES[name], settings, now)
    well_ids = {name: _upload_well(db, users["geophysicist"], pid, path, settings, now)
                for name, path in files.wells.items()}
    step("maps, cube and wells uploaded")
    prospect_ids = {
        p["name"]: prospects.create_prospect(db, users["geologist"], pid, name=p["name"],
                                             outline=p["outline"], now=now).id
        for p in data.prospects
    }
    step("prospects")

    docs = data.scenarios
    aware = scenarios.create_scenario(
        db, owner, pid, name=docs["burial_aware"]["name"],
        description=docs["burial_aware"]["description"],
        document=dict(docs["burial_aware"]), now=now,
    )
    scenario_ids = {"burial_aware": aware.id}
    for key in ("stationary", "hot"):
        scenario_ids[key] = _fork_with_burial(db, users, aware.id, docs[key], now)
    for sid in scenario_ids.values():
        _mark_ready(db, users, sid, now)
    comments.create_comment(
        db, users["reviewer"], pid, scenario_id=scenario_ids["hot"], section="burial",
        field_path="burial.covariates.gradient_c_per_km.uncertainty", now=now,
        body=f"Is the +{synthetic.HOT_SHIFT_C_PER_KM:g} degC/km backed by corrected "
             "temperatures at QD-1 and QD-2? Please compare with their logs before we rank "
             "the East high on it.",
    )
    crest = synthetic.HIGHS[-1]
    x, y = synthetic.node_xy(crest.centre)
    comments.create_comment(
        db, users["geologist"], pid, x=x, y=y, grid_id=grid_ids["map:net_uplift_m"], now=now,
        body=f"{crest.name}: about 1.5 km of net uplift here. A classifier trained at QD-1 "
             "will not see these sands as they are.",
    )
    step("scenarios forked, filled and marked ready")
    return DemoProject(pid, {r: u.id for r, u in users.items()}, scenario_ids, grid_ids,
                       well_ids, prospect_ids)
