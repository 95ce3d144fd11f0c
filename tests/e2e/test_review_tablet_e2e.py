"""The review desk and the review page in a real browser, on a tablet (768 x 1024 upright,
1024 x 768 turned) and on a desk screen (1366 x 768), issue S9 points 1 and 2.

Widths are CSS pixels of the viewport. "No sideways scrolling" is the document no wider than
the window (WCAG 2.2 SC 1.4.10 Reflow asks it at 320 px; a tablet is the laboratory's case).
"""

from __future__ import annotations

import re

from playwright.sync_api import Locator, Page, expect

from server.db.session import Database
from server.reports.names import flag_name, method_name
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import describe, serious_violations, sign_in
from tests.workflow.flows import EXPIRED_BALANCE, Lab, load

DESK = {"width": 1366, "height": 768}
UPRIGHT = {"width": 768, "height": 1024}
TURNED = {"width": 1024, "height": 768}


def _queue(db: Database, people: People) -> tuple[int, int, int]:
    """An Atterberg set with a warning, a water content with an error remark, a clean water
    content (tests/workflow/flows.py); the desk lists them error, warning, clean."""
    lab = Lab(db, people.admin, "RV-TAB-2026-001")  # a long job number, as laboratories write them
    warned = lab.submitted(people.tech)
    failed = lab.submitted(people.tech, "water-content", EXPIRED_BALANCE)
    clean = lab.submitted(people.tech, "water-content")
    return warned, failed, clean


def _fits(page: Page) -> tuple[int, int]:
    """The document's width and the window's: equal when nothing scrolls sideways."""
    width, inner = page.evaluate("[document.scrollingElement.scrollWidth, window.innerWidth]")
    return int(width), int(inner)


def _on_screen(page: Page, target: Locator) -> bool:
    """Whether the element is wholly inside the window as it is scrolled now."""
    box = target.bounding_box()
    size = page.viewport_size
    assert box is not None and size is not None
    return (
        box["x"] >= 0
        and box["y"] >= 0
        and box["x"] + box["width"] <= size["width"]
        and (box["y"] + box["height"] <= size["height"])
    )


def test_the_review_desk_on_a_tablet_lists_every_test_as_a_card_without_sideways_scrolling(
    page: Page, db: Database, people: People
) -> None:
    warned, failed, clean = _queue(db, people)
    sign_in(page, "review", PASSWORDS["review"])
    for viewport in (UPRIGHT, TURNED):
        page.set_viewport_size(viewport)
        page.goto("/review")
        width, inner = _fits(page)
        assert width <= inner, (viewport, width, inner)
        expect(page.locator("#queue-counts")).to_contain_text("3 tests handed in")
        for test_id in (warned, failed, clean):
            link = page.locator(f"#queue-{test_id} a", has_text="Review")
            link.evaluate("e => e.scrollIntoView({block: 'center'})")  # reached by scrolling down only
            assert _on_screen(page, link), (viewport, test_id)
    row = page.locator(f"#queue-{failed}")
    expect(row).to_contain_text(method_name("water-content"))
    expect(row).to_contain_text("✖ Error: " + flag_name("equipment-calibration-expired"))
    expect(row.locator("[title='equipment-calibration-expired']")).to_have_count(1)  # the id in a tooltip
    expect(page.locator(f"#queue-{warned}")).to_contain_text(
        "⚠ Check: " + flag_name("pl-determinations-apart")
    )
    page.set_viewport_size(UPRIGHT)
    # A card below 60rem (static/review.css): the row is a grid, the column headings are for screen readers.
    assert page.locator(f"#queue-{clean}").evaluate("e => getComputedStyle(e).display") == "grid"
    page.get_by_label("Quality remarks").select_option("error")
    page.get_by_role("button", name="Show", exact=True).click()
    expect(page.locator("table.queue tbody tr")).to_have_count(1)
    expect(page.locator("#queue-shown")).to_contain_text("Showing 1 of 3")
    found = serious_violations(page)
    assert not found, describe(found)


def test_the_review_desk_on_a_desk_screen_keeps_a_dense_table(
    page: Page, db: Database, people: People
) -> None:
    _warned, failed, _clean = _queue(db, people)
    sign_in(page, "review", PASSWORDS["review"])
    page.set_viewport_size(DESK)
    page.goto("/review")
    assert page.locator(f"#queue-{failed}").evaluate("e => getComputedStyle(e).display") == "table-row"
    expect(page.get_by_role("columnheader", name="Remarks")).to_be_visible()
    width, inner = _fits(page)
    table = int(page.locator("table.queue").evaluate("e => e.getBoundingClientRect().right"))
    assert width <= inner and table <= inner, (width, table, inner)
    # Dense: three tests of one line each fit in the first screen with the filters.
    assert _on_screen(page, page.locator(f"#queue-{failed} a", has_text="Review"))
    found = serious_violations(page)
    assert not found, describe(found)


