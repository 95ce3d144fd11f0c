"""Queries of the reviewer's desk: the queue, revision chains and their authors, reports that
need re-issue, and turnaround. Each answers in a fixed number of queries, whatever the rows.

"Needs re-issue" is derived, never stored: an issued report (not superseded) that carries a
test revision which has since been amended (status ``superseded``). It stops needing re-issue
the moment a later revision of the report replaces it.
"""

from __future__ import annotations

import weakref
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from datetime import UTC, date, datetime, timedelta
from typing import Any

from sqlalchemy import Engine, and_, case, exists, func, literal, literal_column, union
from sqlalchemy import cast as sa_cast
from sqlalchemy import select as sa_select
from sqlalchemy.dialects.postgresql import JSONB
from sqlalchemy.orm import defer
from sqlmodel import Session, col, select

from server.db.paging import Neighbours, page_of
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
QUEUE_PAGE = 50  # tests a page of the queue shows
JOB_CHOICES = 100  # jobs the job filter offers: those with the most tests waiting


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
class Queue(Neighbours):
    """One page of the queue, the counts of the whole queue, and the choices of its filters."""

    rows: list[QueueRow]
    counts: Counts
    jobs: list[Job]  # the jobs with the most tests waiting (at most JOB_CHOICES), by number
    methods: list[str]
    people: list[User]
    page: int = 1  # clamped to 1..pages
    pages: int = 1
    per_page: int = 50
    more_jobs: int = 0  # jobs with tests waiting that the job filter does not offer


def worst_flag(flags: Sequence[dict[str, Any]] | None) -> str | None:
    severities = {f.get("severity") for f in flags or []}
    if "error" in severities:
        return "error"
    return "warning" if severities else None


def _has_severity(session: Session, severity: str) -> Any:
    """A condition: the test carries a flag of this severity (in the ``flags`` JSON list).

    PostgreSQL: jsonb containment (``@>``); SQLite: its JSON1 ``json_each`` (sqlite.org/json1.html).
    """
    if session.get_bind().dialect.name == "postgresql":
        flags = func.coalesce(sa_cast(col(LabTest.flags), JSONB), sa_cast(literal("[]"), JSONB))
        return flags.contains([{"severity": severity}])
    each = func.json_each(col(LabTest.flags)).table_valued("value")
    return exists(
        select(literal(1)).select_from(each).where(func.json_extract(each.c.value, "$.severity") == severity)
    )


def _waiting_since() -> Any:
    return func.coalesce(col(LabTest.submitted_at), col(LabTest.updated_at))


def _author_pairs(handed_in: Any) -> Any:
    """(test id, author id) of every handed-in test: the rule of ``authors_by_test`` in SQL, for
    counting and narrowing the whole queue at once. A test's own readings and amendment come
    straight from the index of the trail; only amended tests walk back to their earlier
    revisions (whose readings authors are authors too), so the walk stays as short as they are few."""
    authored = and_(col(AuditEvent.entity) == "lab_test", col(AuditEvent.actor_id).is_not(None))
    own: Any = (
        select(col(LabTest.id).label("test_id"), col(AuditEvent.actor_id).label("author_id"))
        .join(AuditEvent, and_(authored, col(AuditEvent.entity_id) == col(LabTest.id)))
        .where(handed_in, col(AuditEvent.action).in_(AUTHOR_ACTIONS))
    )
    start = (
        select(col(LabTest.id).label("start_id"), col(LabTest.previous_revision_id).label("id"))
        .where(handed_in, col(LabTest.previous_revision_id).is_not(None))
        .cte("earlier", recursive=True)
    )
    earlier = start.union_all(
        select(start.c.start_id, col(LabTest.previous_revision_id))
        .join(start, col(LabTest.id) == start.c.id)
        .where(col(LabTest.previous_revision_id).is_not(None))
    )
    before = (
        select(earlier.c.start_id, col(AuditEvent.actor_id))
        .join(AuditEvent, and_(authored, col(AuditEvent.entity_id) == earlier.c.id))
        .where(col(AuditEvent.action) == "readings")
    )
    return union(own, before).subquery("queue_authors")


