"""Under the real Content-Security-Policy, Chromium refuses nothing the app itself serves.

A page that needed an inline script or style would still load, minus that part, so the test
listens for the browser's own ``securitypolicyviolation`` events (W3C CSP Level 3, section
5.3) and console reports on every page a technician and a reviewer walk through, including a
bench save through htmx and the report preview with its nonce'd style element, and loads a
framed copy of the approval form to show that the browser will not frame it.
"""

from __future__ import annotations

from typing import Any

from playwright.sync_api import ConsoleMessage, Page

from server.db.session import Database
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import LiveServer, sign_in
from tests.e2e.test_bench_entry import type_in, wait_until_saved
from tests.e2e.test_bench_nothing_lost import TYPED
from tests.reports.issued import two_approved_samples
from tests.support.scenario import small_job

# Runs in every document before its own scripts (injected by the browser's DevTools protocol,
# which the page's policy does not govern); collects what the policy refused.
LISTEN = """
window.__refused = [];
document.addEventListener("securitypolicyviolation", (e) => {
  window.__refused.push(e.violatedDirective + " " + (e.blockedURI || "inline") + " " + e.sourceFile);
});
"""


def _watch(page: Page) -> list[str]:
    """Console reports of the policy, from every page the tab opens."""
    page.add_init_script(LISTEN)
    said: list[str] = []

    def note(message: ConsoleMessage) -> None:
        if "Content Security Policy" in message.text or "Permissions-Policy" in message.text:
            said.append(message.text)

    page.on("console", note)
    return said


def _refused(page: Page) -> list[Any]:
    return list(page.evaluate("window.__refused || []"))


def test_a_technician_saves_at_the_bench_with_nothing_refused(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    said = _watch(page)
    sign_in(page, "tech", PASSWORDS["tech"])
    refused: list[Any] = []
    for path in ("/", "/bench", "/jobs", f"/jobs/{job.job_id}", "/account/sessions", "/account/tokens"):
        page.goto(path)
        refused += _refused(page)
    page.goto(f"/tests/{job.test_id}")
    type_in(page, TYPED)
    wait_until_saved(page)  # htmx's live preview and the autosave ran under the policy
    refused += _refused(page)
    assert refused == [] and said == []


def test_a_reviewers_pages_and_the_report_preview_have_nothing_refused(
    page: Page, live_db: Database, live_people: People
) -> None:
    two = two_approved_samples(live_db, live_people)
    said = _watch(page)
    sign_in(page, "review", PASSWORDS["review"])
    refused: list[Any] = []
    for path in (
        "/review",
        "/requests",
        "/clients",
        "/turnaround",
        "/audit",
        f"/jobs/{two.job_id}",
        f"/jobs/{two.job_id}/reports/preview",
    ):
        answer = page.goto(path)
        assert answer is not None and answer.status == 200, path
        refused += _refused(page)
    preview_font = page.evaluate("getComputedStyle(document.documentElement).fontFamily")
    assert "DejaVu" in preview_font  # report.css applied: the nonce let its style element in
    assert refused == [] and said == []


def test_no_page_of_the_app_can_be_framed(
    page: Page, live_server: LiveServer, live_db: Database, live_people: People
) -> None:
    two = two_approved_samples(live_db, live_people)
    sign_in(page, "review", PASSWORDS["review"])
    page.goto("about:blank")  # another site's page, which would lay the approval form under its own
    page.set_content(
        f'<iframe id="f" src="{live_server.url}/review/{two.tests[0]}"></iframe>'
        '<iframe id="control" srcdoc="<form><input></form>"></iframe>'
    )
    page.wait_for_timeout(1000)
    assert page.frame_locator("#control").locator("form").count() == 1  # a frame's form is seen ...
    assert page.frame_locator("#f").locator("form").count() == 0  # ... the approval form did not load
    urls = sorted(f.url for f in page.frames)
    assert urls == ["about:blank", "about:srcdoc", "chrome-error://chromewebdata/"]  # refused by the browser
