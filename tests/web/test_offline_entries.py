"""Entries a tablet kept offline belong to the person who typed them: saved only in that person's
session, audited with when they were typed, and discarded by anyone else only with a reason."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from typing import Any

from fastapi.testclient import TestClient
from httpx import Response

from server.db.session import Database
from server.db.tables import LabTest
from server.services.offline import LIVE_SLACK
from server.services.readings_paths import value_at
from server.services.users import create_user
from server.web.forms import text_of
from tests.conftest import PASSWORDS, People
from tests.support.http import csrf_of, sign_in
from tests.support.records import audit_events
from tests.support.scenario import small_job

DET = "water_content.determinations.0"
W1 = f"{DET}.wet_tare_g"
TARE = f"{DET}.tare_g"


def _stored(db: Database, test_id: int) -> LabTest:
    with db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None
    return test


def _requested_yesterday(db: Database, test_id: int) -> None:
    """Date the test's creation a day back: a typing time is credible only after the test existed."""
    with db.transaction() as s:
        test = s.get(LabTest, test_id)
        assert test is not None
        test.created_at = datetime.now(UTC) - timedelta(days=1)
        s.add(test)


def _texts(db: Database, test_id: int, *paths: str) -> list[str]:
    """The stored values at these paths as the sheet shows them ("" where nothing is stored)."""
    readings = _stored(db, test_id).readings or {}
    return [text_of(value_at(readings, p)) for p in paths]


def _iso(at: datetime) -> str:
    return at.isoformat().replace("+00:00", "Z")  # as a browser's Date.toISOString() writes it


def _post(client: TestClient, test_id: int, action: str, body: dict[str, Any]) -> Response:
    token = csrf_of(client.get(f"/tests/{test_id}"))
    return client.post(f"/tests/{test_id}/{action}", json=body, headers={"X-CSRF-Token": token})


def _kept_batch(typed_by: int | None, typed_at: datetime, sent_at: datetime) -> dict[str, Any]:
    """Two values a tablet kept, as static/bench.js sends them when the connection is back."""
    return {
        "typed_by": typed_by,
        "sent_at": _iso(sent_at),
        "changes": [
            {"path": TARE, "value": "10.0", "base": "", "typed_at": _iso(typed_at)},
            {"path": W1, "value": "36.0", "base": "", "typed_at": _iso(typed_at + timedelta(seconds=30))},
        ],
    }


def _one_readings_event(db: Database, test_id: int) -> Any:
    events = audit_events(db, "lab_test", test_id, "readings")
    assert len(events) == 1, events
    return events[0]


# -- saving kept entries -------------------------------------------------------------------------