def test_the_review_page_puts_the_summary_first_and_keeps_the_decision_on_screen(
    page: Page, db: Database, people: People
) -> None:
    warned, _failed, _clean = _queue(db, people)
    sign_in(page, "review", PASSWORDS["review"])
    for viewport in (UPRIGHT, DESK):
        page.set_viewport_size(viewport)
        page.goto(f"/review/{warned}")
        expect(page).to_have_title(re.compile(r"BH1 / S1 · " + re.escape(method_name("atterberg"))))
        width, inner = _fits(page)
        assert width <= inner, (viewport, width, inner)
        tops = [page.locator(f"#{part}").bounding_box() for part in ("summary", "readings", "stored")]
        assert [b["y"] for b in tops if b] == sorted(b["y"] for b in tops if b)  # summary, readings, stored
        expect(page.locator("#stored")).not_to_have_attribute("open", "")  # full precision folded away
        expect(page.locator("#flags")).to_contain_text(flag_name("pl-determinations-apart"))
        approve = page.get_by_role("button", name="Approve and sign")
        give_back = page.locator("#return")  # "Return to the bench…", opens the reason
        for where in ("document.scrollingElement.scrollHeight", "0"):
            page.evaluate(f"window.scrollTo(0, {where})")
            assert _on_screen(page, approve) and _on_screen(page, give_back), (viewport, where)
        height = page.evaluate("document.scrollingElement.scrollHeight")
        assert height < 10 * page.evaluate("innerHeight"), height  # was 10,431 px at 768 (issue S9)
    found = serious_violations(page)
    assert not found, describe(found)


def test_approving_and_returning_confirm_and_offer_the_next_test_in_the_queue(
    page: Page, db: Database, people: People
) -> None:
    warned, failed, clean = _queue(db, people)
    sign_in(page, "review", PASSWORDS["review"])
    page.goto(f"/review/{warned}")
    page.get_by_label("Your password, as your signature").fill(PASSWORDS["review"])
    page.get_by_role("button", name="Approve and sign").click()
    page.wait_for_url(f"**/review?decided={warned}")
    expect(page.locator("#decided")).to_contain_text("Approved and signed: " + method_name("atterberg"))
    assert load(db, warned).status == "approved"
    following = page.locator("a#next-test")
    expect(following).to_have_attribute("href", f"/review/{failed}")  # the error remark comes first
    assert _on_screen(page, following)
    following.click()
    page.locator("#return").click()
    page.get_by_label("Reason (shown to the technician)").fill("tare of N1 to be re-weighed")
    page.get_by_role("button", name="Return with this reason").click()
    page.wait_for_url(f"**/review?decided={failed}")
    expect(page.locator("#decided")).to_contain_text("Returned to the bench: " + method_name("water-content"))
    expect(page.locator("a#next-test")).to_have_attribute("href", f"/review/{clean}")
    page.reload()  # a GET: reloading the confirmation posts nothing again
    assert (load(db, warned).status, load(db, failed).status) == ("approved", "returned")


def test_a_wrong_password_keeps_the_reviewer_on_the_review_page_with_the_message_at_the_field(
    page: Page, db: Database, people: People
) -> None:
    warned, _failed, _clean = _queue(db, people)
    sign_in(page, "review", PASSWORDS["review"])
    page.goto(f"/review/{warned}")
    page.get_by_label("Your password, as your signature").fill("not the password")
    with page.expect_response(f"**/review/{warned}/approve") as answer:
        page.get_by_role("button", name="Approve and sign").click()
    assert answer.value.status == 422
    expect(page.get_by_role("heading", level=1)).to_contain_text(method_name("atterberg"))
    field = page.locator("#password")
    message = page.locator("#err-password")
    expect(message).to_contain_text("the password does not match")
    expect(field).to_have_attribute("aria-invalid", "true")
    expect(field).to_be_focused()
    assert _on_screen(page, field) and _on_screen(page, message)
    field_box, message_box = field.bounding_box(), message.bounding_box()
    assert field_box and message_box and 0 <= message_box["y"] - (field_box["y"] + field_box["height"]) < 24
    assert load(db, warned).status == "submitted"
    found = serious_violations(page)
    assert not found, describe(found)
