"""Use-cases for a job's locations (boreholes, trial pits...) and samples.

The record is protected: a sample with readings entered is never deleted and never moved to
another location, and its identity (code, depth, type) no longer changes, because results and
reports name it; it can be withdrawn with a reason instead, which keeps it on the job page and
leaves it out of reports. No sample is ever deleted (a mistaken one is corrected while nothing
is entered, or withdrawn).
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

from sqlalchemy import String, cast, func
from sqlmodel import Session, col, select

from server.db.session import Database
from server.db.tables import Job, LabTest, Location, Sample, User, utcnow
from server.exchange.schedule import CODE_MAX, DEPTH_MAX_M, DESCRIPTION_MAX, REMARKS_MAX
from server.services import audit
from server.services.errors import NotFound
from server.services.fields import Checks, Number, refuse
from server.services.jobs import requests_in
from server.services.review import required_reason
from server.workflow.states import Status
from server.workflow.vocabulary import LOCATION_KINDS, SAMPLE_TYPES

COORDINATE_MAX = 1e7  # metres: beyond any national grid (common practice)
GROUND_LEVEL_RANGE = (-500.0, 9000.0)  # m above datum: below the Dead Sea shore to above any summit


# --- locations --------------------------------------------------------------------------------


@dataclass(frozen=True)
class LocationForm:
    code: str
    kind: str = "borehole"
    easting: Number = None
    northing: Number = None
    ground_level_m: Number = None


def location_values(
    form: LocationForm, checks: Checks | None = None, names: dict[str, str] | None = None
) -> dict[str, Any]:
    """A location's fields checked, or every refusal raised at once; with ``checks`` the
    refusals join the caller's, under the caller's field ``names`` where a form calls them
    otherwise (a receipt row's "location" is the location's "code")."""
    own = checks is None
    checks = checks or Checks()
    n = {k: (names or {}).get(k, k) for k in ("code", "kind", "easting", "northing", "ground_level_m")}
    span = (-COORDINATE_MAX, COORDINATE_MAX)
    values = {
        "code": checks.code(n["code"], form.code, "location code", CODE_MAX),
        "kind": checks.choice(n["kind"], form.kind, "kind of location", LOCATION_KINDS),
        "easting": checks.number(n["easting"], form.easting, "easting", "m", *span),
        "northing": checks.number(n["northing"], form.northing, "northing", "m", *span),
        "ground_level_m": checks.number(
            n["ground_level_m"], form.ground_level_m, "ground level", "m", *GROUND_LEVEL_RANGE
        ),
    }
    if own:
        checks.done()
    return values


def _unique_location(s: Session, job_id: int, code: str, location_id: int | None = None) -> None:
    found = s.exec(select(Location).where(Location.job_id == job_id, Location.code == code)).first()
    if found and found.id != location_id:
        refuse("code", f"location {code} is already in this job")


def add_location(
    db: Database,
    actor: User | None,
    job_id: int,
    code: str,
    kind: str = "borehole",
    easting: Number = None,
    northing: Number = None,
    ground_level_m: Number = None,
) -> Location:
    values = location_values(LocationForm(code, kind, easting, northing, ground_level_m))
    with db.transaction() as s:
        return location_in(s, actor, job_id, values)


def location_in(s: Session, actor: User | None, job_id: int, values: dict[str, Any]) -> Location:
    """Add a checked location inside the caller's transaction."""
    if s.get(Job, job_id) is None:
        raise NotFound(f"job {job_id} does not exist")
    _unique_location(s, job_id, values["code"])
    loc = Location(job_id=job_id, **values)
    s.add(loc)
    s.flush()
    audit.record(s, actor, "location", loc.id or 0, "create", after=loc.model_dump())
    return loc


def update_location(db: Database, actor: User, location_id: int, form: LocationForm) -> Location:
    values = location_values(form)
    with db.transaction() as s:
        loc = s.get(Location, location_id)
        if loc is None:
            raise NotFound(f"location {location_id} does not exist")
        _unique_location(s, loc.job_id, values["code"], location_id)
        change_in(s, actor, loc, "location", values)
        return loc


def change_in(
    s: Session, actor: User | None, record: Location | Sample, entity: str, values: dict[str, Any]
) -> bool:
    """Set the values that differ and audit them (before and after); False when none did."""
    before = record.model_dump(mode="json")
    changed = {k: v for k, v in values.items() if getattr(record, k) != v}
    if not changed:
        return False
    for key, value in changed.items():
        setattr(record, key, value)
    s.add(record)
    s.flush()
    audit.record(
        s, actor, entity, record.id or 0, "update", before=before, after=record.model_dump(mode="json")
    )
    return True


# --- samples ----------------------------------------------------------------------------------


@dataclass(frozen=True)
class SampleForm:
    """A sample's identity and description as a person or a file gives them."""

    code: str
    depth_from_m: Number
    depth_to_m: Number = None  # blank: the same as the top (a point sample, common practice)
    sample_type: str = "disturbed"
    description: str = ""
    remarks: str = ""


def sample_values(form: SampleForm, checks: Checks | None = None) -> dict[str, Any]:
    """A sample's fields checked (base not above top), or every refusal raised at once."""
    own = checks is None
    checks = checks or Checks()
    top = checks.number("depth_from_m", form.depth_from_m, "depth top", "m", 0, DEPTH_MAX_M, required=True)
    base = checks.number("depth_to_m", form.depth_to_m, "depth base", "m", 0, DEPTH_MAX_M)
    if base is None and top is not None and not checks.errors_for("depth_to_m"):
        base = top
    if top is not None and base is not None and base < top:
        checks.add("depth_to_m", f"depth base {base:g} m is above depth top {top:g} m")
    values = {
        "code": checks.code("code", form.code, "sample code", CODE_MAX),
        "depth_from_m": top,
        "depth_to_m": base,
        "sample_type": checks.choice("sample_type", form.sample_type, "sample type", SAMPLE_TYPES),
        "description": checks.text("description", form.description, "description", DESCRIPTION_MAX),
        "remarks": checks.text("remarks", form.remarks, "remarks", REMARKS_MAX),
    }
    if own:
        checks.done()
    return values


