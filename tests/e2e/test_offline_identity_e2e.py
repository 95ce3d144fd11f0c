"""Two people, one tablet: values typed without a connection stay the typist's own. Signing out
with them unsent asks what to do; the next person sees that they wait but can never send them (only
discard them, with a reason); the typist signs in again and they are sent and audited as theirs,
with the time they were typed."""

from __future__ import annotations

import time
from datetime import UTC, datetime, timedelta

from playwright.sync_api import Page, Request, expect
from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import AuditEvent, LabTest, User
from server.services.offline import LIVE_SLACK
from server.services.readings_paths import value_at
from server.services.users import create_user
from server.web.forms import text_of
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import describe, serious_violations, sign_in
from tests.e2e.test_bench_entry import expect_values, type_in, wait_until_saved
from tests.support.records import audit_events
from tests.support.scenario import small_job

DET = "water_content.determinations.0"
# Masses of the scenario's natural water content N1 (ASTM D2216 formula: w = 30.0 %)
TYPED = {
    f"{DET}.container": "N1",
    f"{DET}.tare_g": "10.0",
    f"{DET}.wet_tare_g": "36.0",
    f"{DET}.dry_tare_g": "30.0",
}
EMPTY = dict.fromkeys(TYPED, "")
SECOND_PASSWORD = "tech2-password-1"
WAITING = "4 entries typed by Tech Person wait on this tablet; only they can send them"


def _second_technician(db: Database) -> User:
    return create_user(db, None, "tech2", "Second Technician", "technician", SECOND_PASSWORD)


def _texts(db: Database, test_id: int) -> dict[str, str]:
    """The stored readings at the typed paths, as the sheet shows them."""
    with db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None
    return {p: text_of(value_at(test.readings or {}, p)) for p in TYPED}


def _events_by(db: Database, user: User) -> list[AuditEvent]:
    """What the user did to the laboratory's records (their own sign-ins left out)."""
    with db.session() as s:
        query = select(AuditEvent).where(col(AuditEvent.actor_id) == user.id, AuditEvent.entity != "session")
        return list(s.exec(query))


def _saves_seen(page: Page) -> list[str]:
    """The field saves this page sends from now on (POST /tests/{id}/fields)."""
    seen: list[str] = []

    def note(request: Request) -> None:
        if request.method == "POST" and request.url.endswith("/fields"):
            seen.append(request.url)

    page.on("request", note)
    return seen


def _type_offline_and_keep(page: Page, test_id: int) -> tuple[datetime, datetime]:
    """The first technician types the four values with the network down, then signs out and keeps
    them on the tablet; returns the clock just before and just after the typing."""
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{test_id}")
    page.context.set_offline(True)
    started = datetime.now(UTC)
    type_in(page, TYPED)
    ended = datetime.now(UTC)
    expect(page.locator("#net")).to_contain_text("4 values kept on this tablet")
    page.get_by_role("button", name="Sign out").click()
    dialog = page.locator("#signout-dialog")
    expect(dialog).to_be_visible()
    expect(dialog.get_by_role("heading")).to_have_text("4 entries are not sent yet")
    expect(dialog).to_contain_text("There is no connection now.")
    saves = _saves_seen(page)
    page.context.set_offline(False)  # the connection is back while the dialog asks
    page.wait_for_timeout(1500)  # a send would have gone by now (common practice: > one round trip)
    assert saves == []  # nothing is sent behind the dialog: the person decides
    dialog.get_by_role("button", name="Keep them on this tablet and sign out").click()
    page.wait_for_url("**/signin")
    return started, ended


