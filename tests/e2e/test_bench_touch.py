"""Every bench page on a tablet: no sideways scrolling upright or sideways, touch-sized targets,
a numeric keypad for numbers, and no serious or critical accessibility violation (axe-core)."""

from __future__ import annotations

from playwright.sync_api import Page, expect

from server.db.session import Database
from server.engine import METHODS
from server.services import jobs
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import (
    TABLET_PORTRAIT,
    describe,
    horizontal_overflow,
    serious_violations,
    sign_in,
    turn_landscape,
)
from tests.e2e.test_bench_entry import type_in
from tests.support.scenario import small_job

MIN_TARGET_PX = 44  # WCAG 2.2 SC 2.5.5 (target size, enhanced): 44 by 44 CSS pixels

# Every visible control the technician touches, with its size.
TARGETS = """() => [...document.querySelectorAll(
    '#sheet input:not([type=hidden]):not([type=radio]):not([type=checkbox]), #sheet button,'
    + ' #sheet .choice-option, #sheet .flag-option')]
  .map(el => [el.name || el.textContent.trim(), el.getBoundingClientRect()])
  .filter(([, r]) => r.width > 0 && r.height > 0)
  .map(([name, r]) => [name, r.width, r.height])"""


def test_every_bench_page_fits_a_tablet_both_ways_and_passes_axe(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    tests = jobs.request_tests(live_db, live_people.admin, [job.sample_id], sorted(METHODS))
    sign_in(page, "tech", PASSWORDS["tech"])
    for test in tests:
        page.set_viewport_size(TABLET_PORTRAIT)
        page.goto(f"/tests/{test.id}")
        expect(page.get_by_role("heading", level=1)).to_contain_text(METHODS[test.method].title)
        assert horizontal_overflow(page) == 0, test.method
        small = [t for t in page.evaluate(TARGETS) if t[1] < MIN_TARGET_PX or t[2] < MIN_TARGET_PX]
        assert not small, (test.method, small)
        keypad = "#sheet input[inputmode=decimal]:visible, #sheet input[inputmode=numeric]:visible"
        numbers = page.locator(keypad)
        assert numbers.count() > 0, test.method  # a numeric keypad for the numbers
        found = serious_violations(page)
        assert not found, f"{test.method}: {describe(found)}"
        turn_landscape(page)
        assert horizontal_overflow(page) == 0, test.method


def test_a_refused_value_is_said_at_its_field_in_words_and_nothing_is_saved(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    det = "water_content.determinations.0"
    type_in(page, {f"{det}.tare_g": "10", f"{det}.wet_tare_g": "36", f"{det}.dry_tare_g": "38.5"})
    message = page.locator(f"#err-r-{det.replace('.', '-')}-dry_tare_g")
    # ASTM D2216: the oven-dry specimen weighs less than the wet one (common practice)
    expect(message).to_contain_text("✖")
    expect(message).to_contain_text("dry mass plus tare (38.5 g) is above wet mass plus tare (36 g)")
    expect(page.locator(f'[name="r.{det}.dry_tare_g"]')).to_have_attribute("aria-invalid", "true")
    expect(page.locator("#save-state")).to_contain_text("not saved yet")
    expect(page.locator(f'.field[data-path="{det}.dry_tare_g"]')).to_have_attribute("data-state", "unsaved")
    found = serious_violations(page)
    assert not found, describe(found)