def review_queue(
    session: Session,
    viewer: User,
    wanted: QueueFilter,
    now: datetime,
    *,
    page: int = 1,
    per_page: int = QUEUE_PAGE,
    self_approval_forbidden: bool = True,
) -> Queue:
    """Handed-in tests: errors first, then warnings, then the rest; the longest waiting first.

    The database counts, narrows, orders and pages the whole queue (a fixed number of queries,
    whatever its length); only the page's tests are loaded, without their readings and results.
    """
    error, warning = _has_severity(session, "error"), _has_severity(session, "warning")
    rank = case((error, 0), (warning, 1), else_=2)
    since = _waiting_since()
    two_days = now - timedelta(days=2)
    handed_in = col(LabTest.status) == "submitted"
    c = session.execute(
        sa_select(
            func.count(),
            func.coalesce(func.sum(case((error, 1), else_=0)), 0),
            func.coalesce(func.sum(case((and_(~error, warning), 1), else_=0)), 0),
            func.coalesce(func.sum(case((and_(~error, ~warning), 1), else_=0)), 0),
            func.coalesce(func.sum(case((since <= two_days, 1), else_=0)), 0),
        ).where(handed_in)
    ).one()
    counts = Counts(
        waiting=int(c[0]),
        with_error=int(c[1]),
        with_warning_only=int(c[2]),
        without_flags=int(c[3]),
        older_than_two_days=int(c[4]),
    )
    counts.by_job = {
        int(j): int(n)
        for j, n in session.execute(
            select(col(Sample.job_id), func.count())
            .join(LabTest, col(LabTest.sample_id) == col(Sample.id))
            .where(handed_in)
            .group_by(col(Sample.job_id))
        )
    }
    counts.by_method = dict(
        session.execute(
            select(col(LabTest.method), func.count()).where(handed_in).group_by(col(LabTest.method))
        ).all()
    )
    pairs = _author_pairs(handed_in)
    counts.by_author = {
        int(a): int(n)
        for a, n in session.execute(select(pairs.c.author_id, func.count()).group_by(pairs.c.author_id))
    }
    conditions: list[Any] = [handed_in]
    if wanted.job_id is not None:
        conditions.append(col(Sample.job_id) == wanted.job_id)
    if wanted.method:
        conditions.append(col(LabTest.method) == wanted.method)
    if wanted.author_id is not None:
        conditions.append(
            col(LabTest.id).in_(select(pairs.c.test_id).where(pairs.c.author_id == wanted.author_id))
        )
    if wanted.older_than_days is not None:
        conditions.append(since <= now - timedelta(days=wanted.older_than_days))
    if wanted.flags == "any":
        conditions.append(rank < 2)
    elif wanted.flags in ("error", "warning"):
        conditions.append(rank == (0 if wanted.flags == "error" else 1))
    elif wanted.flags == "none":
        conditions.append(rank == 2)

    def narrowed(*columns: Any) -> Any:
        stmt = select(*columns).select_from(LabTest)
        if wanted.job_id is not None:  # the only condition on another table
            stmt = stmt.join(Sample, col(Sample.id) == col(LabTest.sample_id))
        return stmt.where(*conditions)

    narrowing = len(conditions) > 1
    counts.shown = int(session.execute(narrowed(func.count())).scalar_one()) if narrowing else counts.waiting
    per_page = max(1, per_page)
    page, pages = page_of(counts.shown, page, per_page)
    # The page's test ids first, ordered from the narrow columns; then only those rows are read.
    ids = list(
        session.execute(
            narrowed(col(LabTest.id))
            .order_by(rank, since, col(LabTest.id))
            .offset((page - 1) * per_page)
            .limit(per_page)
        ).scalars()
    )
    loaded = (
        {
            t.id: (t, smp, loc, j)
            for t, smp, loc, j in session.exec(
                select(LabTest, Sample, Location, Job)
                .join(Sample, col(Sample.id) == col(LabTest.sample_id))
                .join(Location, col(Location.id) == col(Sample.location_id))
                .join(Job, col(Job.id) == col(Sample.job_id))
                .where(col(LabTest.id).in_(ids))
                .options(defer(LabTest.readings), defer(LabTest.results))  # type: ignore[arg-type]
            )
        }
        if ids
        else {}
    )
    found = [loaded[i] for i in ids if i in loaded]
    rows = [TestRow(t, smp, loc, j) for t, smp, loc, j in found]
    authors = authors_by_test(session, [r.test.id or 0 for r in rows])
    offered = sorted(counts.by_job, key=lambda j: (-counts.by_job[j], j))[:JOB_CHOICES]
    if wanted.job_id is not None and wanted.job_id in counts.by_job and wanted.job_id not in offered:
        offered.append(wanted.job_id)
    jobs = (
        list(session.exec(select(Job).where(col(Job.id).in_(offered)).order_by(col(Job.code))))
        if offered
        else []
    )
    people = users_by_id(
        session, [*counts.by_author, *(a for found_ids in authors.values() for a in found_ids)]
    )
    items: list[QueueRow] = []
    for r in rows:
        author_ids = authors.get(r.test.id or 0, set())
        worst = worst_flag(r.test.flags)
        own = viewer.id in author_ids
        items.append(
            QueueRow(
                row=r,
                worst=worst,
                authors=sorted((people[i] for i in author_ids if i in people), key=lambda u: u.full_name),
                waited=now - (r.test.submitted_at or r.test.updated_at),
                own=own,
                batchable=worst is None and not (own and self_approval_forbidden),
            )
        )
    return Queue(
        rows=items,
        counts=counts,
        jobs=jobs,
        methods=sorted(counts.by_method),
        people=sorted((people[a] for a in counts.by_author if a in people), key=lambda u: u.full_name),
        page=page,
        pages=pages,
        per_page=per_page,
        more_jobs=len(counts.by_job) - len(jobs),
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
    test_count: int = 0  # current tests (``tests`` lists them on a job's own page only)

    @property
    def complete(self) -> bool:
        return self.test_count > 0 and self.open_tests == 0

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
                test_count=len(tests),
            )
        )
    return out


