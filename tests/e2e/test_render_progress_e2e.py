"""In Chromium: a reviewer issues a report, the job page says it waits for the render worker and,
without a reload by the reviewer, shows the issued report once the worker's task code has
rendered it (htmx polls the render's state; the server asks for a refresh when it is done)."""

from __future__ import annotations

import re

from playwright.sync_api import Page, expect

from server.db.session import Database
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import sign_in
from tests.reports.issued import two_approved_samples
from tests.support.renders import run_queued


def test_the_job_page_follows_the_render_to_the_issued_report(
    page: Page, live_db: Database, live_people: People
) -> None:
    two = two_approved_samples(live_db, live_people)
    sign_in(page, "review", PASSWORDS["review"])
    page.goto(f"/jobs/{two.job_id}")
    page.fill("#f-issue-password", PASSWORDS["review"])
    page.get_by_role("button", name="Sign and issue the report").click()
    expect(page.locator("#renders")).to_contain_text("is signed and waiting for the render worker")
    expect(page.locator("#renders")).to_contain_text("No render worker is running")
    assert page.locator("tr[id^='report-']").count() == 0
    url_before = page.url

    (report,) = run_queued(live_db)  # the worker's task code, as `claybench worker` runs it

    row = page.locator(f"#report-{report.id}")
    expect(row).to_contain_text("✔ current", timeout=15_000)  # polled, then refreshed: no click
    expect(page.locator("#renders")).to_contain_text(
        re.compile(rf"Report {report.number} revision 1 was issued")
    )
    assert page.url == url_before
