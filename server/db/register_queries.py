"""Queries of the laboratory registers (containers, equipment), the technician's work list and
the samples a bulk request would cover. Each runs a fixed number of queries, whatever the rows."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

from sqlalchemy import func, or_
from sqlmodel import Session, col, select

from server.db.queries import TestRow, test_rows
from server.db.tables import AuditEvent, Container, Equipment, Job, LabTest, Location, Sample, User
from server.workflow.states import Status

# What waits for someone at the bench, and what they handed in and still wait on.
OPEN_AT_BENCH = (Status.requested, Status.draft, Status.returned, Status.submitted)
IN_PROGRESS = (Status.draft, Status.returned)


def container_by_code(session: Session, code: str) -> Container | None:
    """A container by its code as written on the tin (case and spaces around it ignored)."""
    wanted = code.strip().upper()
    return session.exec(select(Container).where(func.upper(Container.code) == wanted)).first()


def equipment_by_code(session: Session, code: str) -> Equipment | None:
    wanted = code.strip().upper()
    return session.exec(select(Equipment).where(func.upper(Equipment.code) == wanted)).first()


def containers(session: Session, *, active_only: bool = False) -> list[Container]:
    stmt = select(Container).order_by(col(Container.code))
    if active_only:
        stmt = stmt.where(col(Container.active).is_(True))
    return list(session.exec(stmt))


def equipment_list(
    session: Session, kind: str | None = None, *, active_only: bool = False
) -> list[Equipment]:
    stmt = select(Equipment).order_by(col(Equipment.kind), col(Equipment.code))
    if kind:
        stmt = stmt.where(Equipment.kind == kind)
    if active_only:
        stmt = stmt.where(col(Equipment.active).is_(True))
    return list(session.exec(stmt))


@dataclass
class SampleWork:
    """One sample on the work list and the tests on it that concern the person."""

    sample: Sample
    location: Location
    tests: list[LabTest] = field(default_factory=list)


@dataclass
class JobWork:
    job: Job
    samples: list[SampleWork] = field(default_factory=list)


def _grouped(rows: Sequence[TestRow]) -> list[JobWork]:
    jobs: dict[int, JobWork] = {}
    samples: dict[int, SampleWork] = {}
    for row in rows:
        test, sample, location, job = row.test, row.sample, row.location, row.job
        job_work = jobs.setdefault(job.id or 0, JobWork(job))
        sample_work = samples.get(sample.id or 0)
        if sample_work is None:
            sample_work = samples[sample.id or 0] = SampleWork(sample, location)
            job_work.samples.append(sample_work)
        sample_work.tests.append(test)
    return list(jobs.values())


WORK_ORDER = (
    col(Job.code),
    col(Location.code),
    col(Sample.depth_from_m),
    col(Sample.code),
    col(LabTest.method),
)


def my_bench(session: Session, user_id: int) -> list[JobWork]:
    """Tests assigned to this person and not yet approved, and tests still in progress whose
    readings they entered, grouped by job and sample (one query)."""
    entered = select(AuditEvent.entity_id).where(
        AuditEvent.entity == "lab_test", AuditEvent.action == "readings", AuditEvent.actor_id == user_id
    )
    rows = test_rows(
        session,
        col(LabTest.status).in_([s.value for s in OPEN_AT_BENCH]),
        or_(
            col(LabTest.assigned_to_id) == user_id,
            col(LabTest.status).in_([s.value for s in IN_PROGRESS]) & col(LabTest.id).in_(entered),
        ),
        order=WORK_ORDER,
    )
    return _grouped(rows)


def unassigned_requests(session: Session, limit: int = 100) -> list[JobWork]:
    """Requested tests nobody has been given yet, for anyone free to pick up (one query)."""
    rows = test_rows(
        session,
        col(LabTest.status) == Status.requested.value,
        col(LabTest.assigned_to_id).is_(None),
        order=WORK_ORDER,
    )
    return _grouped(rows[:limit])


def technicians(session: Session) -> list[User]:
    """Active people a test can be given to (every role can enter readings)."""
    return list(session.exec(select(User).where(col(User.active).is_(True)).order_by(col(User.full_name))))


def job_locations(session: Session, job_id: int) -> list[Location]:
    return list(session.exec(select(Location).where(Location.job_id == job_id).order_by(col(Location.code))))


def matching_samples(
    session: Session,
    job_id: int,
    location_id: int | None = None,
    description_contains: str = "",
    sample_type: str = "",
) -> list[tuple[Sample, Location]]:
    """The samples of a job a bulk request covers: one location or all, optionally only those
    whose description contains a word (any case) or of one sample type. Withdrawn samples take
    no new tests and are never covered."""
    stmt = (
        select(Sample, Location)
        .join(Location, col(Location.id) == Sample.location_id)
        .where(Location.job_id == job_id, col(Sample.withdrawn_at).is_(None))
        .order_by(col(Location.code), col(Sample.depth_from_m), col(Sample.code))
    )
    if location_id is not None:
        stmt = stmt.where(Location.id == location_id)
    if description_contains.strip():
        stmt = stmt.where(
            func.lower(Sample.description).contains(description_contains.strip().lower(), autoescape=True)
        )
    if sample_type.strip():
        stmt = stmt.where(func.lower(Sample.sample_type) == sample_type.strip().lower())
    return [(s, loc) for s, loc in session.exec(stmt).all()]


@dataclass
class PlannedSample:
    """One sample a bulk request covers: the methods it would get and those it has already."""

    sample: Sample
    location: Location
    new: list[str]
    existing: list[str]


def plan_request(
    session: Session,
    job_id: int,
    methods: Sequence[str],
    location_id: int | None = None,
    description_contains: str = "",
    sample_type: str = "",
) -> list[PlannedSample]:
    """What a bulk request would create (two queries): each matching sample with the chosen
    methods it does not have yet; a method already on a sample (not superseded) is left out."""
    found = matching_samples(session, job_id, location_id, description_contains, sample_type)
    ids = [s.id or 0 for s, _ in found]
    have: dict[int, set[str]] = {}
    if ids:
        for sample_id, method in session.exec(
            select(LabTest.sample_id, LabTest.method).where(
                col(LabTest.sample_id).in_(ids), col(LabTest.status) != Status.superseded.value
            )
        ):
            have.setdefault(sample_id, set()).add(method)
    plan = []
    for sample, location in found:
        there = have.get(sample.id or 0, set())
        plan.append(
            PlannedSample(
                sample,
                location,
                [m for m in methods if m not in there],
                [m for m in methods if m in there],
            )
        )
    return plan


def sample_types(session: Session, job_id: int) -> list[str]:
    stmt = (
        select(Sample.sample_type)
        .join(Location, col(Location.id) == Sample.location_id)
        .where(Location.job_id == job_id)
        .distinct()
        .order_by(col(Sample.sample_type))
    )
    return list(session.exec(stmt))