# -- the turnaround overview, a page of each section at a time ----------------------------------

TURNAROUND_PAGE = 50  # jobs a section of the overview shows at a time
SECTIONS = ("late", "open", "done")


@dataclass(frozen=True)
class Rollup:
    """A job's counts that decide its section: current tests, and those on no report yet."""

    job_id: int
    code: str
    due: date | None
    tests: int
    open_tests: int

    def days_late(self, today: date) -> int:
        late = self.due is not None and self.due < today and (self.open_tests > 0 or self.tests == 0)
        return (today - self.due).days if late and self.due else 0

    def section(self, today: date) -> str:
        if self.days_late(today) > 0:
            return "late"
        return "done" if self.tests > 0 and self.open_tests == 0 else "open"


@dataclass
class Section:
    name: str
    jobs: list[JobTimes]
    total: int
    page: int
    pages: int


# The rollups of every job, kept per database with the newest audit event id they were read at:
# every change writes an audit event in its own transaction (DESIGN.md section 4), so while the
# newest id is the same, nothing a rollup counts has changed, and reading them again (a scan of
# every current test) would only give the same answer.
_ROLLUPS: weakref.WeakKeyDictionary[Engine, tuple[int, list[Rollup]]] = weakref.WeakKeyDictionary()


def _newest_event_id(session: Session) -> int:
    return int(session.execute(select(func.max(col(AuditEvent.id)))).scalar_one() or 0)


def rollups(session: Session) -> list[Rollup]:
    """Every job's rollup (one aggregate over the current tests, or none when the trail has not
    moved since the last one; two queries at most)."""
    engine = session.get_bind().engine
    newest = _newest_event_id(session)
    kept = _ROLLUPS.get(engine)
    if kept is not None and kept[0] == newest:
        return kept[1]
    on_report = select(col(ReportTest.test_id)).distinct().subquery("on_report")
    per_job = (
        select(
            col(Sample.job_id).label("job_id"),
            func.count(col(LabTest.id)).label("tests"),
            func.sum(case((on_report.c.test_id.is_(None), 1), else_=0)).label("open_tests"),
        )
        .join(LabTest, col(LabTest.sample_id) == col(Sample.id))
        .outerjoin(on_report, on_report.c.test_id == col(LabTest.id))
        .where(col(LabTest.status) != "superseded")
        .group_by(col(Sample.job_id))
        .subquery("per_job")
    )
    found = [
        Rollup(int(i), code, due, int(n), int(o))
        for i, code, due, n, o in session.execute(
            sa_select(
                col(Job.id),
                col(Job.code),
                col(Job.due_date),
                func.coalesce(per_job.c.tests, 0),
                func.coalesce(per_job.c.open_tests, 0),
            ).outerjoin(per_job, per_job.c.job_id == col(Job.id))
        )
    ]
    _ROLLUPS[engine] = (newest, found)
    return found


