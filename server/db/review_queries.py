"""Queries of the reviewer's desk: the queue, revision chains and their authors, reports that
need re-issue, and turnaround. Each answers in a fixed number of queries, whatever the rows.

"Needs re-issue" is derived, never stored: an issued report (not superseded) that carries a
test revision which has since been amended (status ``superseded``). It stops needing re-issue
the moment a later revision of the report replaces it.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from datetime import UTC, date, datetime, timedelta
from typing import Any

from sqlalchemy import func, literal_column
from sqlalchemy.orm import defer
from sqlmodel import Session, col, select

from server.db.queries import TestRow, test_rows, users_by_id
from server.db.tables import AuditEvent, Client, Job, LabTest, Location, Report, ReportTest, Sample, User

# Audit actions on a test that make its actor an author: readings entered at the bench, and
# opening the revision as an amendment. Authors may not sign it (segregation of duties).
AUTHOR_ACTIONS = ("readings", "amend")


# -- revisions and their authors ----------------------------------------------------------------


def chain_ids(session: Session, test_ids: Iterable[int]) -> dict[int, list[int]]:
    """For each test, its own id and the ids of every earlier revision (newest first).

    One recursive query walks ``previous_revision_id`` for all the tests at once.
    """
    wanted = sorted(set(test_ids))
    if not wanted:
        return {}
    start = (
        select(
            col(LabTest.id).label("start_id"),
            col(LabTest.id).label("id"),
            col(LabTest.previous_revision_id).label("prev"),
            literal_column("0").label("depth"),
        )
        .where(col(LabTest.id).in_(wanted))
        .cte("chain", recursive=True)
    )
    earlier = select(
        start.c.start_id,
        col(LabTest.id),
        col(LabTest.previous_revision_id),
        (start.c.depth + 1),
    ).join(start, col(LabTest.id) == start.c.prev)
    chain = start.union_all(earlier)
    rows = session.execute(select(chain.c.start_id, chain.c.id).order_by(chain.c.start_id, chain.c.depth))
    found: dict[int, list[int]] = {i: [] for i in wanted}
    for start_id, test_id in rows:
        found[int(start_id)].append(int(test_id))
    return found


def authors_by_test(session: Session, test_ids: Iterable[int]) -> dict[int, set[int]]:
    """Who may not sign each test: everyone who entered readings of it or of an earlier revision
    (an amended revision starts with the readings before it), and whoever opened it as an
    amendment (ISO/IEC 17025:2017 cl. 7.8.1.1: results are reviewed before release; reviewing
    one's own readings is no review). Opening an earlier amendment without typing anything
    does not make one an author of the later revisions.
    """
    chains = chain_ids(session, test_ids)
    # One revision may sit in several chains (a test and its own earlier revision both asked for).
    owners: dict[int, list[int]] = {}
    for start, ids in chains.items():
        for tid in ids:
            owners.setdefault(tid, []).append(start)
    authors: dict[int, set[int]] = {start: set() for start in chains}
    if not owners:
        return authors
    rows = session.exec(
        select(AuditEvent.entity_id, AuditEvent.actor_id, AuditEvent.action).where(
            AuditEvent.entity == "lab_test",
            col(AuditEvent.entity_id).in_(list(owners)),
            col(AuditEvent.action).in_(AUTHOR_ACTIONS),
        )
    ).all()
    for entity_id, actor_id, action in rows:
        if actor_id is None:
            continue
        for start in owners.get(entity_id, []):
            if action == "readings" or entity_id == start:
                authors[start].add(actor_id)
    return authors


def revision_authors(session: Session, test_id: int) -> set[int]:
    return authors_by_test(session, [test_id]).get(test_id, set())


def revisions(session: Session, test_id: int) -> list[LabTest]:
    """The test and every earlier revision, oldest first."""
    ids = chain_ids(session, [test_id]).get(test_id, [])
    if not ids:
        return []
    found = {t.id: t for t in session.exec(select(LabTest).where(col(LabTest.id).in_(ids)))}
    return [found[i] for i in reversed(ids) if i in found]


def later_revision(session: Session, test_id: int) -> LabTest | None:
    """The revision that amended this one, if any."""
    return session.exec(select(LabTest).where(LabTest.previous_revision_id == test_id)).first()


def last_event(session: Session, entity: str, entity_id: int) -> tuple[AuditEvent, User | None] | None:
    """The newest audit event of a record and the person who caused it (for conflict messages)."""
    event = session.exec(
        select(AuditEvent)
        .where(AuditEvent.entity == entity, AuditEvent.entity_id == entity_id)
        .order_by(col(AuditEvent.id).desc())
    ).first()
    if event is None:
        return None
    return event, session.get(User, event.actor_id) if event.actor_id else None


# -- the review queue --------------------------------------------------------------------------

FLAG_CHOICES = ("any", "error", "warning", "none")


@dataclass(frozen=True)
class QueueFilter:
    """What the reviewer narrowed the queue to; None means no narrowing."""

    job_id: int | None = None
    method: str | None = None
    author_id: int | None = None  # entered or amended the readings
    older_than_days: int | None = None
    flags: str | None = None  # one of FLAG_CHOICES


@dataclass
class QueueRow:
    row: TestRow
    worst: str | None  # "error", "warning" or None (no quality flag)
    authors: list[User]
    waited: timedelta
    own: bool  # the reviewer looking at the queue entered or amended it
    batchable: bool  # may go into a batch approval: no flag at all, and not the reviewer's own


@dataclass
class Counts:
    waiting: int = 0
    shown: int = 0
    with_error: int = 0
    with_warning_only: int = 0
    without_flags: int = 0
    older_than_two_days: int = 0
    by_job: dict[int, int] = field(default_factory=dict)
    by_method: dict[str, int] = field(default_factory=dict)
    by_author: dict[int, int] = field(default_factory=dict)


@dataclass
class Queue:
    rows: list[QueueRow]
    counts: Counts
    jobs: list[Job]
    methods: list[str]
    people: list[User]


def worst_flag(flags: Sequence[dict[str, Any]] | None) -> str | None:
    severities = {f.get("severity") for f in flags or []}
    if "error" in severities:
        return "error"
    return "warning" if severities else None


def _keeps(item: QueueRow, wanted: QueueFilter) -> bool:
    test = item.row.test
    if wanted.job_id is not None and item.row.job.id != wanted.job_id:
        return False
    if wanted.method and test.method != wanted.method:
        return False
    if wanted.author_id is not None and wanted.author_id not in {u.id for u in item.authors}:
        return False
    if wanted.older_than_days is not None and item.waited < timedelta(days=wanted.older_than_days):
        return False
    if wanted.flags == "any":
        return item.worst is not None
    if wanted.flags in ("error", "warning"):
        return item.worst == wanted.flags
    if wanted.flags == "none":
        return item.worst is None
    return True


def review_queue(
    session: Session,
    viewer: User,
    wanted: QueueFilter,
    now: datetime,
    *,
    self_approval_forbidden: bool = True,
) -> Queue:
    """Handed-in tests: errors first, then warnings, then the rest; the longest waiting first."""
    rows = test_rows(session, col(LabTest.status) == "submitted", order=(col(LabTest.submitted_at),))
    authors = authors_by_test(session, [r.test.id or 0 for r in rows])
    people = users_by_id(session, [a for ids in authors.values() for a in ids])
    items: list[QueueRow] = []
    for r in rows:
        ids = authors.get(r.test.id or 0, set())
        worst = worst_flag(r.test.flags)
        own = viewer.id in ids
        items.append(
            QueueRow(
                row=r,
                worst=worst,
                authors=sorted((people[i] for i in ids if i in people), key=lambda u: u.full_name),
                waited=now - (r.test.submitted_at or r.test.updated_at),
                own=own,
                batchable=worst is None and not (own and self_approval_forbidden),
            )
        )
    rank = {"error": 0, "warning": 1, None: 2}
    items.sort(key=lambda q: (rank[q.worst], -q.waited.total_seconds(), q.row.test.id or 0))
    counts = Counts(waiting=len(items))
    for q in items:
        counts.with_error += q.worst == "error"
        counts.with_warning_only += q.worst == "warning"
        counts.without_flags += q.worst is None
        counts.older_than_two_days += q.waited >= timedelta(days=2)
        counts.by_job[q.row.job.id or 0] = counts.by_job.get(q.row.job.id or 0, 0) + 1
        counts.by_method[q.row.test.method] = counts.by_method.get(q.row.test.method, 0) + 1
        for u in q.authors:
            counts.by_author[u.id or 0] = counts.by_author.get(u.id or 0, 0) + 1
    shown = [q for q in items if _keeps(q, wanted)]
    counts.shown = len(shown)
    jobs = {q.row.job.id: q.row.job for q in items}
    return Queue(
        rows=shown,
        counts=counts,
        jobs=sorted(jobs.values(), key=lambda j: j.code),
        methods=sorted(counts.by_method),
        people=sorted(people.values(), key=lambda u: u.full_name),
    )


# -- reports that need re-issue ----------------------------------------------------------------


@dataclass
class StaleTest:
    """A test revision an issued report carries, and what has become of it since."""

    carried: LabTest
    newest: LabTest  # the latest revision of the same test (may still be a draft)
    sample: Sample
    location: Location


@dataclass
class Reissue:
    report: Report
    job: Job
    stale: list[StaleTest]

    @property
    def ready(self) -> bool:
        """Every amended test has an approved newest revision, so a new revision can be issued."""
        return all(s.newest.status == "approved" for s in self.stale)


def _newest_revisions(session: Session, test_ids: Iterable[int]) -> dict[int, LabTest]:
    """For each test, its latest revision: follow the amendments forward (one query per level;
    a test is rarely amended more than a few times)."""
    newest: dict[int, int] = {i: i for i in test_ids}
    frontier = set(newest.values())
    loaded: dict[int, LabTest] = {}
    while frontier:
        later = session.exec(select(LabTest).where(col(LabTest.previous_revision_id).in_(frontier))).all()
        step = {t.previous_revision_id: t for t in later}
        for t in later:
            loaded[t.id or 0] = t
        for start, current in newest.items():
            if current in step:
                newest[start] = step[current].id or 0
        frontier = {t.id or 0 for t in later}
    missing = {i for i in newest.values() if i not in loaded}
    if missing:
        for t in session.exec(select(LabTest).where(col(LabTest.id).in_(missing))):
            loaded[t.id or 0] = t
    return {start: loaded[current] for start, current in newest.items() if current in loaded}


def needs_reissue(
    session: Session, *, job_id: int | None = None, test_ids: Iterable[int] | None = None
) -> list[Reissue]:
    """Issued, not superseded reports carrying a test revision that has since been superseded.

    Narrowed to one job, or to the reports carrying any of ``test_ids`` (a test's revisions).
    """
    stmt = (
        select(Report, LabTest, Sample, Location)
        .join(ReportTest, col(ReportTest.report_id) == Report.id)
        .join(LabTest, col(LabTest.id) == ReportTest.test_id)
        .join(Sample, col(Sample.id) == LabTest.sample_id)
        .join(Location, col(Location.id) == Sample.location_id)
        .where(Report.status == "issued", col(LabTest.status) == "superseded")
        .options(defer(Report.pdf))  # type: ignore[arg-type]
        .order_by(col(Report.number), col(Report.revision), col(Location.code), col(Sample.depth_from_m))
    )
    if job_id is not None:
        stmt = stmt.where(Report.job_id == job_id)
    if test_ids is not None:
        stmt = stmt.where(col(ReportTest.test_id).in_(list(test_ids)))
    found = session.exec(stmt).all()
    if not found:
        return []
    newest = _newest_revisions(session, [t.id or 0 for _, t, _, _ in found])
    jobs = {
        j.id: j for j in session.exec(select(Job).where(col(Job.id).in_({r.job_id for r, _, _, _ in found})))
    }
    out: dict[int, Reissue] = {}
    for report, test, sample, location in found:
        entry = out.setdefault(report.id or 0, Reissue(report, jobs[report.job_id], []))
        entry.stale.append(StaleTest(test, newest.get(test.id or 0, test), sample, location))
    return list(out.values())


def reports_carrying(session: Session, test_ids: Iterable[int]) -> list[tuple[Report, int]]:
    """Every report (any status) that carries one of these test revisions, with that revision's id."""
    ids = list(test_ids)
    if not ids:
        return []
    rows = session.exec(
        select(Report, ReportTest.test_id)
        .join(ReportTest, col(ReportTest.report_id) == Report.id)
        .where(col(ReportTest.test_id).in_(ids))
        .options(defer(Report.pdf))  # type: ignore[arg-type]
        .order_by(col(Report.number), col(Report.revision))
    ).all()
    return [(r, int(t)) for r, t in rows]


# -- turnaround --------------------------------------------------------------------------------


@dataclass
class TestTimes:
    """When a test revision passed each step; ``issued`` is its first issued report."""

    row: TestRow
    received: datetime
    submitted: datetime | None
    approved: datetime | None
    issued: datetime | None
    overdue: bool


@dataclass
class JobTimes:
    job: Job
    client: Client
    tests: list[TestTimes]
    received: datetime
    due: date | None
    last_submitted: datetime | None
    last_approved: datetime | None
    last_issued: datetime | None
    open_tests: int
    days_late: int  # whole days past the due date with work still open; 0 when not late

    @property
    def complete(self) -> bool:
        return bool(self.tests) and self.open_tests == 0

    @property
    def overdue(self) -> bool:
        return self.days_late > 0


def _latest(values: Iterable[datetime | None]) -> datetime | None:
    present = [v for v in values if v is not None]
    return max(present) if present else None


def turnaround(session: Session, today: date, *, job_id: int | None = None) -> list[JobTimes]:
    """Times per current test and per job, with what is late against the job's due date.

    A test is done when its current revision is on an issued report; a job is late when its due
    date has passed and a test is not done (or no test was done at all).
    """
    conditions: list[Any] = [col(LabTest.status) != "superseded"]
    if job_id is not None:
        conditions.append(col(Job.id) == job_id)
    rows = test_rows(session, *conditions, order=(col(Location.code), col(Sample.depth_from_m)))
    ids = [r.test.id for r in rows]
    issued = (
        dict(
            session.exec(
                select(ReportTest.test_id, func.min(Report.issued_at))
                .join(Report, col(Report.id) == ReportTest.report_id)
                .where(col(ReportTest.test_id).in_(ids))
                .group_by(col(ReportTest.test_id))
            ).all()
        )
        if ids
        else {}
    )
    job_query = select(Job, Client).join(Client, col(Client.id) == Job.client_id).order_by(col(Job.code))
    if job_id is not None:
        job_query = job_query.where(Job.id == job_id)
    jobs = session.exec(job_query).all()
    by_job: dict[int, list[TestTimes]] = {j.id or 0: [] for j, _ in jobs}
    due = {j.id: j.due_date for j, _ in jobs}
    for r in rows:
        issued_at = issued.get(r.test.id or 0)
        if issued_at is not None and issued_at.tzinfo is None:  # stored as naive UTC
            issued_at = issued_at.replace(tzinfo=UTC)
        job_due = due.get(r.job.id)
        by_job.setdefault(r.job.id or 0, []).append(
            TestTimes(
                row=r,
                received=r.sample.received_at or r.job.received_at,  # a sample not yet receipted: the job's
                submitted=r.test.submitted_at,
                approved=r.test.approved_at,
                issued=issued_at,
                overdue=issued_at is None and job_due is not None and job_due < today,
            )
        )
    out = []
    for job, client in jobs:
        tests = by_job.get(job.id or 0, [])
        open_tests = sum(t.issued is None for t in tests)
        late = job.due_date is not None and job.due_date < today and (open_tests > 0 or not tests)
        out.append(
            JobTimes(
                job=job,
                client=client,
                tests=tests,
                received=job.received_at,
                due=job.due_date,
                last_submitted=_latest(t.submitted for t in tests),
                last_approved=_latest(t.approved for t in tests),
                last_issued=_latest(t.issued for t in tests),
                open_tests=open_tests,
                days_late=(today - job.due_date).days if late and job.due_date else 0,
            )
        )
    return out
