"""Nothing typed at the bench is lost: not to a dropped connection, a closed tab, nor a second
tablet on the same test (which gets a clear message, with both values on the screen)."""

from __future__ import annotations

from collections.abc import Callable

from playwright.sync_api import Page, expect

from server.db.session import Database
from server.db.tables import LabTest
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import describe, serious_violations, sign_in
from tests.e2e.test_bench_entry import expect_values, type_in, wait_until_saved
from tests.support.scenario import small_job

DET = "water_content.determinations.0"
# Masses of the scenario's natural water content N1 (ASTM D2216 formula: w = 30.0 %)
TYPED = {
    f"{DET}.container": "N1",
    f"{DET}.tare_g": "10.0",
    f"{DET}.wet_tare_g": "36.0",
    f"{DET}.dry_tare_g": "30.0",
}
# kept as typed, digits and all (S7 point 1: readings as entered)
MASSES = {"container": "N1", "tare_g": "10.0", "wet_tare_g": "36.0", "dry_tare_g": "30.0"}
STORED = {"water_content": {"determinations": [MASSES]}}


def _readings(db: Database, test_id: int) -> dict[str, object]:
    with db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None
    return test.readings or {}


def test_values_typed_without_a_connection_are_kept_and_sent_when_it_returns(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    page.context.set_offline(True)
    type_in(page, TYPED)
    banner = page.locator("#net")
    expect(banner).to_be_visible()
    expect(banner).to_have_text(
        "⚠ No connection: 4 values kept on this tablet, they will be sent when the connection returns."
    )
    assert _readings(live_db, job.test_id) == {}
    page.context.set_offline(False)
    wait_until_saved(page)
    expect(banner).to_be_hidden()
    assert _readings(live_db, job.test_id) == STORED
    page.reload()
    expect_values(page, TYPED)
    expect(page.locator("#res-water_content")).to_contain_text("30.0")


def test_values_typed_offline_in_a_tab_that_was_closed_come_back_when_it_is_opened_again(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    context = page.context
    context.set_offline(True)
    type_in(page, TYPED)
    expect(page.locator("#net")).to_contain_text("4 values kept on this tablet")
    page.close()  # the tab is closed while the connection is down
    context.set_offline(False)
    again = context.new_page()
    again.goto(f"/tests/{job.test_id}")
    expect_values(again, TYPED)  # put back from this tablet's storage
    wait_until_saved(again)
    assert _readings(live_db, job.test_id) == STORED


def test_two_tablets_on_one_field_get_the_conflict_message_with_both_values(
    new_page: Callable[..., Page], live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    first, second = new_page(), new_page()  # two tablets: own cookies, own storage
    for tablet in (first, second):
        sign_in(tablet, "tech", PASSWORDS["tech"])
        tablet.goto(f"/tests/{job.test_id}")
    wet = f"{DET}.wet_tare_g"
    type_in(first, {wet: "36.00"})
    wait_until_saved(first)
    type_in(second, {wet: "36.50"})  # the second tablet still shows the field empty
    conflict = second.locator(f'.field[data-path="{wet}"] .conflict')
    expect(conflict).to_contain_text("Another device changed this field")
    expect(conflict.locator(".theirs")).to_have_text("36.00")  # as the first tablet typed it
    expect(conflict.locator(".yours")).to_have_text("36.50")
    expect(second.locator("#save-state")).to_contain_text("changed on another device")
    found = serious_violations(second)
    assert not found, describe(found)
    assert _readings(live_db, job.test_id) == {"water_content": {"determinations": [{"wet_tare_g": "36.00"}]}}

    conflict.get_by_role("button", name="Keep mine").click()
    wait_until_saved(second)
    assert _readings(live_db, job.test_id) == {"water_content": {"determinations": [{"wet_tare_g": "36.50"}]}}


def test_taking_the_other_tablets_value_puts_it_into_the_field(
    new_page: Callable[..., Page], live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    first, second = new_page(), new_page()
    for tablet in (first, second):
        sign_in(tablet, "tech", PASSWORDS["tech"])
        tablet.goto(f"/tests/{job.test_id}")
    tare = f"{DET}.tare_g"
    type_in(first, {tare: "10.00"})
    wait_until_saved(first)
    type_in(second, {tare: "11.00"})
    conflict = second.locator(f'.field[data-path="{tare}"] .conflict')
    conflict.get_by_role("button", name="Take theirs").click()
    expect(second.locator(f'[name="r.{tare}"]')).to_have_value("10.00")
    wait_until_saved(second)
    assert _readings(live_db, job.test_id) == {"water_content": {"determinations": [{"tare_g": "10.00"}]}}
