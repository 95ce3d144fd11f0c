"""The jobs list at real size: search, status filter, pages, and a fixed number of queries.

Runs on SQLite and PostgreSQL. Jobs are made through the services; the day the list is asked
for is passed in, so "overdue" is checked against a fixed day, not the clock.
"""

from __future__ import annotations

from datetime import date, timedelta
from typing import Any

from sqlmodel import select

from server.db.job_list import JobFilter, JobListPage, job_page, like_pattern
from server.db.session import Database
from server.db.tables import Client, User
from server.services import jobs, reports, samples
from tests.conftest import PASSWORDS, People
from tests.support.statements import statements_sent
from tests.workflow.flows import Lab

TODAY = date(2026, 6, 15)  # a fixed day of the fictional scenario; due dates are set against it


def _client(db: Database, admin: User, name: str) -> int:
    """The client of that name, registered on first use."""
    with db.session() as s:
        found = s.exec(select(Client).where(Client.name == name)).first()
    return (found or jobs.create_client(db, admin, name)).id or 0


def _job(db: Database, admin: User, client: str, code: str, site: str = "", due: date | None = None) -> None:
    jobs.create_job(db, admin, _client(db, admin, client), code, f"Job {code}", site, due)


def _many_jobs(db: Database, admin: User, first: int, last: int, client: str = "Ridgeway Rail plc") -> None:
    """Jobs P-<first>..P-<last> of one client, in one transaction (through the service's ``job_in``)."""
    client_id = _client(db, admin, client)
    with db.transaction() as s:
        for n in range(first, last + 1):
            values = jobs.job_values(jobs.JobForm(client_id, f"P-{n:03d}", site="Embankment km 12"))
            jobs.job_in(s, admin, client_id, values)


def _codes(listing: JobListPage) -> list[str]:
    return [r.job.code for r in listing.rows]


def _find(db: Database, q: str = "", status: str = "", page: int = 1, **kwargs: Any) -> JobListPage:
    with db.session() as s:
        return job_page(s, JobFilter(q=q, status=status, page=page), TODAY, **kwargs)


def _search_scene(db: Database, admin: User) -> None:
    _job(db, admin, "Harbour Works Ltd", "HW-2041", "North Basin Quay")
    _job(db, admin, "Harbour Works Ltd", "HW-2042", "South Mole")
    _job(db, admin, "Millbrook Estates", "MB-0007", "Kiln Lane, Millbrook")
    _job(db, admin, "100% Fill_Co", "FC-0001", "Plot 5_b")


def test_a_search_finds_a_job_by_part_of_its_number_in_any_case(db: Database, people: People) -> None:
    _search_scene(db, people.admin)
    assert _codes(_find(db, q="hw-204")) == ["HW-2041", "HW-2042"]  # computed: both numbers contain it
    assert _codes(_find(db, q="  mb-0007 ")) == ["MB-0007"]  # computed: spaces around are trimmed


def test_a_search_finds_jobs_by_client_name_site_or_title(db: Database, people: People) -> None:
    _search_scene(db, people.admin)
    assert _codes(_find(db, q="HARBOUR")) == ["HW-2041", "HW-2042"]  # computed: client name
    assert _codes(_find(db, q="kiln lane")) == ["MB-0007"]  # computed: site
    assert _codes(_find(db, q="job fc-")) == ["FC-0001"]  # computed: title "Job FC-0001"
    assert _codes(_find(db, q="no such place")) == []  # computed


def test_percent_underscore_and_backslash_in_a_search_are_taken_literally(
    db: Database, people: People
) -> None:
    _search_scene(db, people.admin)
    # computed: only the client "100% Fill_Co" and site "Plot 5_b" hold these characters
    assert _codes(_find(db, q="%")) == ["FC-0001"]
    assert _codes(_find(db, q="_")) == ["FC-0001"]
    assert _codes(_find(db, q="5_b")) == ["FC-0001"]
    assert _codes(_find(db, q="0% f")) == ["FC-0001"]
    assert _codes(_find(db, q="\\")) == []  # computed: no job holds a backslash
    assert like_pattern("5%_\\") == "%5\\%\\_\\\\%"  # computed: each special character escaped


def test_a_nul_character_in_a_search_is_dropped_and_5000_characters_find_nothing(
    db: Database, people: People
) -> None:
    _search_scene(db, people.admin)
    assert _codes(_find(db, q="HW-2041\x00")) == ["HW-2041"]  # computed: the NUL is dropped
    assert _find(db, q="x" * 5000).total == 0  # computed: longer than any searched column


