"""The findings of the tablet walk-through (S9 point 6), each in Chromium at 768 x 1024 (a tablet
upright) and, where the layout changes, 1366 x 768 (a desk): register notes that leave the fields'
widths alone, a tin put back after a reload that fills its tare, a save line that says "not saved"
only when something is, a refused hand-in said at its button, the report chooser's radios beside
their words, date pickers, the preview marked as one, /verify's verdict at once, a new link and an
issued report that land on a page saying so, touch-sized targets, and status symbols in our font."""

from __future__ import annotations

import re
from datetime import timedelta
from typing import Any

import pytest
from playwright.sync_api import Page, Route, expect

from server.db.session import Database
from server.db.tables import LabTest
from server.services import bench, jobs, links, registers, reports, samples
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import describe, horizontal_overflow, serious_violations, sign_in
from tests.e2e.test_bench_entry import SAVED, type_in
from tests.reports.issued import two_approved_samples
from tests.support.renders import run_queued
from tests.support.scenario import ATTERBERG, small_job

DESK = {"width": 1366, "height": 768}
TABLET = {"width": 768, "height": 1024}
PHONE = {"width": 390, "height": 844}  # the QR code is read with a phone (common practice)
CONTROL_PX = 44  # WCAG 2.2 SC 2.5.5 (enhanced) and gloved hands at the bench (common practice)
TABLE_LINK_PX = 24  # WCAG 2.2 SC 2.5.8 (target size, minimum)
TIN = ("T-17", 15.2)  # a tin of the register and its tare in g (the test's own, fictional)
TIN_FIELD = "water_content.determinations.0.container"
TARE_FIELD = "water_content.determinations.0.tare_g"

# Every visible control with its height; links in table cells apart (they need 24 px, not 44).
TARGETS = """() => {
  const seen = el => { const r = el.getBoundingClientRect(); return r.width > 0 && r.height > 0; };
  const controls = [...document.querySelectorAll(
      'main button, main select, main textarea, main summary, main a.button, .top a, .top button, .crumbs a,'
      + ' .row-actions a, .pager a, main input:not([type=hidden]):not([type=radio]):not([type=checkbox])')]
    .concat([...document.querySelectorAll('main input[type=radio], main input[type=checkbox]')]
      .map(i => i.closest('label') || i));
  const small = controls.filter(seen)
    .map(el => [el.outerHTML.slice(0, 80), el.getBoundingClientRect().height]).filter(([, h]) => h < MIN);
  const links = [...document.querySelectorAll('main td a:not(.button)')].filter(seen)
    .map(a => [a.outerHTML.slice(0, 80), a.getBoundingClientRect().height]).filter(([, h]) => h < LINK);
  return small.concat(links);
}""".replace("MIN", str(CONTROL_PX)).replace("LINK", str(TABLE_LINK_PX))


def _box(page: Page, selector: str) -> dict[str, float]:
    box = page.locator(selector).first.bounding_box()
    assert box is not None, selector
    return box


def _sheet_with_registers(db: Database, people: People) -> int:
    job = small_job(db, people.admin)
    registers.add_container(db, people.admin, *TIN)
    today = registers.today()
    registers.add_equipment(
        db, people.admin, "BAL-09", "balance", "Top-pan balance", today + timedelta(days=90), 600.0
    )
    return job.test_id


