"""The jobs list at real size (issue S6 point 7): search, a status filter and pages; and a job's
own page at real size (issue S11: a job of a thousand samples), its samples a page at a time.

A laboratory keeps every job it ever had, so the list cannot load them all: it asks the
database for one page, and always with the same two queries (the count of matching jobs, then
the page: its jobs chosen in order by id alone, and only those given their counts as correlated
subqueries), whatever the number of jobs and however deep the page.

Statuses are derived, never stored, so they cannot drift from the reports:

- ``reported``: the job has at least one issued report (``Report.status == "issued"``; a
  superseded revision does not count, its successor does);
- ``open``: no issued report yet (overdue jobs are open too);
- ``overdue``: open, and its due date is before ``today`` (a job due today is not overdue yet;
  a job without a due date is never overdue).

Search is a case-insensitive substring of the job number, client name, site or title. ``%``
and ``_`` in the search are taken literally. Both sides are lowered by the database, so a
search typed exactly as stored always matches; how letters beyond ASCII are lowered is the
database's own (SQLite lowers ASCII only; PostgreSQL follows the database's locale, and under
the C locale also lowers ASCII only), so "ÉTANG" may not find "étang".

Order: the work still to do first, soonest due at the top (so overdue jobs lead), jobs without
a due date after them; then the reported jobs, most recently due first, undated last. The job
number breaks ties, so pages never overlap or skip a job.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date, datetime
from typing import Any, Final, Literal

from sqlalchemy import ColumnElement, Select, and_, case, func, literal, or_, union
from sqlalchemy import select as sa_select
from sqlalchemy.orm import load_only
from sqlmodel import Session, col, select

from server.db.paging import Neighbours, page_of
from server.db.queries import JobSheet, frozen_ags4_digests, job_reports
from server.db.tables import AuditEvent, Client, Job, LabTest, Location, Report, Sample, ShareLink
from server.workflow.states import Status

DerivedStatus = Literal["open", "overdue", "reported"]
# The filter's choices, in the order the form offers them ("" is every job).
STATUS_CHOICES: Final[dict[str, str]] = {
    "": "All",
    "open": "Open",
    "overdue": "Overdue",
    "reported": "Reported",
}
PER_PAGE: Final = 50
# Statuses a test has left behind once signed: approved, or replaced by an amended revision.
_SIGNED: Final = (Status.approved.value, Status.superseded.value)


@dataclass(frozen=True)
class JobFilter:
    """What the person asked for: a search text, a status ("" for all) and a page (from 1).

    Values are taken as given; ``job_page`` treats an unknown status as no filter and clamps
    the page, so a hand-edited address never fails.
    """

    q: str = ""
    status: str = ""
    page: int = 1

    @property
    def search(self) -> str:
        """The search text as matched: trimmed, without NUL characters (PostgreSQL refuses them)."""
        return self.q.replace("\x00", "").strip()

    @property
    def known_status(self) -> str:
        """The status filter, or "" when the value is not one of ``STATUS_CHOICES``."""
        return self.status if self.status in STATUS_CHOICES else ""


@dataclass(frozen=True)
class JobRow:
    """One line of the list: the job with the counts a laboratory manager scans for."""

    job: Job
    client: str
    samples: int  # not withdrawn
    tests_to_approve: int  # on samples not withdrawn, neither approved nor superseded
    issued_reports: int
    status: DerivedStatus

    @property
    def overdue(self) -> bool:
        return self.status == "overdue"


@dataclass(frozen=True)
class JobListPage(Neighbours):
    """One page of the list, with what a pager needs."""

    rows: list[JobRow]
    total: int  # jobs matching the filter, on every page
    page: int  # clamped to 1..pages
    pages: int  # at least 1, so an empty list is "page 1 of 1"
    per_page: int


def derived_status(due_date: date | None, issued_reports: int, today: date) -> DerivedStatus:
    """A job's status by the definitions in the module docstring (the SQL filter mirrors it)."""
    if issued_reports > 0:
        return "reported"
    if due_date is not None and due_date < today:
        return "overdue"
    return "open"


def like_pattern(text: str) -> str:
    """A LIKE pattern matching ``text`` anywhere, its ``\\``, ``%`` and ``_`` taken literally."""
    escaped = text.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_")
    return f"%{escaped}%"


def _issued() -> Any:
    """Issued reports per job (a subquery); a job without one has no row (``n`` NULL when joined)."""
    return (
        sa_select(col(Report.job_id).label("job_id"), func.count(col(Report.id)).label("n"))
        .where(col(Report.status) == "issued")
        .group_by(col(Report.job_id))
        .subquery("issued")
    )


def _row_counts() -> tuple[Any, Any]:
    """The samples (not withdrawn) and the tests still to approve of each job, as correlated
    subqueries of ``Job``: the counts a list row shows, in the list's own query."""
    samples = (
        select(func.count(col(Sample.id)))
        .where(col(Sample.job_id) == col(Job.id), col(Sample.withdrawn_at).is_(None))
        .correlate(Job)
        .scalar_subquery()
    )
    to_approve = (
        select(func.count(col(LabTest.id)))
        .join(Sample, col(Sample.id) == col(LabTest.sample_id))
        .where(
            col(Sample.job_id) == col(Job.id),
            col(Sample.withdrawn_at).is_(None),
            col(LabTest.status).not_in(_SIGNED),
        )
        .correlate(Job)
        .scalar_subquery()
    )
    return samples, to_approve


