"""Turnaround: received, handed in, approved and issued times per test and job, and the jobs
late against their due date (a job is done when every current test is on an issued report)."""

from __future__ import annotations

from datetime import timedelta

from fastapi.testclient import TestClient

from server.db.session import Database
from server.db.tables import utcnow
from server.services import reports
from tests.conftest import PASSWORDS, People
from tests.support.http import sign_in
from tests.workflow.flows import Lab, load


def test_late_open_and_done_jobs_are_told_apart_by_due_date_and_issued_reports(
    app_client: TestClient, db: Database, people: People
) -> None:
    today = utcnow().date()
    late = Lab(db, people.admin, "TA-LATE", due=today - timedelta(days=3))
    late.approved(people.tech, people.review)  # approved, but on no issued report yet
    late.new_test()
    soon = Lab(db, people.admin, "TA-SOON", due=today + timedelta(days=1))
    soon.new_test()
    done = Lab(db, people.admin, "TA-DONE", due=today - timedelta(days=1))
    done.approved(people.tech, people.review)
    reports.issue_report(
        db, people.review, done.job.id or 0, "http://testserver", password=PASSWORDS["review"]
    )
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.get("/turnaround")
    assert reply.status_code == 200 and reply.template.name == "pages/turnaround.html"  # type: ignore[attr-defined]
    ctx = reply.context  # type: ignore[attr-defined]
    assert [(j.job.code, j.days_late, j.open_tests) for j in ctx["late"]] == [("TA-LATE", 3, 2)]
    assert [j.job.code for j in ctx["open_jobs"]] == ["TA-SOON"]
    assert [j.job.code for j in ctx["done"]] == ["TA-DONE"]
    assert "⚑ 3" in reply.text


def test_a_jobs_page_gives_each_tests_received_submitted_approved_and_issued_times(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "TA-1", due=utcnow().date() - timedelta(days=1))
    issued_test = lab.approved(people.tech, people.review)
    report = reports.issue_report(
        db, people.review, lab.job.id or 0, "http://testserver", password=PASSWORDS["review"]
    )
    waiting = lab.submitted(people.tech)
    sign_in(app_client, "admin", PASSWORDS["admin"])
    reply = app_client.get(f"/jobs/{lab.job.id}/turnaround")
    times = {t.row.test.id: t for t in reply.context["times"].tests}  # type: ignore[attr-defined]
    first, second = times[issued_test], times[waiting]
    stored = load(db, issued_test)
    assert (first.submitted, first.approved, first.issued) == (
        stored.submitted_at,
        stored.approved_at,
        report.issued_at,
    )
    assert first.received <= first.submitted <= first.approved  # type: ignore[operator]  # (issue time is to the second)
    assert not first.overdue
    assert (second.approved, second.issued, second.overdue) == (None, None, True)
    job = reply.context["times"]  # type: ignore[attr-defined]
    assert (job.open_tests, job.overdue, job.last_issued) == (1, True, report.issued_at)
    assert "⚑ late" in reply.text


def test_a_technician_may_not_open_turnaround(app_client: TestClient, db: Database, people: People) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    assert app_client.get("/turnaround").status_code == 403
