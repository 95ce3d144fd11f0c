"""A technician at the bench on a tablet held upright: a whole test typed and tapped in, the
result appearing as typed, a reload half-way losing nothing, and the test handed in."""

from __future__ import annotations

from typing import Any

from playwright.sync_api import Page, expect

from server.api.examples import EXAMPLES
from server.db.session import Database
from server.db.tables import LabTest
from server.engine import evaluate
from server.engine.rounding import reported
from server.services import jobs
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import describe, horizontal_overflow, serious_violations, sign_in
from tests.support.scenario import LL_TRIALS, NATURAL, PL_DETERMINATIONS, small_job

SAVED = "✔ Every value on this sheet is saved."


def type_in(page: Page, values: dict[str, Any]) -> None:
    """Type each value into the input named by its readings path, as fingers on a keypad would."""
    for path, value in values.items():
        field = page.locator(f'[name="r.{path}"]')
        field.click()
        field.press_sequentially(str(value))


def rows(base: str, items: list[dict[str, Any]]) -> dict[str, Any]:
    return {f"{base}.{i}.{k}": v for i, item in enumerate(items) for k, v in item.items()}


def wait_until_saved(page: Page) -> None:
    expect(page.locator(".field[data-state]")).to_have_count(0)
    expect(page.locator("#save-state")).to_have_text(SAVED)


def expect_values(page: Page, values: dict[str, Any]) -> None:
    for path, value in values.items():
        expect(page.locator(f'[name="r.{path}"]')).to_have_value(str(value))


def hand_in(page: Page, db: Database, test_id: int) -> LabTest:
    page.get_by_role("button", name="Hand in for review").click()
    page.wait_for_url(f"**/tests/{test_id}?handed_in=1")
    expect(page.locator("#read-only")).to_contain_text("submitted")
    with db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None and test.status == "submitted"
    return test


def test_an_atterberg_set_typed_on_a_tablet_survives_a_reload_and_is_handed_in(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    assert horizontal_overflow(page) == 0  # no sideways scrolling at 768 px (common practice for tablets)
    found = serious_violations(page)
    assert not found, describe(found)

    natural = rows("water_content.determinations", NATURAL)
    trials = rows("liquid_limit.trials", LL_TRIALS)
    type_in(page, natural)
    page.get_by_text("Cup, three or more trials").click()
    type_in(page, trials)
    wait_until_saved(page)
    # Das, Principles of Geotechnical Engineering: w = 42.0, 40.8, 39.1 % at 15, 20, 28 blows, LL 40
    expect(page.locator("#out-liquid_limit-trials-0")).to_contain_text("42.0")
    expect(page.locator("#res-liquid_limit")).to_contain_text("40")
    expect(page.locator("#res-water_content")).to_contain_text("30.0")  # ASTM D2216 formula on N1
    expect(page.locator("svg[aria-label='Flow curve']")).to_be_visible()

    page.reload()  # half-way: the plastic limit is still to come
    expect_values(page, {**natural, **trials})
    expect(page.get_by_role("radio", name="Cup, three or more trials")).to_be_checked()
    expect(page.locator("#res-liquid_limit")).to_contain_text("40")

    type_in(page, rows("plastic_limit.determinations", PL_DETERMINATIONS))
    wait_until_saved(page)
    expect(page.locator("#res-plastic_limit")).to_contain_text("21")  # Liu & Evett: PL 21.2 -> 21
    expect(page.locator("#res-plasticity_index")).to_contain_text("19")  # PI = LL - PL = 40 - 21
    test = hand_in(page, live_db, job.test_id)
    assert test.results is not None and reported("liquid_limit", test.results["liquid_limit"]) == "40"


def test_a_cone_liquid_limit_typed_on_a_tablet_survives_a_reload_and_is_handed_in(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    (test,) = jobs.request_tests(live_db, live_people.admin, [job.sample_id], ["ll-cone"])
    example = EXAMPLES["ll-cone"]  # the engine's example request (server/api/examples.py)
    expected = reported("liquid_limit", evaluate("ll-cone", example).results["liquid_limit"])
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{test.id}")
    page.get_by_text("80 g / 30° cone").click()
    trials = [
        {
            "penetration_mm.0": t["penetration_mm"][0],
            "penetration_mm.1": t["penetration_mm"][1],
            "tare_g": t["tare_g"],
            "wet_tare_g": t["wet_tare_g"],
            "dry_tare_g": t["dry_tare_g"],
        }
        for t in example["trials"]
    ]
    first = rows("trials", trials[:2])
    type_in(page, first)
    wait_until_saved(page)
    expect(page.locator("#out-trials-0")).to_contain_text("16.3 mm")  # mean of the drops 16.2 and 16.4

    page.reload()
    expect_values(page, first)
    expect(page.get_by_role("radio", name="80 g / 30° cone (LL at 20 mm)")).to_be_checked()

    type_in(page, {f"trials.{i + 2}.{k}": v for i, t in enumerate(trials[2:]) for k, v in t.items()})
    wait_until_saved(page)
    expect(page.locator("#res-liquid_limit")).to_contain_text(expected)
    expect(page.locator("svg[aria-label='Cone curve']")).to_be_visible()
    hand_in(page, live_db, test.id or 0)


def test_a_hydrometer_test_typed_on_a_tablet_survives_a_reload_and_is_handed_in(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    (test,) = jobs.request_tests(live_db, live_people.admin, [job.sample_id], ["hydrometer"])
    example = EXAMPLES["hydrometer"]  # the engine's example request (server/api/examples.py)
    expected = reported("clay_fraction", evaluate("hydrometer", example).results["clay_fraction"])
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{test.id}")
    specimen = {
        key: example[key]
        for key in (
            "dry_mass_g",
            "specific_gravity",
            "meniscus_correction",
            "separation_sieve_mm",
            "separation_passing_pct",
            "passing_75um_pct",
        )
    }
    type_in(page, {**specimen, "hydrometer.id": "H-04", **rows("zero_readings", example["zero_readings"])})
    page.get_by_text("152H (g/L)").click()
    first = rows("readings", example["readings"][:3])
    type_in(page, first)
    wait_until_saved(page)

    page.reload()
    expect_values(page, {**specimen, **first})
    later = example["readings"][3:]
    type_in(page, {f"readings.{i + 3}.{k}": v for i, r in enumerate(later) for k, v in r.items()})
    wait_until_saved(page)
    expect(page.locator("#res-clay_fraction")).to_contain_text(expected)
    expect(page.locator("#out-readings-0")).to_contain_text("Diameter")
    expect(page.locator("svg[aria-label='Grading curve']")).to_be_visible()
    assert horizontal_overflow(page) == 0
    hand_in(page, live_db, test.id or 0)