def job_page(session: Session, wanted: JobFilter, today: date, per_page: int = PER_PAGE) -> JobListPage:
    """One page of the jobs matching ``wanted``, in two queries whatever the number of jobs."""
    per_page = max(1, per_page)
    issued = _issued()
    reported = issued.c.n.is_not(None)
    conditions = _conditions(wanted, today, reported)

    def matching(*columns: Any) -> Select[Any]:
        return (
            sa_select(*columns)
            .select_from(Job)
            .join(Client, col(Client.id) == col(Job.client_id))
            .outerjoin(issued, issued.c.job_id == col(Job.id))
            .where(*conditions)
        )

    total = int(session.execute(matching(func.count(col(Job.id)))).scalar_one())
    page, pages = page_of(total, wanted.page, per_page)

    open_due = case((reported, None), else_=col(Job.due_date))
    reported_due = case((reported, col(Job.due_date)), else_=None)
    order = (
        case((reported, 1), else_=0),
        open_due.is_(None),
        open_due.asc(),
        reported_due.is_(None),
        reported_due.desc(),
        col(Job.code),
    )
    # The page's jobs are chosen by id and position alone; the counts are then made for those
    # rows only (counting in the ordered query would count every job the offset skips).
    chosen = (
        matching(col(Job.id).label("job_id"), func.row_number().over(order_by=order).label("position"))
        .order_by(*order)
        .offset((page - 1) * per_page)
        .limit(per_page)
        .subquery("chosen")
    )
    samples, to_approve = _row_counts()
    stmt = (
        sa_select(Job, col(Client.name), samples, to_approve, func.coalesce(issued.c.n, 0))
        .select_from(chosen)
        .join(Job, col(Job.id) == chosen.c.job_id)
        .join(Client, col(Client.id) == col(Job.client_id))
        .outerjoin(issued, issued.c.job_id == col(Job.id))
        .order_by(chosen.c.position)
    )
    rows = [
        JobRow(
            job,
            client,
            int(n_samples),
            int(n_open),
            int(n_issued),
            derived_status(job.due_date, n_issued, today),
        )
        for job, client, n_samples, n_open, n_issued in session.execute(stmt).all()
    ]
    return JobListPage(rows=rows, total=total, page=page, pages=pages, per_page=per_page)


def _conditions(wanted: JobFilter, today: date, reported: ColumnElement[bool]) -> list[ColumnElement[bool]]:
    conditions: list[ColumnElement[bool]] = []
    if text := wanted.search:
        pattern = func.lower(literal(like_pattern(text)))
        conditions.append(
            or_(
                *(
                    func.lower(column).like(pattern, escape="\\")
                    for column in (col(Job.code), col(Client.name), col(Job.site), col(Job.title))
                )
            )
        )
    status = wanted.known_status
    if status == "reported":
        conditions.append(reported)
    elif status == "open":
        conditions.append(~reported)
    elif status == "overdue":
        conditions.append(and_(~reported, col(Job.due_date).is_not(None), col(Job.due_date) < today))
    return conditions


# --- the API's list: keyset pages in id order -------------------------------------------------


def changed_job_ids(since: datetime) -> Any:
    """The ids of the jobs with any change at or after ``since`` (a subquery).

    A job's changes are the audit events of the job, its locations, samples, tests and reports:
    every change writes one (DESIGN.md section 4), so the trail is the one place that knows when
    anything of a job last changed, with no timestamp column to keep in step.
    """
    at = col(AuditEvent.at) >= since

    def event_of(entity: str, record_id: Any) -> Any:
        return and_(col(AuditEvent.entity) == entity, col(AuditEvent.entity_id) == record_id, at)

    return union(
        sa_select(col(AuditEvent.entity_id)).where(col(AuditEvent.entity) == "job", at),
        sa_select(col(Location.job_id)).join(AuditEvent, event_of("location", col(Location.id))),
        sa_select(col(Sample.job_id)).join(AuditEvent, event_of("sample", col(Sample.id))),
        sa_select(col(Sample.job_id))
        .join(LabTest, col(LabTest.sample_id) == col(Sample.id))
        .join(AuditEvent, event_of("lab_test", col(LabTest.id))),
        sa_select(col(Report.job_id)).join(AuditEvent, event_of("report", col(Report.id))),
    )


