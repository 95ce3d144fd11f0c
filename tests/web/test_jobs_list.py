"""The jobs page over HTTP: the search form, the status filter, the pager, and no error page
for any address a person can type."""

from __future__ import annotations

from datetime import timedelta
from typing import Any

from fastapi.testclient import TestClient
from httpx import Response  # the TestClient answers with httpx responses

from server.db.session import Database
from server.db.tables import User, utcnow
from server.services import jobs, samples
from tests.conftest import PASSWORDS, People
from tests.support.http import sign_in
from tests.support.statements import statements_sent


def _jobs(db: Database, admin: User, count: int, client: str = "Ridgeway Rail plc", first: int = 1) -> None:
    """Jobs R-<first>.. of one client, undated, in one transaction (the service's ``job_in``)."""
    client_id = jobs.create_client(db, admin, client).id or 0
    with db.transaction() as s:
        for n in range(first, first + count):
            values = jobs.job_values(jobs.JobForm(client_id, f"R-{n:03d}", site="Embankment km 12"))
            jobs.job_in(s, admin, client_id, values)


def _ctx(reply: Response) -> dict[str, Any]:
    """What the page was rendered with (the TestClient keeps the template context)."""
    context: dict[str, Any] = reply.context  # type: ignore[attr-defined]
    return context


def test_the_jobs_page_offers_search_status_and_the_register_links_to_reviewers(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.get("/jobs")
    assert reply.status_code == 200 and reply.template.name == "pages/jobs.html"  # type: ignore[attr-defined]
    page = reply.text
    assert '<form method="get" action="/jobs"' in page and 'name="q"' in page  # the brief: a GET form
    assert "Search number, client or site" in page  # the brief: the search field's label
    for value, label in [("", "All"), ("open", "Open"), ("overdue", "Overdue"), ("reported", "Reported")]:
        assert f'<option value="{value}"' in page and f">{label}</option>" in page  # the brief
    assert 'href="/jobs/new"' in page and "+ New job" in page and 'href="/clients"' in page  # the brief
    assert "0 jobs" in page and "No jobs yet." in page and "Page 1 of 1" in page  # computed: empty
    sign_in(app_client, "tech", PASSWORDS["tech"])
    assert 'href="/jobs/new"' not in app_client.get("/jobs").text  # the brief: reviewers and admins only


def test_a_search_and_the_overdue_filter_show_the_late_job_marked_in_words(
    app_client: TestClient, db: Database, people: People
) -> None:
    admin, today = people.admin, utcnow().date()
    client = jobs.create_client(db, admin, "Harbour Works Ltd").id or 0
    late = jobs.create_job(
        db, admin, client, "HW-2041", "Quay wall", "North Basin Quay", today - timedelta(days=2)
    )
    jobs.create_job(db, admin, client, "HW-2042", "Slipway", "South Mole", today + timedelta(days=9))
    other = jobs.create_client(db, admin, "Millbrook Estates").id or 0
    jobs.create_job(db, admin, other, "MB-0007", "Houses", "Kiln Lane", today - timedelta(days=5))
    location = samples.add_location(db, admin, late.id or 0, "BH1")
    samples.add_sample(db, admin, location.id or 0, "BH1-S1", 1.0, 1.45, "U100", methods=["atterberg"])

    sign_in(app_client, "admin", PASSWORDS["admin"])
    reply = app_client.get("/jobs", params={"q": "harbour", "status": "overdue"})
    listing = _ctx(reply)["listing"]
    assert [(r.job.code, r.samples, r.tests_to_approve, r.status) for r in listing.rows] == [
        ("HW-2041", 1, 1, "overdue")  # computed: Harbour's job due 2 days ago; MB-0007 is another client
    ]
    page = reply.text
    assert '<tr class="overdue">' in page and "⚑ Overdue" in page  # the brief: marked in words, not colour
    assert 'value="harbour"' in page and '<option value="overdue" selected>' in page  # the choice is kept
    assert "1 job found" in page  # computed
    everything = _ctx(app_client.get("/jobs"))["listing"]
    assert [r.job.code for r in everything.rows] == ["MB-0007", "HW-2041", "HW-2042"]  # computed: by due date


def test_the_pager_keeps_the_search_and_the_status_on_previous_and_next(
    app_client: TestClient, db: Database, people: People
) -> None:
    _jobs(db, people.admin, 120)
    sign_in(app_client, "review", PASSWORDS["review"])
    first = app_client.get("/jobs", params={"q": "embankment", "status": "open"})
    assert _ctx(first)["listing"].total == 120 and "120 jobs found" in first.text  # computed
    assert "Page 1 of 3" in first.text  # computed: ceil(120 / 50) = 3
    assert _ctx(first)["previous_url"] is None  # computed: the first page
    assert _ctx(first)["next_url"] == "/jobs?q=embankment&status=open&page=2"  # computed: both kept
    middle = app_client.get(_ctx(first)["next_url"])
    assert "Page 2 of 3" in middle.text and 'rel="prev"' in middle.text and 'rel="next"' in middle.text
    assert 'href="/jobs?q=embankment&amp;status=open&amp;page=1"' in middle.text  # computed: HTML-escaped &
    last = app_client.get("/jobs", params={"q": "embankment", "status": "open", "page": "3"})
    assert len(_ctx(last)["listing"].rows) == 20 and _ctx(last)["next_url"] is None  # computed: 120 - 100


def test_no_address_a_person_can_type_gives_an_error_page(
    app_client: TestClient, db: Database, people: People
) -> None:
    _jobs(db, people.admin, 60)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    # computed: 60 jobs are 2 pages; a bad page is the first, one past the end is the last
    for page, shown in [("0", 1), ("-1", 1), ("99999999999999999999", 2), ("abc", 1), ("", 1), ("2.5", 1)]:
        reply = app_client.get("/jobs", params={"page": page})
        assert reply.status_code == 200, page
        assert _ctx(reply)["listing"].page == shown, page
    assert _ctx(app_client.get("/jobs", params={"page": "9" * 5000}))["listing"].page == 2  # computed
    bogus = app_client.get("/jobs", params={"status": "bogus"})
    assert bogus.status_code == 200 and _ctx(bogus)["listing"].total == 60  # computed: no filter
    assert "Not a status this list knows" in bogus.text and 'id="err-status"' in bogus.text  # field message
    for q in ["x" * 5000, "%_\\", "R-001\x00", "<script>"]:
        reply = app_client.get("/jobs", params={"q": q})
        assert reply.status_code == 200, q[:20]
    assert "&lt;script&gt;" in app_client.get("/jobs", params={"q": "<script>"}).text  # autoescaped


def test_a_page_of_the_list_costs_the_same_queries_for_5_jobs_as_for_120(
    app_client: TestClient, db: Database, people: People
) -> None:
    _jobs(db, people.admin, 5)
    sign_in(app_client, "review", PASSWORDS["review"])
    with statements_sent(db) as small:
        assert _ctx(app_client.get("/jobs"))["listing"].total == 5  # computed
    _jobs(db, people.admin, 115, client="Millbrook Estates", first=6)
    with statements_sent(db) as large:
        assert _ctx(app_client.get("/jobs"))["listing"].total == 120  # computed
    assert len(small) == len(large)  # issue S6 point 7: a constant number of queries per page