def turnaround_overview(
    session: Session, today: date, pages: dict[str, int], per_page: int = TURNAROUND_PAGE
) -> list[Section]:
    """The late jobs (the most overdue first), the open ones and the done ones (by number), a
    page of each: the rollups decide the sections, then the page's jobs get their times (a fixed
    number of queries, whatever the number of jobs)."""
    by_section: dict[str, list[Rollup]] = {name: [] for name in SECTIONS}
    for r in rollups(session):
        by_section[r.section(today)].append(r)
    by_section["late"].sort(key=lambda r: (-r.days_late(today), r.code))
    by_section["open"].sort(key=lambda r: r.code)
    by_section["done"].sort(key=lambda r: r.code)
    chosen: dict[str, tuple[list[Rollup], int, int]] = {}
    for name, found in by_section.items():
        page, n_pages = page_of(len(found), pages.get(name, 1), per_page)
        chosen[name] = (found[(page - 1) * per_page : page * per_page], page, n_pages)
    ids = [r.job_id for rows, _, _ in chosen.values() for r in rows]
    times = _job_times(session, ids)
    jobs = (
        {
            j.id: (j, c)
            for j, c in session.exec(
                select(Job, Client).join(Client, col(Client.id) == Job.client_id).where(col(Job.id).in_(ids))
            )
        }
        if ids
        else {}
    )
    out = []
    for name in SECTIONS:
        rows, page, n_pages = chosen[name]
        listed = []
        for r in rows:
            job, client = jobs[r.job_id]
            submitted, approved, issued = times.get(r.job_id, (None, None, None))
            listed.append(
                JobTimes(
                    job=job,
                    client=client,
                    tests=[],
                    received=job.received_at,
                    due=job.due_date,
                    last_submitted=submitted,
                    last_approved=approved,
                    last_issued=issued,
                    open_tests=r.open_tests,
                    days_late=r.days_late(today),
                    test_count=r.tests,
                )
            )
        out.append(Section(name, listed, len(by_section[name]), page, n_pages))
    return out


def _job_times(session: Session, job_ids: list[int]) -> dict[int, tuple[Any, Any, Any]]:
    """The last hand-in, approval and first issue of the current tests of these jobs."""
    if not job_ids:
        return {}
    first_issue = (
        select(col(ReportTest.test_id).label("test_id"), func.min(col(Report.issued_at)).label("at"))
        .join(Report, col(Report.id) == col(ReportTest.report_id))
        .join(LabTest, col(LabTest.id) == col(ReportTest.test_id))
        .join(Sample, col(Sample.id) == col(LabTest.sample_id))
        .where(col(Sample.job_id).in_(job_ids))
        .group_by(col(ReportTest.test_id))
        .subquery("first_issue")
    )
    rows = session.execute(
        select(
            col(Sample.job_id),
            func.max(col(LabTest.submitted_at)),
            func.max(col(LabTest.approved_at)),
            func.max(first_issue.c.at),
        )
        .join(LabTest, col(LabTest.sample_id) == col(Sample.id))
        .outerjoin(first_issue, first_issue.c.test_id == col(LabTest.id))
        .where(col(Sample.job_id).in_(job_ids), col(LabTest.status) != "superseded")
        .group_by(col(Sample.job_id))
    ).all()
    return {int(j): (_aware(s), _aware(a), _aware(i)) for j, s, a, i in rows}


def _aware(value: Any) -> datetime | None:
    """A time from an aggregate (max() gives the stored naive UTC value back untyped)."""
    if value is None:
        return None
    if isinstance(value, str):  # SQLite hands an aggregate of a timestamp back as its text
        value = datetime.fromisoformat(value)
    return value if value.tzinfo else value.replace(tzinfo=UTC)