def test_each_status_filter_follows_issued_reports_and_the_due_date(db: Database, people: People) -> None:
    admin = people.admin
    Lab(db, admin, "ST-LATE", due=TODAY - timedelta(days=3))
    Lab(db, admin, "ST-TODAY", due=TODAY)
    Lab(db, admin, "ST-NODATE")
    reported = Lab(db, admin, "ST-DONE", due=TODAY - timedelta(days=10))
    reported.approved(people.tech, people.review)
    reports.issue_report(
        db, people.review, reported.job.id or 0, "http://lab.example", password=PASSWORDS["review"]
    )
    # Open work first, soonest due first, undated after; reported last (server/db/job_list.py).
    listing = _find(db)
    assert [(r.job.code, r.status) for r in listing.rows] == [
        ("ST-LATE", "overdue"),  # computed: no issued report, due 3 days before TODAY
        ("ST-TODAY", "open"),  # computed: due on TODAY itself is not yet overdue
        ("ST-NODATE", "open"),  # computed: no due date is never overdue
        ("ST-DONE", "reported"),  # computed: one issued report, though past its due date
    ]
    assert _codes(_find(db, status="open")) == ["ST-LATE", "ST-TODAY", "ST-NODATE"]  # computed
    assert _codes(_find(db, status="overdue")) == ["ST-LATE"]  # computed
    assert _codes(_find(db, status="reported")) == ["ST-DONE"]  # computed
    assert [r.issued_reports for r in _find(db, status="reported").rows] == [1]  # computed: one report
    assert _find(db, status="bogus").total == 4  # computed: an unknown status filters nothing
    assert _codes(_find(db, q="late", status="overdue")) == ["ST-LATE"]  # computed: both apply
    assert _codes(_find(db, q="late", status="reported")) == []  # computed


def test_counts_leave_out_withdrawn_samples_and_signed_tests(db: Database, people: People) -> None:
    lab = Lab(db, people.admin, "CT-1", due=TODAY + timedelta(days=5))
    lab.approved(people.tech, people.review)  # one sample, its test approved
    lab.submitted(people.tech)  # one sample, its test handed in, not approved
    lab.new_test()  # one sample, its test requested
    withdrawn = samples.add_sample(db, people.admin, lab.location.id or 0, "S9", 9.0, 9.45, "U100")
    jobs.request_tests(db, people.admin, [withdrawn.id or 0], ["atterberg"])
    samples.withdraw_sample(db, people.admin, withdrawn.id or 0, "Bag split in transit")
    (row,) = _find(db).rows
    assert (row.client, row.samples, row.tests_to_approve, row.issued_reports) == (
        "Client of CT-1",  # tests/workflow/flows.py Lab names the client
        3,  # computed: four samples, one withdrawn
        2,  # computed: handed in + requested; approved and the withdrawn sample's test left out
        0,  # computed: nothing issued
    )


def test_120_jobs_make_three_pages_of_50_50_and_20(db: Database, people: People) -> None:
    _many_jobs(db, people.admin, 1, 120)
    first, second, third = (_find(db, page=n) for n in (1, 2, 3))
    assert (first.total, first.pages, first.per_page) == (120, 3, 50)  # computed: ceil(120 / 50) = 3
    assert [len(p.rows) for p in (first, second, third)] == [50, 50, 20]  # computed: 120 = 50 + 50 + 20
    assert _codes(first)[0] == "P-001" and _codes(first)[-1] == "P-050"  # computed: undated, by number
    assert _codes(third)[0] == "P-101" and _codes(third)[-1] == "P-120"  # computed
    assert len(set(_codes(first) + _codes(second) + _codes(third))) == 120  # computed: no overlap
    assert (first.previous_page, first.next_page) == (None, 2)  # computed
    assert (second.previous_page, second.next_page) == (1, 3)  # computed
    assert (third.previous_page, third.next_page) == (2, None)  # computed


def test_a_page_out_of_range_is_clamped_to_the_first_or_last(db: Database, people: People) -> None:
    _many_jobs(db, people.admin, 1, 60)
    for asked, shown in [(0, 1), (-1, 1), (3, 2), (10**30, 2)]:  # computed: 60 jobs are 2 pages of 50
        listing = _find(db, page=asked)
        assert listing.page == shown, asked
        assert _codes(listing)[0] == ("P-001" if shown == 1 else "P-051")  # computed
    empty = _find(db, q="no such job", page=7)
    assert (empty.total, empty.page, empty.pages, empty.rows) == (0, 1, 1, [])  # computed: "page 1 of 1"


def test_the_same_two_queries_serve_a_page_of_5_jobs_or_of_120(db: Database, people: People) -> None:
    _many_jobs(db, people.admin, 1, 5)
    Lab(db, people.admin, "QC-1", due=TODAY - timedelta(days=1)).new_test()  # counts to compute
    wanted = JobFilter(q="p-", status="open", page=1)
    with db.session() as s, statements_sent(db) as small:
        assert job_page(s, wanted, TODAY).total == 5  # computed
    _many_jobs(db, people.admin, 6, 120)
    with db.session() as s, statements_sent(db) as large:
        assert job_page(s, wanted, TODAY).total == 120  # computed
    selects = [q for q in large if q.lstrip().upper().startswith("SELECT")]
    assert len(selects) == 2  # server/db/job_list.py: one count query and one page query
    assert len(small) == len(large)  # issue S6 point 7: a constant number of queries per page
