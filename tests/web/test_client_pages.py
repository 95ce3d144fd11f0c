"""The client's pages through a share link, and the lab's report and link pages, over HTTP.

Clients see issued reports of their link's job only, current revisions first and superseded
ones marked; expired, withdrawn and unknown links get a clear page and no data; the PDF is the
stored one, never rendered again; every use is logged where the laboratory sees it.
"""

from __future__ import annotations

import hashlib
import re
from datetime import timedelta

from fastapi.testclient import TestClient
from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import AuditEvent, Job, LinkAccess, Report, ReportAgs4, ShareLink, utcnow
from server.services import jobs, links, reports, samples
from tests.conftest import PASSWORDS, People
from tests.reports.issued import amend_and_approve, approve, two_approved_samples
from tests.support.http import post_form, sign_in
from tests.support.renders import run_queued

BASE = "http://testserver"
HOSTILE = "<script>alert(1)</script> & <b>bold</b>"


def _share_path(token: str) -> str:
    return f"/share/{token}"


def test_share_page_lists_current_reports_first_and_marks_superseded_ones(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    first = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    amend_and_approve(db, people, two.tests[0])
    second = reports.reissue_report(db, people.review, first.id or 0, BASE, password=PASSWORDS["review"])
    made = links.create_link(db, people.review, two.job_id, 7)
    page = app_client.get(_share_path(made.token))
    assert page.status_code == 200 and page.headers["cache-control"] == "private, no-store"
    rows = re.findall(r'<tr id="report-(\d+)">(.*?)</tr>', page.text, re.S)
    assert [int(i) for i, _ in rows] == [second.id, first.id]  # the current revision first
    assert "✔ current" in rows[0][1] and "⊘ superseded" in rows[1][1]
    assert first.sha256 in rows[1][1] and second.sha256 in rows[0][1]


def test_share_link_downloads_the_stored_pdf_even_after_the_lab_details_change(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    report = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    jobs.set_laboratory(db, people.admin, "Renamed Laboratory", "Elsewhere", "")  # a re-render would differ
    made = links.create_link(db, people.review, two.job_id, 7)
    pdf = app_client.get(f"{_share_path(made.token)}/reports/{report.id}.pdf")
    assert pdf.status_code == 200 and pdf.headers["content-type"] == "application/pdf"
    assert hashlib.sha256(pdf.content).hexdigest() == report.sha256 == pdf.headers["x-content-sha256"]


def test_the_link_and_the_job_page_serve_the_reports_frozen_ags4_file_byte_for_byte(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    report = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    with db.session() as s:
        frozen = s.get(ReportAgs4, report.id)
    assert frozen is not None
    # a file made now would differ
    jobs.set_laboratory(db, people.admin, "Renamed Laboratory", "Elsewhere", "")
    made = links.create_link(db, people.review, two.job_id, 7)
    page = app_client.get(_share_path(made.token))
    assert f'href="/share/{made.token}/reports/{report.id}.ags"' in page.text
    shared = app_client.get(f"{_share_path(made.token)}/reports/{report.id}.ags")
    assert shared.status_code == 200 and shared.headers["content-type"] == "text/plain; charset=us-ascii"
    assert shared.content == frozen.data and shared.headers["x-content-sha256"] == frozen.sha256
    assert hashlib.sha256(shared.content).hexdigest() == frozen.sha256
    assert f"{report.number}-rev1.ags" in shared.headers["content-disposition"]
    with db.session() as s:
        logged = s.exec(select(LinkAccess.path).order_by(col(LinkAccess.id).desc())).first()
    assert logged == f"/share/…/reports/{report.id}.ags"  # every access logged, the token left out
    sign_in(app_client, "tech", PASSWORDS["tech"])
    assert f'href="/reports/{report.id}.ags"' in app_client.get(f"/jobs/{two.job_id}").text
    staff = app_client.get(f"/reports/{report.id}.ags")
    assert staff.status_code == 200 and staff.content == frozen.data
    assert app_client.get("/reports/999999.ags").status_code == 404


def test_a_link_serves_no_ags4_file_of_another_jobs_report(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    report = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    client = jobs.create_client(db, people.admin, "Other Client")
    other = jobs.create_job(db, people.admin, client.id or 0, "T-200", "Other job", "Elsewhere")
    made = links.create_link(db, people.review, other.id or 0, 7)
    assert app_client.get(f"{_share_path(made.token)}/reports/{report.id}.ags").status_code == 404
    assert app_client.get(f"/reports/{report.id}.ags", follow_redirects=False).status_code == 303  # sign in


def test_expired_withdrawn_and_unknown_links_get_a_clear_page_and_no_data(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    report = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    expired = links.create_link(db, people.review, two.job_id, 7)
    with db.transaction() as s:
        link = s.get(ShareLink, expired.link.id)
        assert link is not None
        link.expires_at = utcnow() - timedelta(minutes=1)
        s.add(link)
    withdrawn = links.create_link(db, people.review, two.job_id, 7)
    links.revoke_link(db, people.review, withdrawn.link.id or 0, "Engagement ended by the client")
    for token, status, headline in (
        (expired.token, 410, "This link has expired"),
        (withdrawn.token, 410, "This link has been withdrawn"),
        ("x" * 43, 404, "This link is not recognised"),
    ):
        for path in (_share_path(token), f"{_share_path(token)}/reports/{report.id}.pdf"):
            page = app_client.get(path)
            assert (page.status_code, page.headers["content-type"].split(";")[0]) == (status, "text/html")
            assert headline in page.text and report.number not in page.text and "%PDF" not in page.text


def test_a_link_limited_to_one_job_cannot_download_another_jobs_report(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    mine = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    with db.session() as s:
        client_id = s.get(Job, two.job_id).client_id  # type: ignore[union-attr]
    other = jobs.create_job(db, people.admin, client_id, "T-200", "Other job", "Other site")
    location = samples.add_location(db, people.admin, other.id or 0, "BH9")
    sample = samples.add_sample(db, people.admin, location.id or 0, "BH9-S1", 1.0, 1.45, "U100", "Soft CLAY")
    (test,) = jobs.request_tests(db, people.admin, [sample.id or 0], ["atterberg"])
    approve(db, people, test.id or 0)
    theirs = reports.issue_report(db, people.review, other.id or 0, BASE, password=PASSWORDS["review"])
    made = links.create_link(db, people.review, two.job_id, 7)
    page = app_client.get(_share_path(made.token))
    assert mine.number in page.text and theirs.number not in page.text and "T-200" not in page.text
    assert app_client.get(f"{_share_path(made.token)}/reports/{theirs.id}.pdf").status_code == 404
    assert app_client.get(f"{_share_path(made.token)}/reports/{mine.id}.pdf").status_code == 200


def test_every_use_is_logged_for_the_lab_and_the_token_is_never_stored(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    report = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    made = links.create_link(db, people.review, two.job_id, 7, "design office")
    app_client.get(_share_path(made.token), headers={"user-agent": "client-browser/1.0"})
    app_client.get(f"{_share_path(made.token)}/reports/{report.id}.pdf")
    with db.session() as s:
        log = s.exec(select(LinkAccess).order_by(col(LinkAccess.id))).all()
    pdf_path = f"/share/…/reports/{report.id}.pdf"
    assert [(a.path, a.outcome) for a in log] == [("/share/…", "ok"), (pdf_path, "ok")]
    assert all(made.token not in a.path for a in log)
    sign_in(app_client, "review", PASSWORDS["review"])
    page = app_client.get(f"/jobs/{two.job_id}/links")
    assert page.status_code == 200
    table = page.text[page.text.index('id="access-log"') :]
    assert table.count("design office") == 2 and "client-browser/1.0" in table
    assert made.token not in page.text


def test_reviewer_issues_a_report_of_ticked_samples_and_reissues_it_after_an_amendment(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    job_path = f"/jobs/{two.job_id}"
    issued = post_form(
        app_client,
        job_path,
        f"{job_path}/reports",
        [("choice", "chosen"), ("sample", str(two.samples[1])), ("password", PASSWORDS["review"])],
        follow_redirects=False,
    )
    assert issued.status_code == 303, issued.text
    (report,) = run_queued(db)
    signed = {"password": PASSWORDS["review"]}  # a re-issue is signed (S7 point 4)
    unsigned = post_form(app_client, job_path, f"/reports/{report.id}/reissue", {})
    assert unsigned.status_code == 422 and "password does not match" in unsigned.text
    nothing = post_form(app_client, job_path, f"/reports/{report.id}/reissue", signed)
    assert "nothing in revision 1 was amended" in nothing.text
    amend_and_approve(db, people, two.tests[1])
    again = post_form(app_client, job_path, f"/reports/{report.id}/reissue", signed, follow_redirects=False)
    assert again.status_code == 303, again.text
    assert [r.revision for r in run_queued(db)] == [2]
    page = app_client.get(job_path)
    rows = re.findall(r'<tr id="report-(\d+)">(.*?)</tr>', page.text, re.S)
    assert len(rows) == 2 and "⊘ superseded" in rows[1][1] and "✔ current" in rows[0][1]


def test_a_link_for_every_job_of_the_client_is_made_from_the_job_page(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    job_path = f"/jobs/{two.job_id}"
    made = post_form(
        app_client,
        job_path,
        f"{job_path}/links",
        {"days_valid": "14", "label": "client office", "scope": "client"},
    )
    assert re.search(r"http://testserver/share/[\w-]{43}", made.text)
    with db.session() as s:
        link = s.exec(select(ShareLink)).one()
    assert (link.job_id, link.label) == (None, "client office")
    listed = app_client.get(f"{job_path}/links")
    assert "all jobs of Test Client Ltd" in listed.text


def test_a_wrong_validity_is_refused_at_the_field_and_stores_nothing(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    job_path = f"/jobs/{two.job_id}"
    for days in ("ten", "0"):
        page = post_form(app_client, job_path, f"{job_path}/links", {"days_valid": days})
        assert 'role="alert"' in page.text
    with db.session() as s:
        assert s.exec(select(ShareLink)).all() == []


def test_preview_shows_the_report_marked_not_issued_with_untrusted_text_escaped(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people, description=HOSTILE)
    sign_in(app_client, "review", PASSWORDS["review"])
    page = app_client.get(f"/jobs/{two.job_id}/reports/preview")
    assert page.status_code == 200
    assert "PREVIEW — NOT ISSUED" in page.text and "<svg" in page.text
    assert "<script>alert(1)</script>" not in page.text
    assert "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &lt;b&gt;bold&lt;/b&gt;" in page.text
    with db.session() as s:
        assert s.exec(select(Report)).all() == []  # a preview stores nothing


def test_a_technician_may_not_issue_preview_or_make_links(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    job_path = f"/jobs/{two.job_id}"
    assert post_form(app_client, job_path, f"{job_path}/reports", {}).status_code == 403
    assert app_client.get(f"{job_path}/reports/preview").status_code == 403
    assert post_form(app_client, job_path, f"{job_path}/links", {"days_valid": "7"}).status_code == 403
    with db.session() as s:
        assert s.exec(select(Report)).all() == [] and s.exec(select(ShareLink)).all() == []


def test_withdrawing_a_link_needs_a_reason_of_real_words_which_the_audit_keeps(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    made = links.create_link(db, people.review, two.job_id, 7)
    sign_in(app_client, "review", PASSWORDS["review"])
    path = f"/jobs/{two.job_id}/links"
    action = f"/links/{made.link.id}/revoke"
    refused = post_form(app_client, path, action, {"job_id": str(two.job_id), "reason": "x"})
    assert refused.status_code == 422 and f'id="err-reason-{made.link.id}"' in refused.text  # S7 point 3
    with db.session() as s:
        assert (s.get(ShareLink, made.link.id) or made.link).revoked_at is None
    reason = "The client's engineer left the project"
    done = post_form(app_client, path, action, {"job_id": str(two.job_id), "reason": reason})
    assert done.status_code == 200
    with db.session() as s:
        event = s.exec(select(AuditEvent).where(AuditEvent.entity == "share_link")).all()[-1]
    assert (event.action, event.reason) == ("revoke", reason)


def test_who_used_a_link_and_from_where_is_shown_to_reviewers_never_to_technicians(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    made = links.create_link(db, people.review, two.job_id, 7, "design office")
    app_client.get(_share_path(made.token))  # TestClient's address: "testclient"
    sign_in(app_client, "tech", PASSWORDS["tech"])
    job_page = app_client.get(f"/jobs/{two.job_id}")
    assert job_page.status_code == 200 and "Recent link use" not in job_page.text
    assert "testclient" not in job_page.text
    assert app_client.get(f"/jobs/{two.job_id}/links").status_code == 403
    with db.session() as s:
        job = s.get(Job, two.job_id)
    assert job is not None
    assert app_client.get(f"/clients/{job.client_id}").status_code == 403  # contact details
    assert app_client.get("/clients").status_code == 403
    sign_in(app_client, "review", PASSWORDS["review"])
    job_page = app_client.get(f"/jobs/{two.job_id}")
    assert "Recent link use" in job_page.text and "testclient" in job_page.text
