"""Queries the pages and services share. Each page needs a fixed number of queries, whatever
the number of rows (no query per row)."""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any

from sqlalchemy import func, or_, update
from sqlalchemy.orm import defer
from sqlmodel import Session, col, select

from server.db.tables import (
    AuditEvent,
    Client,
    Job,
    LabTest,
    Location,
    Report,
    ReportAgs4,
    Sample,
    ShareLink,
    User,
    utcnow,
)


def bump_test(session: Session, test: LabTest, expected_version: int, **values: Any) -> bool:
    """Change a test only if nobody changed it since ``expected_version`` (optimistic lock).

    Returns False, changing nothing, when the stored version differs. On success the loaded
    object is refreshed so the caller sees the new version.
    """
    values = {**values, "version": expected_version + 1, "updated_at": utcnow()}
    result = session.execute(
        update(LabTest)
        .where(col(LabTest.id) == test.id, col(LabTest.version) == expected_version)
        .values(**values)
        .execution_options(synchronize_session=False)
    )
    if result.rowcount != 1:  # type: ignore[attr-defined]
        return False
    session.refresh(test)
    return True


def readings_authors(session: Session, test_id: int) -> set[int]:
    """Everyone who entered or changed readings of this test revision (from the audit trail)."""
    rows = session.exec(
        select(AuditEvent.actor_id).where(
            AuditEvent.entity == "lab_test",
            AuditEvent.entity_id == test_id,
            col(AuditEvent.action).in_(["readings", "amend"]),
        )
    ).all()
    return {r for r in rows if r is not None}


@dataclass
class TestRow:
    """A test with the names a list shows beside it."""

    test: LabTest
    sample: Sample
    location: Location
    job: Job


def test_rows(
    session: Session, *conditions: Any, order: Sequence[Any] = (), limit: int | None = None
) -> list[TestRow]:
    """Tests with their sample, location and job, in one query (at most ``limit`` of them)."""
    stmt = (
        select(LabTest, Sample, Location, Job)
        .join(Sample, col(Sample.id) == LabTest.sample_id)
        .join(Location, col(Location.id) == Sample.location_id)
        .join(Job, col(Job.id) == Location.job_id)
        .where(*conditions)
        .order_by(*order)
        .limit(limit)
    )
    return [TestRow(t, s, loc, j) for t, s, loc, j in session.exec(stmt).all()]


def current_tests(session: Session, job_id: int) -> list[TestRow]:
    """Every test of a job that is not superseded, ordered by location, depth and method."""
    return test_rows(
        session,
        col(Job.id) == job_id,
        col(LabTest.status) != "superseded",
        order=(col(Location.code), col(Sample.depth_from_m), col(LabTest.method)),
    )


def users_by_id(session: Session, ids: Iterable[int | None]) -> dict[int, User]:
    wanted = {i for i in ids if i is not None}
    if not wanted:
        return {}
    return {u.id: u for u in session.exec(select(User).where(col(User.id).in_(wanted))).all() if u.id}


def job_reports(session: Session, job_id: int) -> list[Report]:
    """A job's reports, current ones first, newest first (the PDF bytes are not loaded)."""
    stmt = (
        select(Report)
        .where(Report.job_id == job_id)
        .options(defer(Report.pdf))  # type: ignore[arg-type]
        .order_by(col(Report.status), col(Report.number).desc(), col(Report.revision).desc())
    )
    return list(session.exec(stmt).all())


def frozen_ags4_digests(session: Session, report_ids: Iterable[int]) -> dict[int, str]:
    """The SHA-256 of the AGS4 file frozen with each of these reports, by report id; a report
    issued before files were frozen has none (the bytes are not loaded)."""
    wanted = set(report_ids)
    if not wanted:
        return {}
    rows = session.exec(
        select(ReportAgs4.report_id, ReportAgs4.sha256).where(col(ReportAgs4.report_id).in_(wanted))
    ).all()
    return dict(rows)


@dataclass
class JobSheet:
    """Everything the job page shows, loaded in a fixed number of queries."""

    job: Job
    client: Client
    locations: list[Location]
    samples: dict[int, list[Sample]]  # by location id
    tests: dict[int, list[LabTest]]  # by sample id, current revisions only
    reports: list[Report]
    links: list[ShareLink]
    ags4: dict[int, str]  # the SHA-256 of each report's frozen AGS4 file, by report id


def job_sheet(session: Session, job_id: int) -> JobSheet | None:
    job = session.get(Job, job_id)
    if job is None:
        return None
    client = session.get(Client, job.client_id)
    assert client is not None
    locations = list(
        session.exec(select(Location).where(Location.job_id == job_id).order_by(col(Location.code)))
    )
    samples: dict[int, list[Sample]] = {loc.id or 0: [] for loc in locations}
    for sample in session.exec(
        select(Sample)
        .join(Location, col(Location.id) == Sample.location_id)
        .where(Location.job_id == job_id)
        .order_by(col(Sample.depth_from_m), col(Sample.code))
    ):
        samples[sample.location_id].append(sample)
    tests: dict[int, list[LabTest]] = {}
    for row in current_tests(session, job_id):
        tests.setdefault(row.sample.id or 0, []).append(row.test)
    links = list(
        session.exec(
            select(ShareLink).where(ShareLink.job_id == job_id).order_by(col(ShareLink.created_at).desc())
        )
    )
    reports = job_reports(session, job_id)
    ags4 = frozen_ags4_digests(session, [r.id or 0 for r in reports])
    return JobSheet(job, client, locations, samples, tests, reports, links, ags4)


def same_name(column: Any, name: str) -> Any:
    """A condition: ``column`` holds ``name`` whatever its case. SQLite's lower() folds only the
    ASCII letters (and PostgreSQL's follows the collation), so the exact name is asked for too:
    a name with "Ô" in it is still found, never inserted twice against the unique index."""
    return or_(column == name, func.lower(column) == name.lower())
