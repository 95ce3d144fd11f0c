"""Registers and bulk requests in a real browser: forms, look-ups from the page, accessibility."""

from __future__ import annotations

from collections.abc import Callable
from datetime import timedelta

from playwright.sync_api import Page, expect

from server.db.session import Database
from server.services import jobs, registers, samples
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import (
    TABLET_LANDSCAPE,
    describe,
    horizontal_overflow,
    serious_violations,
    sign_in,
)


def test_an_admin_adds_a_tin_on_a_tablet_and_the_bench_look_up_finds_its_tare(
    page: Page, live_db: Database, live_people: People
) -> None:
    today = registers.today()
    registers.add_equipment(
        live_db, live_people.admin, "BAL-02", "balance", "bench 2", today - timedelta(days=5)
    )
    registers.add_equipment(live_db, live_people.admin, "CUP-01", "cup-device", "", today + timedelta(days=9))
    sign_in(page, "admin", PASSWORDS["admin"])
    page.goto("/registers")
    page.get_by_role("link", name="Containers").click()
    page.get_by_label("Code on the tin").fill("t-31")
    page.get_by_label("Tare (g)").fill("13,85")
    page.get_by_role("button", name="Add container").click()
    expect(page.get_by_role("status")).to_have_text("Container T-31 added with tare 13.85 g.")
    found = page.evaluate("fetch('/registers/containers/T-31').then(r => r.json())")
    assert found == {"code": "T-31", "tare_g": 13.85, "active": True}
    for path in ("/registers", "/registers/admin/containers", "/registers/admin/equipment"):
        page.goto(path)
        assert horizontal_overflow(page) == 0, path  # wide tables scroll in their own box
        violations = serious_violations(page)
        assert not violations, f"{path}\n{describe(violations)}"
    expect(page.get_by_text("✖ past due")).to_be_visible()  # symbol and words, not colour alone
    expect(page.get_by_text("⚠ due within 30 days")).to_be_visible()


def test_a_reviewer_requests_the_atterberg_set_and_a_hydrometer_on_every_clay_of_a_borehole(
    new_page: Callable[..., Page], live_db: Database, live_people: People
) -> None:
    admin = live_people.admin
    client = jobs.create_client(live_db, admin, "Moorside Client")
    job = jobs.create_job(live_db, admin, client.id or 0, "MC-7", "Moorside embankment")
    bh = samples.add_location(live_db, admin, job.id or 0, "BH1")
    samples.add_sample(live_db, admin, bh.id or 0, "BH1-U1", 1.0, 1.45, "U100", "Firm brown CLAY")
    samples.add_sample(live_db, admin, bh.id or 0, "BH1-D2", 2.0, 2.45, "disturbed", "Medium dense SAND")
    samples.add_sample(live_db, admin, bh.id or 0, "BH1-U3", 3.0, 3.45, "U100", "Stiff grey silty CLAY")

    desk = new_page(TABLET_LANDSCAPE)
    sign_in(desk, "review", PASSWORDS["review"])
    desk.goto("/requests")
    desk.get_by_label("Job").select_option(label="MC-7 · Moorside embankment")
    desk.get_by_role("button", name="Choose this job").click()
    desk.get_by_label("Location").select_option(label="borehole BH1")
    desk.get_by_label("Description contains").fill("clay")
    desk.get_by_label("Atterberg limits and indices").check()
    desk.get_by_label("Grading by sedimentation (hydrometer)").check()
    desk.get_by_label("Assign to").select_option(label="Tech Person (technician)")
    desk.get_by_role("button", name="Show what will be created").click()
    expect(desk.get_by_text("4 new test(s) on 2 sample(s)")).to_be_visible()
    violations = serious_violations(desk)
    assert not violations, describe(violations)
    desk.get_by_role("button", name="Request 4 test(s)").click()
    expect(desk.get_by_role("status")).to_contain_text("4 test(s) requested on MC-7")

    bench = new_page()  # the technician's tablet, held upright
    sign_in(bench, "tech", PASSWORDS["tech"])
    bench.goto("/")
    for sample in ("BH1-U1", "BH1-U3"):
        expect(
            bench.get_by_role("link", name=f"Open Atterberg limits and indices on {sample}")
        ).to_be_visible()
    expect(
        bench.get_by_role("link", name="Open Grading by sedimentation (hydrometer) on BH1-U3")
    ).to_be_visible()
    expect(bench.get_by_text("BH1-D2")).to_have_count(0)  # the sand was left out