def test_values_kept_by_one_technician_are_never_sent_by_the_next_and_go_with_their_typist(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    second = _second_technician(live_db)
    started, ended = _type_offline_and_keep(page, job.test_id)
    assert _texts(live_db, job.test_id) == EMPTY
    assert audit_events(live_db, "lab_test", job.test_id, "readings") == []

    saves = _saves_seen(page)
    sign_in(page, "tech2", SECOND_PASSWORD)
    expect(page.locator("#kept-on-tablet")).to_contain_text(WAITING)  # said on the first page already
    page.goto(f"/tests/{job.test_id}")
    notice = page.locator("#kept-others")
    expect(notice).to_contain_text(WAITING + ", signed in as themselves.")
    expect(notice.get_by_role("button", name="Discard them…")).to_be_visible()
    expect_values(page, EMPTY)  # never put into the second person's inputs
    wait_until_saved(page)  # the second person has nothing of their own to send
    found = serious_violations(page)
    assert not found, describe(found)
    page.wait_for_timeout(1000)  # time for a send, were there one (common practice: > one round trip)
    assert saves == []
    assert _texts(live_db, job.test_id) == EMPTY
    assert [e.action for e in _events_by(live_db, second)] == []  # nothing done in the second name
    page.get_by_role("button", name="Sign out").click()  # nothing of theirs waits: no question
    page.wait_for_url("**/signin")

    # The typist comes back after longer than a live round trip (LIVE_SLACK): the event must say when.
    time.sleep(max(0.0, (ended + LIVE_SLACK + timedelta(seconds=1) - datetime.now(UTC)).total_seconds()))
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    expect(page.locator("#kept-others")).to_be_hidden()
    expect_values(page, TYPED)
    wait_until_saved(page)
    assert _texts(live_db, job.test_id) == TYPED
    events = audit_events(live_db, "lab_test", job.test_id, "readings")
    assert events and {(e.actor, e.actor_id) for e in events} == {("tech", live_people.tech.id)}
    first = events[0]
    assert first.typed_at is not None
    # computed: browser and server share this machine's clock, so the typing time comes out as the
    # time of typing, give or take one request's latency on loopback (well under a second)
    assert started - timedelta(seconds=1) <= first.typed_at <= ended + timedelta(seconds=1)
    assert first.at - first.typed_at > LIVE_SLACK


def test_the_next_person_can_discard_kept_values_only_with_a_reason_and_the_discard_is_recorded(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    second = _second_technician(live_db)
    _type_offline_and_keep(page, job.test_id)

    sign_in(page, "tech2", SECOND_PASSWORD)
    page.goto(f"/tests/{job.test_id}")
    notice = page.locator("#kept-others")
    notice.get_by_role("button", name="Discard them…").click()
    notice.get_by_role("button", name="Discard the entries").click()
    expect(notice).to_contain_text("Say why: the reason is recorded")
    assert audit_events(live_db, "lab_test", job.test_id, "discard_offline") == []
    reason = "Specimen re-weighed after the tablet changed hands"
    notice.get_by_label("Why discard the entries typed by Tech Person?").fill(reason)
    notice.get_by_role("button", name="Discard the entries").click()
    expect(notice).to_contain_text("The 4 entries typed by Tech Person were discarded")
    (event,) = audit_events(live_db, "lab_test", job.test_id, "discard_offline")
    assert (event.actor_id, event.reason) == (second.id, reason)  # the discarding person acts
    assert event.before is not None
    assert event.before["typed_by"]["username"] == "tech"  # ISO/IEC 17025:2017 cl. 7.5.1
    assert {e["path"]: e["value"] for e in event.before["entries"]} == TYPED  # the values stay readable
    assert _texts(live_db, job.test_id) == EMPTY

    page.reload()
    expect(page.locator("#kept-others")).to_be_hidden()  # gone from the tablet
    page.get_by_role("button", name="Sign out").click()
    page.wait_for_url("**/signin")
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    expect_values(page, EMPTY)
    wait_until_saved(page)
    assert audit_events(live_db, "lab_test", job.test_id, "readings") == []


def test_send_now_in_the_sign_out_dialog_saves_the_values_then_signs_out(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    page.context.set_offline(True)
    type_in(page, TYPED)
    page.get_by_role("button", name="Sign out").click()
    dialog = page.locator("#signout-dialog")
    dialog.get_by_role("button", name="Send now").click()  # still no connection
    expect(dialog).to_contain_text("Not all sent")
    expect(dialog).to_be_visible()
    assert _texts(live_db, job.test_id) == EMPTY
    page.context.set_offline(False)
    dialog.get_by_role("button", name="Send now").click()
    page.wait_for_url("**/signin")
    assert _texts(live_db, job.test_id) == TYPED
    events = audit_events(live_db, "lab_test", job.test_id, "readings")
    assert events and {e.actor for e in events} == {"tech"}