def test_entries_typed_by_another_person_are_refused_with_409_and_nothing_is_stored(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    now = datetime.now(UTC)
    reply = _post(app_client, job.test_id, "fields", _kept_batch(people.review.id, now, now))
    assert reply.status_code == 409, reply.text
    body = reply.json()
    assert body["other_typist"] == people.review.id
    # the person who typed them is named, and who may send them (DESIGN §4: who, in every record)
    assert "typed by Review Person (review)" in body["detail"] and "only they can send them" in body["detail"]
    test = _stored(db, job.test_id)
    assert (test.readings, test.version) == (None, 1)  # nothing stored (computed: the fresh test)
    assert audit_events(db, "lab_test", job.test_id, "readings") == []


def test_entries_naming_a_user_who_does_not_exist_are_refused(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    now = datetime.now(UTC)
    reply = _post(app_client, job.test_id, "fields", _kept_batch(987654, now, now))
    assert reply.status_code == 409 and "unknown here" in reply.json()["detail"]
    assert _stored(db, job.test_id).readings is None


def test_entries_sent_hours_after_typing_are_audited_under_the_typist_with_the_typing_time(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    _requested_yesterday(db, job.test_id)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    sent = datetime.now(UTC)
    typed = sent - timedelta(hours=2)
    before = datetime.now(UTC)
    reply = _post(app_client, job.test_id, "fields", _kept_batch(people.tech.id, typed, sent))
    after = datetime.now(UTC)
    assert reply.status_code == 200, reply.text
    assert _texts(db, job.test_id, TARE, W1) == ["10.0", "36.0"]  # as typed
    event = _one_readings_event(db, job.test_id)
    assert (event.actor, event.actor_id) == ("tech", people.tech.id)  # the typist is the actor
    # computed: typed = arrival - (sent - typed on the tablet's clock) = arrival - 2 h, for the
    # earlier of the two entries; arrival lies between the two readings of the clock around the call
    assert event.typed_at is not None
    assert before - timedelta(hours=2) <= event.typed_at <= after - timedelta(hours=2)
    assert event.at - event.typed_at >= timedelta(hours=2) - timedelta(seconds=1)
    typed_fields = event.after["typed_at"]
    assert set(typed_fields) == {TARE, W1}
    # computed: the second value was typed 30 s after the first, on the same clock
    gap = datetime.fromisoformat(typed_fields[W1]) - datetime.fromisoformat(typed_fields[TARE])
    assert gap == timedelta(seconds=30)


def test_a_tablet_clock_hours_wrong_neither_hides_nor_invents_a_delay(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    _requested_yesterday(db, job.test_id)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    wrong = datetime.now(UTC) + timedelta(hours=3)  # a tablet clock 3 h fast
    before = datetime.now(UTC)
    reply = _post(
        app_client, job.test_id, "fields", _kept_batch(people.tech.id, wrong - timedelta(minutes=10), wrong)
    )
    after = datetime.now(UTC)
    assert reply.status_code == 200, reply.text
    event = _one_readings_event(db, job.test_id)
    # computed: 10 min between typing and sending on the tablet's clock; its 3 h error cancels out
    assert event.typed_at is not None
    assert before - timedelta(minutes=10) <= event.typed_at <= after - timedelta(minutes=10)


def test_entries_sent_within_seconds_of_typing_carry_no_separate_typing_time(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    _requested_yesterday(db, job.test_id)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    sent = datetime.now(UTC)
    batch = _kept_batch(people.tech.id, sent, sent)
    for change in batch["changes"]:  # both typed 2 s before sending: a live connection's round trip
        change["typed_at"] = _iso(sent - LIVE_SLACK + timedelta(seconds=3))
    assert _post(app_client, job.test_id, "fields", batch).status_code == 200
    event = _one_readings_event(db, job.test_id)
    assert event.typed_at is None and "typed_at" not in event.after  # the event's own time says it
    assert "typed_at_ignored" not in event.after


def test_a_typing_stamp_after_the_sending_stamp_is_ignored_but_the_value_is_saved(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    _requested_yesterday(db, job.test_id)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    sent = datetime.now(UTC)
    later = sent + timedelta(hours=1)  # the tablet's clock was stepped back between typing and sending
    batch = {
        "typed_by": people.tech.id,
        "sent_at": _iso(sent),
        "changes": [{"path": W1, "value": "36.0", "base": "", "typed_at": _iso(later)}],
    }
    assert _post(app_client, job.test_id, "fields", batch).status_code == 200
    assert _texts(db, job.test_id, W1) == ["36.0"]  # as typed
    event = _one_readings_event(db, job.test_id)
    assert event.typed_at is None  # no typing time is asserted from a stamp that cannot be one
    assert datetime.fromisoformat(event.after["typed_at_ignored"][W1]) == later  # the claim is kept


def test_a_typing_time_before_the_test_existed_is_ignored(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    sent = datetime.now(UTC)
    batch = _kept_batch(people.tech.id, sent - timedelta(minutes=30), sent)  # the test was made just now
    assert _post(app_client, job.test_id, "fields", batch).status_code == 200
    event = _one_readings_event(db, job.test_id)
    assert event.typed_at is None and set(event.after["typed_at_ignored"]) == {TARE, W1}


def test_a_typing_stamp_without_a_time_zone_is_refused_and_nothing_is_stored(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    batch = {
        "typed_by": people.tech.id,
        "changes": [{"path": W1, "value": "36.0", "base": "", "typed_at": "2026-12-02T10:00:00"}],
    }
    assert _post(app_client, job.test_id, "fields", batch).status_code == 422
    assert _stored(db, job.test_id).readings is None


def test_the_trail_shows_when_an_entry_was_typed_and_when_it_was_received(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    _requested_yesterday(db, job.test_id)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    sent = datetime.now(UTC)
    assert _post(
        app_client, job.test_id, "fields", _kept_batch(people.tech.id, sent - timedelta(minutes=40), sent)
    ).is_success
    event = _one_readings_event(db, job.test_id)
    assert event.typed_at is not None
    sign_in(app_client, "review", PASSWORDS["review"])
    page = app_client.get(f"/jobs/{job.job_id}/trail")
    assert page.status_code == 200
    shown = "%Y-%m-%d %H:%M:%S UTC"  # computed: both times as the trail formats them
    assert f"typed {event.typed_at.strftime(shown)}, received {event.at.strftime(shown)}" in page.text


def test_the_bench_page_names_the_signed_in_person_for_the_tablets_queue(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    page = app_client.get(f"/tests/{job.test_id}").text
    assert f'data-user-id="{people.tech.id}"' in page and 'data-user-name="Tech Person"' in page
    assert f'<script src="/static/signout.js" defer data-signed-in="{people.tech.id}"' in page
    assert f'data-discard="/tests/{job.test_id}/offline-discard"' in page


# -- discarding another person's kept entries ------------------------------------------------------


def _discard(typed_by: int | None, reason: str) -> dict[str, Any]:
    return {
        "typed_by": typed_by,
        "reason": reason,
        "entries": [
            {"path": TARE, "value": "10.0", "typed_at": "2026-12-02T09:15:00Z"},
            {"path": W1, "value": "36,0", "typed_at": "2026-12-02T09:15:30Z"},
        ],
    }


def test_discarding_another_persons_entries_needs_a_reason(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "review", PASSWORDS["review"])
    for reason in ("", "   "):
        reply = _post(app_client, job.test_id, "offline-discard", _discard(people.tech.id, reason))
        assert reply.status_code == 422, reply.text
        assert [e["path"] for e in reply.json()["errors"]] == ["reason"]
    assert audit_events(db, "lab_test", job.test_id, "discard_offline") == []


def test_a_discard_is_recorded_with_the_values_their_typist_and_the_reason(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    second = create_user(db, people.admin, "tech2", "Second Technician", "technician", "tech2-password-1")
    sign_in(app_client, "tech2", "tech2-password-1")
    reason = "Tablet handed over mid-test; the specimen was re-weighed"
    reply = _post(app_client, job.test_id, "offline-discard", _discard(people.tech.id, reason))
    assert reply.status_code == 200, reply.text
    assert reply.json()["discarded"] == 2
    (event,) = audit_events(db, "lab_test", job.test_id, "discard_offline")
    assert (event.actor, event.actor_id, event.reason) == ("tech2", second.id, reason)  # the discarder acts
    # ISO/IEC 17025:2017 cl. 7.5.2: what is dropped stays readable, with who typed it and why it went
    assert event.before == {
        "typed_by": {"id": people.tech.id, "username": "tech", "full_name": "Tech Person"},
        "entries": [
            {"path": TARE, "value": "10.0", "typed_at": "2026-12-02T09:15:00+00:00"},
            {"path": W1, "value": "36,0", "typed_at": "2026-12-02T09:15:30+00:00"},
        ],
    }
    assert event.after == {"discarded": 2}
    test = _stored(db, job.test_id)
    assert (test.readings, test.version) == (None, 1)  # the test does not change (computed: fresh test)


def test_entries_kept_before_the_tablet_recorded_their_typist_can_be_discarded(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    reply = _post(app_client, job.test_id, "offline-discard", _discard(None, "Typist not known"))
    assert reply.status_code == 200, reply.text
    (event,) = audit_events(db, "lab_test", job.test_id, "discard_offline")
    assert event.before is not None and event.before["typed_by"] is None


def test_a_discard_of_a_field_the_sheet_does_not_have_is_refused(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "review", PASSWORDS["review"])
    body = _discard(people.tech.id, "left over")
    body["entries"].append({"path": "liquid_limit.balance.resolution_g", "value": "0.01"})
    reply = _post(app_client, job.test_id, "offline-discard", body)
    assert reply.status_code == 422
    assert audit_events(db, "lab_test", job.test_id, "discard_offline") == []


def test_a_discard_with_no_entries_is_refused(app_client: TestClient, db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "review", PASSWORDS["review"])
    body = {"typed_by": people.tech.id, "reason": "nothing", "entries": []}
    reply = _post(app_client, job.test_id, "offline-discard", body)
    assert reply.status_code == 422 and [e["path"] for e in reply.json()["errors"]] == ["entries"]