def entered_samples(s: Session, sample_ids: Iterable[int]) -> set[int]:
    """The samples (of these) on which any readings were entered (one query).

    A test with no readings holds the JSON value ``null`` (the ORM writes None as JSON, not as
    SQL NULL), so the readings are compared as text, the same on SQLite and PostgreSQL."""
    wanted = list(sample_ids)
    if not wanted:
        return set()
    readings = func.coalesce(cast(col(LabTest.readings), String), "null")
    rows = s.exec(
        select(LabTest.sample_id)
        .where(
            col(LabTest.sample_id).in_(wanted),
            (readings != "null") | (LabTest.status != Status.requested.value),
        )
        .distinct()
    )
    return set(rows)


def _location_of_job(s: Session, location_id: int, job_id: int | None = None) -> Location:
    loc = s.get(Location, location_id)
    if loc is None or (job_id is not None and loc.job_id != job_id):
        refuse("location_id", "choose a location of this job")
    return loc


def _unique_sample(s: Session, job_id: int, code: str, sample_id: int | None = None) -> None:
    found = s.exec(select(Sample).where(Sample.job_id == job_id, Sample.code == code)).first()
    if found and found.id != sample_id:
        refuse("code", f"sample {code} is already in this job")


def add_sample(
    db: Database,
    actor: User | None,
    location_id: int,
    code: str,
    depth_from_m: Number,
    depth_to_m: Number = None,
    sample_type: str = "disturbed",
    description: str = "",
    remarks: str = "",
    methods: Iterable[str] = (),
) -> Sample:
    """Register a sample at a location, and request its tests in the same transaction."""
    values = sample_values(SampleForm(code, depth_from_m, depth_to_m, sample_type, description, remarks))
    with db.transaction() as s:
        loc = _location_of_job(s, location_id)
        sample = sample_in(s, actor, loc, values)
        requests_in(s, actor, [sample.id or 0], list(methods))
        return sample


def sample_in(s: Session, actor: User | None, loc: Location, values: dict[str, Any]) -> Sample:
    """Add a checked sample inside the caller's transaction."""
    _unique_sample(s, loc.job_id, values["code"])
    sample = Sample(job_id=loc.job_id, location_id=loc.id or 0, **values)
    s.add(sample)
    s.flush()
    audit.record(s, actor, "sample", sample.id or 0, "create", after=sample.model_dump(mode="json"))
    return sample


IDENTITY = ("location_id", "code", "depth_from_m", "depth_to_m", "sample_type")
"""What names a sample on its results: fixed once readings are entered."""

_IDENTITY_WORDS = {
    "location_id": "moved to another location",
    "code": "renamed",
    "depth_from_m": "given another depth",
    "depth_to_m": "given another depth",
    "sample_type": "given another type",
}


def identity_refusal(s: Session, sample: Sample, values: dict[str, Any]) -> tuple[str, str] | None:
    """(field, message) when a change would alter the identity of a sample with readings."""
    changed = [k for k in IDENTITY if k in values and getattr(sample, k) != values[k]]
    if not changed or (sample.id or 0) not in entered_samples(s, [sample.id or 0]):
        return None
    return changed[0], (
        f"sample {sample.code} has readings entered: it cannot be {_IDENTITY_WORDS[changed[0]]} "
        "(withdraw it and register a new sample instead)"
    )


def update_sample(db: Database, actor: User, sample_id: int, location_id: int, form: SampleForm) -> Sample:
    """Correct a sample: anything while nothing is entered; after that its description and
    remarks only (see ``IDENTITY``)."""
    values = sample_values(form)
    with db.transaction() as s:
        sample = s.get(Sample, sample_id)
        if sample is None:
            raise NotFound(f"sample {sample_id} does not exist")
        if sample.withdrawn_at is not None:
            refuse("code", f"sample {sample.code} is withdrawn and can no longer change")
        _location_of_job(s, location_id, sample.job_id)
        values["location_id"] = location_id
        _unique_sample(s, sample.job_id, values["code"], sample_id)
        refusal = identity_refusal(s, sample, values)
        if refusal:
            refuse(*refusal)
        change_in(s, actor, sample, "sample", values)
        return sample


def withdraw_sample(db: Database, actor: User, sample_id: int, reason: str) -> Sample:
    """Take a sample out of the job's work with a reason; it stays on the job page, marked,
    and is left out of reports from now on. Its tests are kept as they are."""
    reason = required_reason(reason, "withdraw a sample")
    with db.transaction() as s:
        sample = s.get(Sample, sample_id)
        if sample is None:
            raise NotFound(f"sample {sample_id} does not exist")
        if sample.withdrawn_at is not None:
            refuse("reason", f"sample {sample.code} was withdrawn already")
        before = sample.model_dump(mode="json")
        sample.withdrawn_at, sample.withdrawn_by_id, sample.withdrawn_reason = utcnow(), actor.id, reason
        s.add(sample)
        s.flush()
        audit.record(
            s,
            actor,
            "sample",
            sample_id,
            "withdraw",
            before=before,
            after=sample.model_dump(mode="json"),
            reason=reason,
        )
        return sample