def jobs_after(
    session: Session,
    wanted: JobFilter,
    today: date,
    *,
    after_id: int | None,
    limit: int,
    client_id: int | None = None,
    updated_since: datetime | None = None,
) -> list[JobRow]:
    """Up to ``limit`` jobs matching ``wanted`` (search and status as the list page reads them),
    of one client, changed since a time, with ids above ``after_id``, in id order: a cursor
    walk that never skips or repeats a job while jobs are added meanwhile (one query)."""
    issued = _issued()
    reported = issued.c.n.is_not(None)
    conditions = _conditions(wanted, today, reported)
    if after_id is not None:
        conditions.append(col(Job.id) > after_id)
    if client_id is not None:
        conditions.append(col(Job.client_id) == client_id)
    if updated_since is not None:
        conditions.append(col(Job.id).in_(changed_job_ids(updated_since)))
    samples, to_approve = _row_counts()
    stmt = (
        sa_select(Job, col(Client.name), samples, to_approve, func.coalesce(issued.c.n, 0))
        .select_from(Job)
        .join(Client, col(Client.id) == col(Job.client_id))
        .outerjoin(issued, issued.c.job_id == col(Job.id))
        .where(*conditions)
        .order_by(col(Job.id))
        .limit(max(1, limit))
    )
    return [
        JobRow(
            job,
            client,
            int(n_samples),
            int(n_open),
            int(n_issued),
            derived_status(job.due_date, n_issued, today),
        )
        for job, client, n_samples, n_open, n_issued in session.execute(stmt).all()
    ]


# --- one job's page: its samples a page at a time ----------------------------------------------

SAMPLES_PER_PAGE: Final = 100
# What the job page shows of a test (a list of links), without its readings and results.
_BRIEF_TEST: Final[list[Any]] = [
    LabTest.id,
    LabTest.sample_id,
    LabTest.method,
    LabTest.status,
    LabTest.revision,
]


@dataclass(frozen=True)
class Reportable:
    """A sample the issue form offers: not withdrawn, with an approved current test."""

    sample_id: int
    location: str
    code: str


@dataclass(frozen=True)
class JobSheetPage:
    """The job page's records: the job's sheet with one page of its samples (by location code,
    depth and code) and their current tests, read without readings or results; the number of
    samples of each location; and every sample a report may be issued for."""

    sheet: JobSheet
    sample_counts: dict[int, int]  # by location id, every page
    reportable: list[Reportable]
    total: int  # samples of the job
    page: int  # clamped to 1..pages
    pages: int
    per_page: int

    @property
    def first(self) -> int:
        """The position of the page's first sample in the job (from 1; 0 when there is none)."""
        return (self.page - 1) * self.per_page + 1 if self.total else 0

    @property
    def last(self) -> int:
        return min(self.total, self.page * self.per_page)


def job_sheet_page(
    session: Session, job_id: int, page: int = 1, per_page: int = SAMPLES_PER_PAGE
) -> JobSheetPage | None:
    """The job page's records in a fixed number of queries, whatever the number of samples."""
    job = session.get(Job, job_id)
    if job is None:
        return None
    client = session.get(Client, job.client_id)
    assert client is not None
    locations = list(
        session.exec(select(Location).where(Location.job_id == job_id).order_by(col(Location.code)))
    )
    sample_counts = {
        int(loc): int(n)
        for loc, n in session.execute(
            sa_select(col(Sample.location_id), func.count())
            .where(col(Sample.job_id) == job_id)
            .group_by(col(Sample.location_id))
        )
    }
    total = sum(sample_counts.values())
    per_page = max(1, per_page)
    page, pages = page_of(total, page, per_page)
    samples: dict[int, list[Sample]] = {}
    for sample in session.exec(
        select(Sample)
        .join(Location, col(Location.id) == col(Sample.location_id))
        .where(col(Sample.job_id) == job_id)
        .order_by(col(Location.code), col(Sample.depth_from_m), col(Sample.code))
        .offset((page - 1) * per_page)
        .limit(per_page)
    ):
        samples.setdefault(sample.location_id, []).append(sample)
    ids = [x.id for xs in samples.values() for x in xs]
    tests: dict[int, list[LabTest]] = {}
    if ids:
        for test in session.exec(
            select(LabTest)
            .where(col(LabTest.sample_id).in_(ids), col(LabTest.status) != Status.superseded.value)
            .options(load_only(*_BRIEF_TEST))
            .order_by(col(LabTest.method))
        ):
            tests.setdefault(test.sample_id, []).append(test)
    reportable = [
        Reportable(int(i), loc, code)
        for i, loc, code in session.execute(
            sa_select(col(Sample.id), col(Location.code), col(Sample.code))
            .join(Location, col(Location.id) == col(Sample.location_id))
            .where(
                col(Sample.job_id) == job_id,
                col(Sample.withdrawn_at).is_(None),
                col(Sample.id).in_(
                    sa_select(col(LabTest.sample_id)).where(col(LabTest.status) == Status.approved.value)
                ),
            )
            .order_by(col(Location.code), col(Sample.depth_from_m), col(Sample.code))
        )
    ]
    links = list(
        session.exec(
            select(ShareLink).where(ShareLink.job_id == job_id).order_by(col(ShareLink.created_at).desc())
        )
    )
    reports = job_reports(session, job_id)
    ags4 = frozen_ags4_digests(session, [r.id or 0 for r in reports])
    sheet = JobSheet(job, client, locations, samples, tests, reports, links, ags4)
    return JobSheetPage(sheet, sample_counts, reportable, total, page, pages, per_page)
