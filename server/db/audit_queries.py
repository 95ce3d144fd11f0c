"""Reading the audit trail: the events of a test, a sample, a job, a user, or the newest ones.

Reads only: nothing here (or anywhere) updates or deletes an audit event. A trail is the ids of
its events (one union of index reads, one part per kind of record), a page of them in the order
events were written, then those events.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from sqlalchemy import and_, func, or_, union_all
from sqlalchemy import select as sa_select
from sqlalchemy.orm import defer
from sqlmodel import Session, col, select

from server.db.tables import AuditEvent, Job, LabTest, Location, Report, Sample, ShareLink, User
from server.engine import METHODS

PAGE = 200


@dataclass
class Trail:
    events: list[AuditEvent]
    total: int
    offset: int
    limit: int
    labels: dict[tuple[str, int], str]  # (entity, id) -> what the record is, in words

    @property
    def has_more(self) -> bool:
        return self.offset + len(self.events) < self.total

    @property
    def next_offset(self) -> int:
        return self.offset + self.limit

    @property
    def previous_offset(self) -> int | None:
        return max(self.offset - self.limit, 0) if self.offset else None


def _is(entity: str, ids: Any) -> Any:
    return and_(col(AuditEvent.entity) == entity, col(AuditEvent.entity_id).in_(ids))


def _of(entity: str, ids: Any) -> Any:
    """The ids of the events of these records (one index range of ``(entity, entity_id)``)."""
    return select(col(AuditEvent.id)).where(_is(entity, ids))


def _job_events(session: Session, job_id: int) -> Any:
    """The ids of a job's events, as one union of the kinds of record: each part reads the
    ``(entity, entity_id)`` index, where one OR of them all would read the whole trail. An event
    is of one record, so the parts never share an id."""
    job = session.get(Job, job_id)
    if job is None:
        return _of("job", [])
    locations = select(Location.id).where(Location.job_id == job_id)
    samples = select(Sample.id).where(Sample.job_id == job_id)
    tests = (
        select(LabTest.id).join(Sample, col(Sample.id) == LabTest.sample_id).where(Sample.job_id == job_id)
    )
    reports = select(Report.id).where(Report.job_id == job_id)
    # A link opens one job, or every job of its client (job_id empty): both concern this job.
    links = select(ShareLink.id).where(
        or_(
            col(ShareLink.job_id) == job_id,
            and_(col(ShareLink.job_id).is_(None), col(ShareLink.client_id) == job.client_id),
        )
    )
    return union_all(
        _of("job", [job_id]),
        _of("client", [job.client_id]),
        _of("location", locations),
        _of("sample", samples),
        _of("lab_test", tests),
        _of("report", reports),
        _of("share_link", links),
    )


def _sample_events(sample_id: int) -> Any:
    return union_all(
        _of("sample", [sample_id]),
        _of("lab_test", select(LabTest.id).where(LabTest.sample_id == sample_id)),
    )


def _read(session: Session, ids: Any, offset: int, limit: int | None) -> tuple[list[AuditEvent], int]:
    """The events whose ids ``ids`` selects, in written order, a page of them, and how many there
    are. The page is chosen among the ids alone (from the index), then only its events are read."""
    found = ids.subquery("trail")
    total = int(session.execute(sa_select(func.count()).select_from(found)).scalar_one())
    page = sa_select(found.c.id).order_by(found.c.id).offset(offset)
    if limit is not None:
        page = page.limit(limit)
    chosen = list(session.execute(page).scalars())
    if not chosen:
        return [], total
    events = session.exec(
        select(AuditEvent).where(col(AuditEvent.id).in_(chosen)).order_by(col(AuditEvent.id))
    )
    return list(events.all()), total


def labels(session: Session, events: list[AuditEvent]) -> dict[tuple[str, int], str]:
    """Words for the records the events name (tests by method and revision, samples by code...),
    one query per kind of record."""
    found: dict[tuple[str, int], str] = {}
    ids: dict[str, set[int]] = {}
    for e in events:
        ids.setdefault(e.entity, set()).add(e.entity_id)
    if ids.get("lab_test"):
        for t, sample in session.exec(
            select(LabTest, Sample)
            .join(Sample, col(Sample.id) == LabTest.sample_id)
            .where(col(LabTest.id).in_(ids["lab_test"]))
        ):
            method = METHODS.get(t.method)
            name = method.title if method else t.method
            found[("lab_test", t.id or 0)] = f"{name}, revision {t.revision}, on {sample.code}"
    simple: list[tuple[str, Any, Any]] = [
        ("sample", Sample, lambda r: f"sample {r.code}"),
        ("location", Location, lambda r: f"{r.kind} {r.code}"),
        ("job", Job, lambda r: f"job {r.code}"),
        ("report", Report, lambda r: f"report {r.number} rev {r.revision}"),
        ("share_link", ShareLink, lambda r: f"client link {r.label or r.id}"),
        ("user", User, lambda r: f"user {r.username}"),
    ]
    for entity, table, words in simple:
        if ids.get(entity):
            stmt = select(table).where(col(table.id).in_(ids[entity]))
            if table is Report:
                stmt = stmt.options(defer(Report.pdf))  # type: ignore[arg-type]
            for record in session.exec(stmt):
                found[(entity, record.id or 0)] = words(record)
    return found


def job_trail(session: Session, job_id: int, offset: int = 0, limit: int | None = PAGE) -> Trail:
    """Every event of a job: the job, its client, locations, samples, tests, reports and links."""
    events, total = _read(session, _job_events(session, job_id), offset, limit)
    return Trail(events, total, offset, limit or total, labels(session, events))


def sample_trail(session: Session, sample_id: int, offset: int = 0, limit: int | None = PAGE) -> Trail:
    """Every event of a sample and of every revision of every test on it."""
    events, total = _read(session, _sample_events(sample_id), offset, limit)
    return Trail(events, total, offset, limit or total, labels(session, events))


def events_of_tests(session: Session, test_ids: list[int]) -> list[AuditEvent]:
    """The events of these test revisions, in the order they were written (for replay and history)."""
    if not test_ids:
        return []
    events, _ = _read(session, _of("lab_test", test_ids), 0, None)
    return events


def entity_events(session: Session, entity: str, entity_id: int) -> list[AuditEvent]:
    events, _ = _read(session, _of(entity, [entity_id]), 0, None)
    return events


def recent(session: Session, limit: int = 100, before: int | None = None) -> list[AuditEvent]:
    """The newest events of the whole laboratory, newest first; with ``before``, the newest of
    those older than that event (a keyset page: the primary key's index, at any depth)."""
    stmt = select(AuditEvent).order_by(col(AuditEvent.id).desc()).limit(limit)
    if before is not None:
        stmt = stmt.where(col(AuditEvent.id) < before)
    return list(session.exec(stmt).all())


def has_older(session: Session, oldest: int) -> bool:
    """Whether events older than event ``oldest`` exist (the audit page's "older events" link)."""
    return session.exec(select(AuditEvent.id).where(col(AuditEvent.id) < oldest).limit(1)).first() is not None


def recent_jobs(session: Session, limit: int = 50) -> list[Job]:
    """The jobs registered last (the audit page offers their trails; any other job's trail is a
    link on its own page)."""
    return list(session.exec(select(Job).order_by(col(Job.id).desc()).limit(limit)).all())


def refused_sign_ins(session: Session, limit: int = 100) -> list[AuditEvent]:
    """The newest refused and throttled sign-ins, for the admins' access page."""
    query = select(AuditEvent).where(AuditEvent.entity == "sign-in").order_by(col(AuditEvent.id).desc())
    return list(session.exec(query.limit(limit)).all())