@pytest.mark.parametrize("viewport", [TABLET, DESK], ids=["tablet", "desk"])
def test_a_register_note_leaves_the_tin_instrument_and_date_fields_their_width(
    page: Page, live_db: Database, live_people: People, viewport: dict[str, int]
) -> None:
    test_id = _sheet_with_registers(live_db, live_people)
    page.set_viewport_size(viewport)
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{test_id}")
    fields = {
        "tin": f'[name="r.{TIN_FIELD}"]',
        "instrument": '[name="r.equipment.0.id"]',
        "date": '[name="r.equipment.0.calibration_due"]',
    }
    before = {k: _box(page, sel)["width"] for k, sel in fields.items()}
    type_in(page, {TIN_FIELD: TIN[0], "equipment.0.id": "BAL-09"})
    page.locator(f'[name="r.{TARE_FIELD}"]').click()  # leaving the field looks the number up
    tin_note = page.locator(f'.field[data-path="{TIN_FIELD}"] .register-note')
    expect(tin_note).to_contain_text("from the register")
    expect(page.locator('.field[data-path="equipment.0.id"] .register-note')).to_contain_text(
        "in calibration"
    )
    after = {k: _box(page, sel)["width"] for k, sel in fields.items()}
    assert after == pytest.approx(before, abs=1), (before, after)
    tin_box = _box(page, fields["tin"])
    assert (
        _box(page, f'.field[data-path="{TIN_FIELD}"] .register-note')["y"]
        >= tin_box["y"] + tin_box["height"] - 1
    )
    assert horizontal_overflow(page) == 0


def test_a_tin_put_back_after_a_reload_fills_its_tare(
    page: Page, live_db: Database, live_people: People
) -> None:
    test_id = _sheet_with_registers(live_db, live_people)
    sign_in(page, "tech", PASSWORDS["tech"])

    def refuse(route: Route) -> None:
        route.abort("internetdisconnected")

    page.route("**/registers/containers/**", refuse)  # the register and the save do not answer:
    page.route("**/fields", refuse)  # the tin number stays on this tablet only
    page.goto(f"/tests/{test_id}")
    type_in(page, {TIN_FIELD: TIN[0]})
    page.locator(f'[name="r.{TARE_FIELD}"]').click()
    expect(page.locator(f'.field[data-path="{TIN_FIELD}"] .register-note')).to_contain_text("no connection")
    page.wait_for_function(
        "() => Object.keys(localStorage).filter(k => k.startsWith('claybench.bench.'))"
        f".some(k => localStorage.getItem(k).includes('{TIN_FIELD}'))"
    )
    page.unroute("**/registers/containers/**")
    page.unroute("**/fields")
    page.reload()
    expect(page.locator(f'[name="r.{TIN_FIELD}"]')).to_have_value(TIN[0])  # put back from this tablet
    expect(page.locator(f'[name="r.{TARE_FIELD}"]')).to_have_value(str(TIN[1]))  # and looked up again
    expect(page.locator("#save-state")).to_have_text(SAVED)


