"""The methods of DESIGN.md section 8 at the bench, on a tablet held upright (768 x 1024): each
worked example typed and tapped in as fingers would, every field saved, the results appearing
as typed, and for compaction the chart with its zero-air-voids line.

The worked examples and their hand-worked results are those of the HTTP tests
(``tests/web/test_bench_new_methods.py``, each with its standard named beside it).
"""

from __future__ import annotations

import pytest
from playwright.sync_api import Page, expect

from server.db.session import Database
from server.engine.rounding import reported
from server.web.bench_forms import input_at
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import describe, horizontal_overflow, serious_violations, sign_in
from tests.e2e.test_bench_entry import type_in, wait_until_saved
from tests.support.scenario import small_job
from tests.web.test_bench_new_methods import NEW_METHODS, WORKED


def enter(page: Page, method: str, fields: dict[str, str]) -> None:
    """Tap each choice's option and type every other field, in the worked example's order."""
    for path, text in fields.items():
        inp = input_at(method, path)
        assert inp is not None, path
        if inp.kind == "choice":
            option = page.locator(f'label.choice-option:has(input[name="r.{path}"][value="{text}"])')
            option.click()
            expect(option.locator("input")).to_be_checked()
        else:
            type_in(page, {path: text})


@pytest.mark.parametrize("method", NEW_METHODS)
def test_a_worked_example_typed_on_a_tablet_shows_its_results_as_typed(
    page: Page, live_db: Database, live_people: People, method: str
) -> None:
    worked = WORKED[method]
    job = small_job(live_db, live_people.admin, method=method)
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    assert horizontal_overflow(page) == 0  # no sideways scrolling at 768 px (common practice for tablets)
    found = serious_violations(page)
    assert not found, describe(found)

    enter(page, method, worked.fields)
    wait_until_saved(page)
    for key, value in worked.results.items():
        expect(page.locator(f"#res-{key}")).to_contain_text(reported(key, value))
    for dom, (key, value) in worked.rows.items():
        expect(page.locator(f"#{dom}")).to_contain_text(reported(key, value))
    assert horizontal_overflow(page) == 0  # the added rows and the results fit as well


def test_the_compaction_chart_appears_with_its_zero_air_voids_line(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin, method="compaction")
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    expect(page.locator("svg[aria-label='Compaction curve']")).to_have_count(0)
    enter(page, "compaction", WORKED["compaction"].fields)
    wait_until_saved(page)
    chart = page.locator("svg[aria-label='Compaction curve']")
    expect(chart).to_be_visible()
    expect(chart.locator("text", has_text="Zero air voids")).to_have_count(1)
    # the parabola through the peak and the 0, 5 and 10 % air-voids lines (ρs 2.70 typed)
    expect(chart.locator("polyline.series")).to_have_count(4)
    expect(chart.locator("circle")).to_have_count(5 + 1)  # the five points typed, and the legend's
    page.reload()
    expect(page.locator("svg[aria-label='Compaction curve'] polyline.series")).to_have_count(4)
