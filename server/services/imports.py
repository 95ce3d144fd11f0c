"""Importing a sample schedule (CSV, XLSX or AGS4) into a job: one service for the page, the
``claybench import`` command and the API (DESIGN.md section 7).

The file is read into a ``Schedule`` by its reader (``server.exchange``); ``plan_import``
compares it with what the job holds and says, row by row, what would be created, updated or
left unchanged, and what is refused and why. ``import_schedule`` stores that plan in one
transaction, or nothing at all when anything is refused. Importing the same file twice
changes nothing the second time; a changed row updates a sample that has nothing entered
yet, and is refused for one that has (its results name it as it was).

A blank cell leaves the stored value as it is: a schedule that gives no sample type or
description does not wipe one a person typed in.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from sqlmodel import Session, col, select

from server.db.queries import same_name
from server.db.session import Database
from server.db.tables import Client, Job, LabTest, Location, Sample, User
from server.exchange import ags4_read, spreadsheet
from server.exchange.schedule import CellError, LocationLine, Origin, SampleLine, Schedule
from server.services import audit
from server.services.errors import Invalid, ServiceError
from server.services.jobs import JobForm, client_in, client_values, job_in, job_values, requests_in
from server.services.samples import (
    LocationForm,
    SampleForm,
    change_in,
    entered_samples,
    location_in,
    location_values,
    sample_in,
    sample_values,
)
from server.workflow.states import Status

FILE_MAX_BYTES = 5 * 1024 * 1024  # a schedule of 10,000 rows is well under 2 MB (common practice)
FORMATS = {".csv": "csv", ".xlsx": "xlsx", ".ags": "ags4"}


class ImportRefused(ServiceError):
    """The file (or its fit with the stored job) has refused cells; nothing was stored."""

    def __init__(self, errors: list[CellError]):
        self.errors = errors
        super().__init__(f"{len(errors)} refused cell(s); nothing was stored")

    def to_dict(self) -> dict[str, Any]:
        return {"errors": [e.to_dict() for e in self.errors]}


def read_schedule(filename: str, data: bytes, mapping: dict[str, str] | None = None) -> Schedule:
    """Read a file by its extension; a file of another kind, or too big, is refused whole."""
    kind = FORMATS.get(Path(filename).suffix.lower())
    where = Origin(row=1)
    if kind is None:
        error = CellError(where, "file", f"{filename!r} is not a .csv, .xlsx or .ags file")
        raise ImportRefused([error])
    if len(data) > FILE_MAX_BYTES:
        message = f"the file is {len(data) / 1048576:.1f} MB; at most {FILE_MAX_BYTES // 1048576} MB is read"
        raise ImportRefused([CellError(where, "file", message)])
    if kind == "ags4":
        return ags4_read.read_ags4(data)
    return spreadsheet.read_spreadsheet(filename, data, mapping)


@dataclass(frozen=True)
class Target:
    """The job an import goes to: ``--job`` (for AGS4 the file's PROJ_ID), and the client,
    title and site used when no job has that number yet."""

    job: str = ""
    client: str = ""
    title: str = ""
    site: str = ""


@dataclass
class Counts:
    locations: int = 0
    samples: int = 0
    tests: int = 0

    def to_dict(self) -> dict[str, int]:
        return {"locations": self.locations, "samples": self.samples, "tests": self.tests}


@dataclass
class PlannedSample:
    """One row of the preview: the sample as it will be stored, and what happens to it."""

    origin: Origin
    action: str  # "create", "update", "unchanged" or "refused"
    location: str
    values: dict[str, Any]
    changes: dict[str, tuple[Any, Any]] = field(default_factory=dict)  # field -> (stored, file)
    new_tests: list[str] = field(default_factory=list)
    kept_tests: list[str] = field(default_factory=list)


@dataclass
class ImportPlan:
    job: str
    job_exists: bool
    client: str
    format: str
    created: Counts = field(default_factory=Counts)
    updated: Counts = field(default_factory=Counts)
    unchanged: Counts = field(default_factory=Counts)
    new_job: dict[str, Any] | None = None  # the checked fields of a job the import creates
    locations: list[tuple[LocationLine, str]] = field(default_factory=list)
    samples: list[PlannedSample] = field(default_factory=list)
    errors: list[CellError] = field(default_factory=list)

    def outcome(self, dry_run: bool) -> dict[str, Any]:
        """The JSON the command prints and the API answers (DESIGN.md section 7)."""
        return {
            "job": self.job,
            "dry_run": dry_run,
            "created": self.created.to_dict(),
            "updated": self.updated.to_dict(),
            "unchanged": self.unchanged.to_dict(),
        }


# --- planning ---------------------------------------------------------------------------------


def _job_error(schedule: Schedule, heading: str, message: str) -> CellError:
    if schedule.format == "ags4":
        return CellError(Origin(group="PROJ", line=None), heading, message)
    return CellError(Origin(row=None), heading, message)


@dataclass
class _Stored:
    """The job's present record, loaded once (a fixed number of queries per import)."""

    job: Job | None
    locations: dict[str, Location]
    samples: dict[str, Sample]
    tests: dict[int, set[str]]  # sample id -> methods with a current revision
    entered: set[int]


def _load(s: Session, job: Job | None) -> _Stored:
    if job is None:
        return _Stored(None, {}, {}, {}, set())
    locations = {loc.code: loc for loc in s.exec(select(Location).where(Location.job_id == job.id))}
    samples = {smp.code: smp for smp in s.exec(select(Sample).where(Sample.job_id == job.id))}
    tests: dict[int, set[str]] = {}
    for sample_id, method in s.exec(
        select(LabTest.sample_id, LabTest.method)
        .join(Sample, col(Sample.id) == LabTest.sample_id)
        .where(Sample.job_id == job.id, LabTest.status != Status.superseded.value)
    ):
        tests.setdefault(sample_id, set()).add(method)
    entered = entered_samples(s, [smp.id or 0 for smp in samples.values()])
    return _Stored(job, locations, samples, tests, entered)


def _resolve_job(s: Session, schedule: Schedule, target: Target, plan: ImportPlan) -> Job | None:
    """Find the job the import names, or check the details of the one it would create
    (kept in ``plan.new_job``); refusals go to ``plan.errors``."""
    project = schedule.project
    ags = schedule.format == "ags4"
    given = target.job.strip()
    plan.job = given or (project.number if project else "")
    if ags and project is None:
        return None  # the file was refused before its PROJ was read: its own errors say why
    if project and given and given != project.number:
        plan.errors.append(
            _job_error(schedule, "PROJ_ID", f"the file is for job {project.number}, not {given}")
        )
        return None
    if not plan.job:
        heading = "PROJ_ID" if ags else "job"
        plan.errors.append(_job_error(schedule, heading, "name the job the schedule is for (--job NUMBER)"))
        return None
    job = s.exec(select(Job).where(Job.code == plan.job)).first()
    if job is not None:
        client = s.get(Client, job.client_id)
        plan.job_exists, plan.client = True, client.name if client else ""
        return job
    plan.client = target.client.strip() or (project.client if project else "")
    title = target.title.strip() or (project.title if project else "")
    site = target.site.strip() or (project.site if project else "")
    headings = {"name": "PROJ_CLNT", "code": "PROJ_ID", "title": "PROJ_NAME", "site": "PROJ_LOC"}
    if not plan.client or not title:
        heading = (
            headings["name" if not plan.client else "title"]
            if ags
            else ("client" if not plan.client else "title")
        )
        msg = f"no job has the number {plan.job}: give its client and title (--client, --title) to create it"
        plan.errors.append(_job_error(schedule, heading, msg))
        return None
    try:
        client_values(plan.client)
        plan.new_job = job_values(JobForm(0, plan.job, title, site))
    except Invalid as exc:
        for e in exc.errors:
            name = str(e.loc[0])
            plan.errors.append(_job_error(schedule, headings.get(name, name) if ags else name, e.message))
    return None


def _cell_errors(exc: Invalid, origin: Origin, columns: dict[str, str]) -> list[CellError]:
    """A service refusal of a line's values, placed at the line's cells."""
    ours = {
        "code": "sample",
        "depth_from_m": "top",
        "depth_to_m": "base",
        "sample_type": "sample_type",
        "description": "description",
        "remarks": "remarks",
        "kind": "location_type",
        "easting": "easting",
        "northing": "northing",
        "ground_level_m": "ground_level",
    }
    out = []
    for e in exc.errors:
        name = str(e.loc[0]) if e.loc else ""
        out.append(CellError(origin, columns.get(ours.get(name, name), name), e.message))
    return out


def _plan_location(plan: ImportPlan, stored: _Stored, line: LocationLine) -> None:
    found = stored.locations.get(line.code)
    given = {
        "kind": line.kind,
        "easting": line.easting,
        "northing": line.northing,
        "ground_level_m": line.ground_level_m,
    }
    given = {k: v for k, v in given.items() if v is not None}
    if found is None:
        plan.locations.append((line, "create"))
        plan.created.locations += 1
    elif any(getattr(found, k) != v for k, v in given.items()):
        plan.locations.append((line, "update"))
        plan.updated.locations += 1
    else:
        plan.locations.append((line, "unchanged"))
        plan.unchanged.locations += 1


def _sample_form(line: SampleLine, found: Sample | None) -> SampleForm:
    """The file's values, a blank cell keeping the stored value (or the default for a new one)."""
    return SampleForm(
        line.code,
        line.top_m,
        line.base_m,
        line.sample_type or (found.sample_type if found else "disturbed"),
        line.description or (found.description if found else ""),
        line.remarks or (found.remarks if found else ""),
    )


def _plan_sample(plan: ImportPlan, stored: _Stored, line: SampleLine) -> None:
    found = stored.samples.get(line.code)
    try:
        values = sample_values(_sample_form(line, found))
    except Invalid as exc:
        plan.errors += _cell_errors(exc, line.origin, line.columns)
        plan.samples.append(PlannedSample(line.origin, "refused", line.location, {}))
        return
    present = stored.tests.get(found.id or 0, set()) if found else set()
    if found is not None and found.withdrawn_at is not None and set(line.tests) - present:
        msg = f"sample {found.code} is withdrawn: no tests can be requested on it"
        plan.errors.append(CellError(line.origin, line.columns.get("tests", "tests"), msg))
    row = PlannedSample(
        line.origin,
        "create",
        line.location,
        values,
        new_tests=[m for m in line.tests if m not in present],
        kept_tests=[m for m in line.tests if m in present],
    )
    plan.samples.append(row)
    plan.created.tests += len(row.new_tests)
    plan.unchanged.tests += len(row.kept_tests)
    if found is None:
        plan.created.samples += 1
        return
    stored_location = next((c for c, loc in stored.locations.items() if loc.id == found.location_id), "")
    row.changes = {k: (getattr(found, k), v) for k, v in values.items() if getattr(found, k) != v}
    if stored_location != line.location:
        row.changes["location"] = (stored_location, line.location)
    if not row.changes:
        row.action = "unchanged"
        plan.unchanged.samples += 1
        return
    why = ""
    if found.withdrawn_at is not None:
        why = f"sample {found.code} is withdrawn and can no longer change"
    elif (found.id or 0) in stored.entered:
        why = f"sample {found.code} has readings entered and can no longer change"
    if why:
        name, (was, now) = next(iter(row.changes.items()))
        column = line.columns.get(_COLUMN_OF.get(name, name), name)
        plan.errors.append(CellError(line.origin, column, f"{why} (stored {was!r}, file {now!r})"))
        row.action = "refused"
        return
    row.action = "update"
    plan.updated.samples += 1


_COLUMN_OF = {
    "location": "location",
    "code": "sample",
    "depth_from_m": "top",
    "depth_to_m": "base",
    "sample_type": "sample_type",
    "description": "description",
    "remarks": "remarks",
}


def _plan(s: Session, schedule: Schedule, target: Target) -> tuple[ImportPlan, _Stored]:
    plan = ImportPlan("", False, "", schedule.format, errors=list(schedule.errors))
    stored = _load(s, _resolve_job(s, schedule, target, plan))
    for location in schedule.locations:
        _plan_location(plan, stored, location)
    for line in schedule.samples:
        _plan_sample(plan, stored, line)
    return plan, stored


def plan_import(db: Database, schedule: Schedule, target: Target) -> ImportPlan:
    """What importing this schedule would do, row by row, with every refusal; stores nothing."""
    with db.session() as s:
        return _plan(s, schedule, target)[0]


# --- storing ----------------------------------------------------------------------------------


def import_schedule(
    db: Database,
    actor: User | None,
    schedule: Schedule,
    target: Target,
    *,
    dry_run: bool = False,
    source: str = "",
) -> ImportPlan:
    """Store the plan in one transaction (or, with ``dry_run``, only plan it); any refusal
    raises ``ImportRefused`` with every refused cell and stores nothing."""
    if dry_run:
        plan = plan_import(db, schedule, target)
        if plan.errors:
            raise ImportRefused(plan.errors)
        return plan
    with db.transaction() as s:
        plan, stored = _plan(s, schedule, target)
        if plan.errors:
            raise ImportRefused(plan.errors)
        job = stored.job or _create_job(s, actor, plan)
        locations = _store_locations(s, actor, job, plan, stored)
        for row in plan.samples:
            _store_sample(s, actor, locations[row.location], stored, row)
        audit.record(
            s,
            actor,
            "job",
            job.id or 0,
            "import",
            after={"file": source, "format": schedule.format, **plan.outcome(False)},
        )
        return plan


def _create_job(s: Session, actor: User | None, plan: ImportPlan) -> Job:
    """The job the import names, created in the import's own transaction (with its client)."""
    assert plan.new_job is not None
    client = s.exec(select(Client).where(same_name(Client.name, plan.client))).first()
    if client is None:
        client = client_in(s, actor, client_values(plan.client))
    return job_in(s, actor, client.id or 0, plan.new_job)


def _store_locations(
    s: Session, actor: User | None, job: Job, plan: ImportPlan, stored: _Stored
) -> dict[str, Location]:
    locations = dict(stored.locations)
    for line, action in plan.locations:
        form = LocationForm(
            line.code, line.kind or "borehole", line.easting, line.northing, line.ground_level_m
        )
        if action == "create":
            locations[line.code] = location_in(s, actor, job.id or 0, location_values(form))
        elif action == "update":
            found = locations[line.code]
            values = {k: v for k, v in location_values(form).items() if k != "code"}
            given = {k: v for k, v in values.items() if v is not None and (k != "kind" or line.kind)}
            change_in(s, actor, found, "location", given)
    return locations


def _store_sample(s: Session, actor: User | None, loc: Location, stored: _Stored, row: PlannedSample) -> None:
    if row.action == "create":
        sample = sample_in(s, actor, loc, row.values)
    else:
        sample = stored.samples[row.values["code"]]
        if row.action == "update":
            change_in(s, actor, sample, "sample", {**row.values, "location_id": loc.id})
    if row.new_tests:
        requests_in(s, actor, [sample.id or 0], row.new_tests)
