"""My bench in a real browser, on a tablet held upright and turned sideways."""

from __future__ import annotations

from playwright.sync_api import Page, expect

from server.db.session import Database
from server.services import jobs
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import describe, horizontal_overflow, serious_violations, sign_in, turn_landscape
from tests.support.scenario import small_job


def test_a_technician_lands_on_their_bench_which_fits_the_tablet_and_passes_axe(
    page: Page, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)  # db: the live server's database (tests/e2e/conftest.py)
    jobs.request_tests(db, people.admin, [job.sample_id], ["plastic-limit"], people.tech.id)
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto("/")
    expect(page).to_have_url(f"{page.url.split('/bench')[0]}/bench")
    expect(page.get_by_role("heading", name="My bench", level=1)).to_be_visible()
    expect(page.get_by_role("link", name="Open Plastic limit on BH1-S1")).to_be_visible()
    assert horizontal_overflow(page) == 0  # no sideways scrolling at 768 px (common practice for tablets)
    found = serious_violations(page)
    assert not found, describe(found)
    turn_landscape(page)
    assert horizontal_overflow(page) == 0
