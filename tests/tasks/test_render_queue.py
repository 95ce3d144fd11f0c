"""Reports rendered off the request path: issuing returns at once with the render queued, the
worker's task code renders it, the job page follows it, a failed or killed render is shown and
can be retried, and nothing of a report is stored until its render is done. On SQLite and
PostgreSQL, through the real app and the real render code (a child process with limits)."""

from __future__ import annotations

import re
from datetime import timedelta

import pytest
from fastapi.testclient import TestClient
from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import AuditEvent, Report, ReportRender, WorkerHeartbeat, utcnow
from server.services import renders, workers
from server.services.errors import Conflict
from server.tasks.limits import RenderLimits
from tests.conftest import PASSWORDS, People
from tests.reports.issued import amend_and_approve, two_approved_samples
from tests.support.http import post_form, sign_in
from tests.support.renders import run_queued

SIGNED = {"password": PASSWORDS["review"]}
BASE = "http://testserver"


def _issue(client: TestClient, job_id: int) -> str:
    job_path = f"/jobs/{job_id}"
    issued = post_form(client, job_path, f"{job_path}/reports", SIGNED, follow_redirects=False)
    assert issued.status_code == 303, issued.text
    return str(issued.headers["location"])


def _renders(db: Database) -> list[ReportRender]:
    with db.session() as s:
        return list(s.exec(select(ReportRender).order_by(col(ReportRender.id))))


def _reports(db: Database) -> list[Report]:
    with db.session() as s:
        return list(s.exec(select(Report)))


def test_issuing_returns_at_once_and_the_page_follows_the_render_to_the_report(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    location = _issue(app_client, two.job_id)
    assert location == f"/jobs/{two.job_id}?done=rendering#renders"
    assert _reports(db) == []  # signed and queued: nothing issued before the render is done
    (queued,) = _renders(db)
    assert (queued.status, queued.kind, queued.revision, queued.attempts) == ("queued", "issue", 1, 0)

    page = app_client.get(location)
    assert "Report signed. It is being rendered" in page.text
    assert f"Report {queued.number} revision 1 is signed and waiting for the render worker" in page.text
    assert "No render worker is running" in page.text  # no heartbeat yet: the page says so
    fragment = app_client.get(f"/jobs/{two.job_id}/renders", headers={"HX-Request": "true"})
    assert 'hx-trigger="every 2s"' in fragment.text and "HX-Refresh" not in fragment.headers

    workers.beat(db, "test worker", "sqlite", utcnow())
    fragment = app_client.get(f"/jobs/{two.job_id}/renders", headers={"HX-Request": "true"})
    assert "No render worker is running" not in fragment.text and "You may leave this page" in fragment.text

    (report,) = run_queued(db)
    fragment = app_client.get(f"/jobs/{two.job_id}/renders", headers={"HX-Request": "true"})
    assert fragment.headers["HX-Refresh"] == "true" and "every 2s" not in fragment.text
    assert f"Report {report.number} revision 1 was issued" in fragment.text
    page = app_client.get(f"/jobs/{two.job_id}")
    assert re.search(rf'<tr id="report-{report.id}">.*?✔ current', page.text, re.S)
    pdf = app_client.get(f"/reports/{report.id}.pdf")
    assert pdf.status_code == 200 and pdf.content.startswith(b"%PDF") and pdf.content == report.pdf
    (done,) = _renders(db)
    assert (done.status, done.report_id, done.attempts) == ("done", report.id, 1)
    with db.session() as s:
        trail = s.exec(
            select(AuditEvent.entity, AuditEvent.action, AuditEvent.actor)
            .where(col(AuditEvent.entity).in_(["report", "report-render"]))
            .order_by(col(AuditEvent.id))
        ).all()
    # The queue and the issue are the reviewer's signature; the worker only carries it out.
    assert [tuple(t) for t in trail] == [("report-render", "queue", "review"), ("report", "issue", "review")]


def test_a_render_over_its_time_limit_fails_visibly_stores_nothing_and_can_be_retried(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    _issue(app_client, two.job_id)
    assert run_queued(db, RenderLimits(time_s=0.01)) == []  # the child is killed at the limit
    (failed,) = _renders(db)
    assert failed.status == "failed" and "longer than its time limit of 0.01 s" in failed.error
    assert _reports(db) == []
    page = app_client.get(f"/jobs/{two.job_id}")
    assert f"The render of report {failed.number} revision 1 failed" in page.text
    assert f'action="/renders/{failed.id}/retry"' in page.text
    fragment = app_client.get(f"/jobs/{two.job_id}/renders", headers={"HX-Request": "true"})
    assert fragment.headers["HX-Refresh"] == "true"  # nothing waits: no polling

    again = post_form(
        app_client, f"/jobs/{two.job_id}", f"/renders/{failed.id}/retry", {}, follow_redirects=False
    )
    assert again.status_code == 303
    (report,) = run_queued(db)
    (done,) = _renders(db)
    assert (done.status, done.attempts, done.report_id, done.error) == ("done", 2, report.id, "")
    refused = post_form(app_client, f"/jobs/{two.job_id}", f"/renders/{failed.id}/retry", {})
    assert refused.status_code == 409 and "only a failed render is retried" in refused.text


def test_a_render_whose_worker_was_killed_is_given_up_shown_and_retried(db: Database, people: People) -> None:
    two = two_approved_samples(db, people)
    queued = renders.request_issue(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    old = utcnow() - timedelta(seconds=workers.ALIVE_S + 5)
    workers.beat(db, "gone worker", "sqlite", old)
    attempt = renders.claim(db, queued.id or 0, "gone worker")
    assert attempt == 1
    # The worker beat once, long ago, then stopped (killed) with the render in hand.
    with db.transaction() as s:
        row = s.get(ReportRender, queued.id)
        assert row is not None
        row.started_at = old
        s.add(row)
    with db.transaction() as s:
        beat = s.get(WorkerHeartbeat, "gone worker")
        assert beat is not None
        beat.seen_at = old
        s.add(beat)
    assert renders.reap_stale(db) == [queued.id]
    (failed,) = _renders(db)
    assert failed.status == "failed" and "the worker stopped during the render" in failed.error
    renders.retry(db, people.review, failed.id or 0)
    (report,) = run_queued(db)
    assert report.number == failed.number and _renders(db)[0].status == "done"


def test_a_test_changed_after_signing_is_not_rendered(db: Database, people: People) -> None:
    two = two_approved_samples(db, people)
    renders.request_issue(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    amend_and_approve(db, people, two.tests[1])  # a new approved revision after the signature
    assert run_queued(db) == []
    (failed,) = _renders(db)
    assert failed.status == "failed" and "changed after the report was signed" in failed.error
    assert _reports(db) == []


def test_one_render_at_a_time_per_job(db: Database, people: People) -> None:
    two = two_approved_samples(db, people)
    first = renders.request_issue(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    with pytest.raises(Conflict, match=f"report {first.number} of this job is being rendered"):
        renders.request_issue(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    assert len(_renders(db)) == 1


def test_a_render_over_its_memory_limit_fails_and_stores_nothing(db: Database, people: People) -> None:
    two = two_approved_samples(db, people)
    renders.request_issue(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    # 64 MiB of address space is far below what a Python process with WeasyPrint maps (common
    # practice: several hundred MiB), so the child cannot render at all.
    assert run_queued(db, RenderLimits(memory_mb=64)) == []
    (failed,) = _renders(db)
    assert failed.status == "failed" and failed.error
    assert _reports(db) == []