def test_the_save_line_says_not_saved_only_when_a_value_is_refused(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    page.evaluate(
        """() => { const line = document.getElementById('save-state'); window.seenStates = [];
        new MutationObserver(() => window.seenStates.push(line.textContent))
          .observe(line, {childList: true, characterData: true, subtree: true}); }"""
    )
    type_in(page, {TARE_FIELD: "15.20", "water_content.determinations.0.wet_tare_g": "45.62"})
    expect(page.locator("#save-state")).to_have_text(SAVED)
    seen: list[str] = page.evaluate("window.seenStates")
    assert seen and not [s for s in seen if "not saved" in s], seen  # typed valid values: saving, saved
    type_in(page, {"water_content.determinations.0.dry_tare_g": "50"})  # above the wet mass: refused
    expect(page.locator("#save-state")).to_contain_text("not saved yet")  # ASTM D2216: dry < wet


def test_a_refused_hand_in_is_said_at_the_button_on_screen(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    bench.save_readings(
        live_db, live_people.tech, job.test_id, {"water_content": ATTERBERG["water_content"]}, 1
    )
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    page.get_by_role("button", name="Hand in for review").click()
    at_button = page.locator("#hand-in-state")
    expect(at_button).to_contain_text(re.compile("not handed in", re.IGNORECASE))
    box, button = _box(page, "#hand-in-state"), _box(page, "[data-hand-in]")
    assert 0 <= box["y"] and box["y"] + box["height"] <= TABLET["height"]  # on screen as it is read
    assert abs(box["y"] - (button["y"] + button["height"])) < 80  # right under the button


@pytest.mark.parametrize("viewport", [TABLET, DESK], ids=["tablet", "desk"])
def test_the_report_chooser_puts_each_radio_and_checkbox_beside_its_words(
    page: Page, live_db: Database, live_people: People, viewport: dict[str, int]
) -> None:
    two = two_approved_samples(live_db, live_people)
    page.set_viewport_size(viewport)
    sign_in(page, "review", PASSWORDS["review"])
    page.goto(f"/jobs/{two.job_id}")
    boxes: list[list[Any]] = page.evaluate(
        """() => [...document.querySelectorAll('#issue-form :is(input[type=radio], input[type=checkbox])')]
        .map(i => { const r = i.getBoundingClientRect(), l = i.closest('label').getBoundingClientRect();
          const mid = b => b.top + b.height / 2;
          return [i.value, r.right, mid(r), r.width, l.left, mid(l), l.height]; })"""
    )
    assert len(boxes) == 5  # three choices and the two samples
    for value, right, mid, width, label_left, label_mid, label_height in boxes:
        assert width <= 30 and right <= label_left + 40, value  # a box at the start, not a full-width field
        assert abs(mid - label_mid) <= 2 and CONTROL_PX <= label_height < 2 * CONTROL_PX, value  # one row


def test_every_date_on_the_bench_is_typed_with_a_date_picker(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    for name in ("r.tested_on", "r.equipment.0.calibration_due"):
        expect(page.locator(f'[name="{name}"]')).to_have_attribute("type", "date")
    page.locator('[name="r.tested_on"]').fill("2026-12-01")  # the picker's value, ISO 8601
    expect(page.locator("#save-state")).to_have_text(SAVED)
    with live_db.session() as s:
        stored = s.get(LabTest, job.test_id)
    assert stored is not None and stored.readings.get("tested_on") == "2026-12-01"


def test_the_preview_is_marked_without_a_number_and_its_address_holds_no_token(
    page: Page, live_db: Database, live_people: People
) -> None:
    two = two_approved_samples(live_db, live_people)
    sign_in(page, "review", PASSWORDS["review"])
    page.goto(f"/jobs/{two.job_id}")
    page.fill("#f-issue-password", PASSWORDS["review"])  # typed already: it must not reach an address
    with page.context.expect_page() as opened:
        page.get_by_role("button", name="Preview (not issued)").click()
    preview = opened.value
    preview.wait_for_load_state()
    assert "csrf_token" not in preview.url and "password" not in preview.url, preview.url
    expect(preview.locator("#preview-mark")).to_contain_text("PREVIEW")
    assert "T-100-R01" not in preview.content()  # no number of its own (server/services/reports.py)


@pytest.mark.parametrize("viewport", [PHONE, TABLET], ids=["phone", "tablet"])
def test_verify_opened_from_the_qr_code_shows_its_verdict_on_the_first_screen(
    page: Page, live_db: Database, live_people: People, viewport: dict[str, int]
) -> None:
    two = two_approved_samples(live_db, live_people)
    report = reports.issue_report(
        live_db, live_people.review, two.job_id, "http://x", password=PASSWORDS["review"]
    )
    page.set_viewport_size(viewport)
    # The QR code's address: the printed one with the content fingerprint (server/reports/pdf.py check_url)
    page.goto(f"/verify?number={report.number}&revision={report.revision}&sha256={report.fingerprint}")
    verdict = _box(page, "#verdict")
    assert verdict["y"] + 40 <= viewport["height"], verdict  # its first line is on the first screen
    expect(page.locator("#verdict")).to_contain_text("Genuine and current")
    assert page.title().startswith("✔ Genuine and current")
    assert horizontal_overflow(page) == 0


def test_a_new_client_link_lands_on_a_page_that_shows_it_once(
    page: Page, live_db: Database, live_people: People
) -> None:
    two = two_approved_samples(live_db, live_people)
    sign_in(page, "review", PASSWORDS["review"])
    page.goto(f"/jobs/{two.job_id}")
    page.fill("#label", "design engineer")
    page.get_by_role("button", name="Create a client link").click()
    page.wait_for_url(re.compile(rf"/jobs/{two.job_id}\?done=link-created#links$"))  # post, redirect, get
    expect(page.locator(".notice").first).to_contain_text("Client link created")
    new_link = page.locator("#new-link")
    expect(new_link).to_contain_text("/share/")
    assert _box(page, "#new-link")["y"] < TABLET["height"]  # the anchor brings it on screen
    page.reload()  # a reload neither makes a second link nor shows the token again
    expect(page.locator("#new-link")).to_have_count(0)
    assert len(links.job_links(live_db, two.job_id).links) == 1


def test_an_issued_report_lands_on_a_page_that_says_it_is_issued(
    page: Page, live_db: Database, live_people: People
) -> None:
    two = two_approved_samples(live_db, live_people)
    sign_in(page, "review", PASSWORDS["review"])
    page.goto(f"/jobs/{two.job_id}")
    page.fill("#f-issue-password", PASSWORDS["review"])
    page.get_by_role("button", name="Sign and issue the report").click()
    expect(page.locator(".notice").first).to_contain_text("being rendered")
    (report,) = run_queued(live_db)
    expect(page.locator(f"#report-{report.id}")).to_contain_text("✔ current", timeout=15_000)
    expect(page.locator(".notice").first).to_contain_text(f"Report {report.number} revision 1 issued")


@pytest.mark.parametrize("viewport", [TABLET, DESK], ids=["tablet", "desk"])
def test_every_control_is_touch_sized_on_the_pages_of_the_bench_and_the_job(
    page: Page, live_db: Database, live_people: People, viewport: dict[str, int]
) -> None:
    two = two_approved_samples(live_db, live_people)
    job = small_job_for_bench(live_db, live_people)
    reports.issue_report(live_db, live_people.review, two.job_id, "http://x", password=PASSWORDS["review"])
    share = links.create_link(live_db, live_people.review, two.job_id, 30, "design engineer")
    page.set_viewport_size(viewport)
    sign_in(page, "review", PASSWORDS["review"])
    for path in (
        f"/share/{share.token}",
        "/bench",
        f"/tests/{job}",
        f"/jobs/{two.job_id}",
        f"/jobs/{two.job_id}/links",
        f"/jobs/{two.job_id}/reissue",
        "/verify",
    ):
        page.goto(path)
        page.wait_for_load_state("networkidle")
        small = page.evaluate(TARGETS)
        assert not small, (path, small)
        assert horizontal_overflow(page) == 0, path
        found = serious_violations(page)
        assert not found, f"{path}: {describe(found)}"


def small_job_for_bench(db: Database, people: People) -> int:
    """A second job's test with readings typed, so the bench page has rows, notes and results."""
    client = jobs.create_client(db, people.admin, "Bench Client Ltd")
    made = jobs.create_job(db, people.admin, client.id or 0, "T-200", "Bench job", "Bench site")
    location = samples.add_location(db, people.admin, made.id or 0, "BH9")
    sample = samples.add_sample(db, people.admin, location.id or 0, "BH9-S1", 1.0, 1.45, "U100", "Soft CLAY")
    (test,) = jobs.request_tests(db, people.admin, [sample.id or 0], ["atterberg"])
    bench.save_readings(db, people.tech, test.id or 0, ATTERBERG, test.version)
    return test.id or 0


def test_the_status_symbols_are_drawn_with_the_font_we_ship(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    saved = bench.save_readings(live_db, live_people.tech, job.test_id, ATTERBERG, 1)
    bench.submit(live_db, live_people.tech, job.test_id, saved.test.version)
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    expect(page.locator(".status-submitted").first).to_contain_text("⧗")
    page.evaluate("document.fonts.ready")
    loaded = page.evaluate(
        "() => [...document.fonts].filter(f => f.family.includes('Claybench Symbols')).map(f => f.status)"
    )
    assert loaded == ["loaded"], loaded  # fetched from /static, allowed by font-src 'self'
    # Drawn by our font: the hourglass has the advance width we gave it (1716 of 2048 units per em),
    # not the fallback's empty box.
    width = page.evaluate(
        """() => { const c = document.createElement('canvas').getContext('2d');
        c.font = '100px "Claybench Symbols"'; return c.measureText('⧗').width; }"""
    )
    assert width == pytest.approx(100 * 1716 / 2048, abs=0.5)
