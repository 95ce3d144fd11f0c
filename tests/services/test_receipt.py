"""Booking a delivery in, row by row: scheduled samples marked received, unscheduled ones
registered there and then, each receipt recording when, by whom, in what condition and where
it is stored (ISO/IEC 17025:2017 cl. 7.4). A refused row stores nothing.
The scenario (Marlow Vale Civils, job MV-2026-014) is fictional.

Sources named beside the check values, in short: "field-level" is DESIGN.md section 7 (errors
carry the field they refuse); "one transaction" is STYLE.md (one transaction per use-case, so a
refusal stores nothing); "audit" is DESIGN.md section 4 (who, what, before, after, why);
"as given" is a value this test typed in; "the schedule's" is a value ``_scheduled`` registered.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime, timedelta

import pytest
from sqlmodel import select

from server.db.session import Database
from server.db.tables import LabTest, Location, Sample
from server.services import bench, jobs, samples, users
from server.services.errors import Invalid, NotFound
from server.services.receipt import ReceiptRow, receive_sample
from server.workflow.vocabulary import CONDITIONS
from tests.conftest import People
from tests.support.records import audit_events, refused_fields, row_count, row_counts
from tests.support.scenario import NATURAL

DELIVERED = datetime(2026, 11, 30, 8, 30, tzinfo=UTC)  # a morning in the past of the test run (fictional)
DELIVERED_JSON = "2026-11-30T08:30:00Z"  # DELIVERED as the audit's JSON writes it (pydantic, computed)


def _sample(db: Database, job_id: int, code: str) -> Sample:
    with db.session() as s:
        return s.exec(select(Sample).where(Sample.job_id == job_id, Sample.code == code)).one()


@dataclass
class Scheduled:
    job_id: int
    bh01: int
    u1: int  # BH01-U1, scheduled with the Atterberg set requested


def _scheduled(db: Database, people: People) -> Scheduled:
    """Job MV-2026-014 whose schedule lists BH01-U1 (U100, 1.20-1.65 m, "Firm brown CLAY",
    remark "sealed", Atterberg set requested), not yet delivered."""
    client = jobs.create_client(db, people.admin, "Marlow Vale Civils")
    job = jobs.create_job(db, people.admin, client.id or 0, "MV-2026-014", "Harrow Lane culvert")
    bh01 = samples.add_location(db, people.admin, job.id or 0, "BH01")
    u1 = samples.add_sample(
        db,
        people.admin,
        bh01.id or 0,
        "BH01-U1",
        1.20,
        1.65,
        "U100",
        "Firm brown CLAY",
        "sealed",
        ["atterberg"],
    )
    return Scheduled(job.id or 0, bh01.id or 0, u1.id or 0)


def test_a_delivery_of_several_rows_receives_the_scheduled_and_registers_the_rest(
    db: Database, people: People
) -> None:
    job = _scheduled(db, people)
    rows = [
        ReceiptRow("BH01-U1", condition="intact", stored_at="Cold room, rack 3"),  # on the schedule
        ReceiptRow("BH01-D2", "BH01", "2,00", "", "disturbed", "Brown sandy GRAVEL", "intact", "Shelf B"),
        ReceiptRow(
            "TP01-B1",
            "TP01",
            0.5,
            1.0,
            "bulk",
            "Made ground",
            "damaged",
            "Bay 2",
            "trial pit",
            ("water-content",),
        ),
    ]
    done = [receive_sample(db, people.tech, job.job_id, row, DELIVERED) for row in rows]
    # scheduled: marked received; the others registered at receipt (receipt.Receipt.created)
    expected = [("BH01-U1", False), ("BH01-D2", True), ("TP01-B1", True)]  # as the rows were typed
    assert [(r.sample.code, r.created) for r in done] == expected
    with db.session() as s:
        locations = {
            loc.code: loc.kind for loc in s.exec(select(Location).where(Location.job_id == job.job_id))
        }
        delivered = {
            x.code: (x.depth_from_m, x.depth_to_m, x.condition, x.stored_at, x.received_by_id, x.received_at)
            for x in s.exec(select(Sample).where(Sample.job_id == job.job_id))
        }
        methods = [t.method for t in s.exec(select(LabTest).where(LabTest.sample_id == done[2].sample.id))]
    assert locations == {"BH01": "borehole", "TP01": "trial pit"}  # TP01 made by its row, kind as given
    tech = people.tech.id  # the receiver when none is named (receipt.receive_sample)
    # depth the schedule's, the rest as given
    assert delivered["BH01-U1"] == (1.20, 1.65, "intact", "Cold room, rack 3", tech, DELIVERED)
    # "2,00" read with its decimal comma; a blank base is the top (samples.SampleForm)
    assert delivered["BH01-D2"] == (2.0, 2.0, "intact", "Shelf B", tech, DELIVERED)
    assert delivered["TP01-B1"] == (0.5, 1.0, "damaged", "Bay 2", tech, DELIVERED)  # as given
    assert methods == ["water-content"]  # as given on the row


def test_a_scheduled_sample_received_by_its_code_alone_keeps_the_schedule_and_is_audited(
    db: Database, people: People
) -> None:
    job = _scheduled(db, people)
    receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-U1", stored_at="Cold room"), DELIVERED)
    stored = _sample(db, job.job_id, "BH01-U1")
    # blank location, depth and type keep the schedule's (receipt.ReceiptRow docstring)
    assert stored.location_id == job.bh01  # the schedule's
    assert (stored.depth_from_m, stored.depth_to_m) == (1.20, 1.65)  # the schedule's
    assert stored.sample_type == "U100"  # the schedule's
    assert (stored.description, stored.remarks) == ("Firm brown CLAY", "sealed")  # the schedule's
    assert (stored.condition, stored.received_at) == ("intact", DELIVERED)  # ReceiptRow's default; as given
    event = audit_events(db, "sample", job.u1)[-1]
    assert (event.action, event.actor) == ("receive", "tech")  # audit (receipt._receive_scheduled)
    assert event.before is not None and event.after is not None  # audit
    before = (event.before["received_at"], event.before["condition"], event.before["stored_at"])
    assert before == (None, "", "")  # not received yet (tables.Sample defaults)
    after = (event.after["received_at"], event.after["condition"], event.after["stored_at"])
    assert after == (DELIVERED_JSON, "intact", "Cold room")  # as given
    assert event.after["received_by_id"] == people.tech.id  # the receiver when none is named
    assert (row_count(db, Sample), row_count(db, Location)) == (1, 1)  # nothing new registered (as scheduled)


def test_what_the_delivery_shows_differently_corrects_a_scheduled_sample_with_nothing_entered(
    db: Database, people: People
) -> None:
    job = _scheduled(db, people)
    row = ReceiptRow("BH01-U1", "BH01", "1,25", "1,70", "UT100", "Firm brown silty CLAY", "intact", "Rack 1")
    receive_sample(db, people.tech, job.job_id, row, DELIVERED)
    stored = _sample(db, job.job_id, "BH01-U1")
    assert (stored.depth_from_m, stored.depth_to_m) == (1.25, 1.70)  # decimal comma (fields.Checks.number)
    assert (stored.sample_type, stored.description) == ("UT100", "Firm brown silty CLAY")  # as given
    assert stored.remarks == "sealed"  # a receipt row has no remarks: the schedule's stay (receipt.py)


def test_a_scheduled_sample_with_readings_received_with_another_depth_is_refused(
    db: Database, people: People
) -> None:
    job = _scheduled(db, people)
    with db.session() as s:
        test = s.exec(select(LabTest).where(LabTest.sample_id == job.u1)).one()
    readings = {"water_content": {"determinations": NATURAL}}  # a first part of the Atterberg set
    bench.save_readings(db, people.tech, test.id or 0, readings, test.version)
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-U1", depth_from_m=1.5), DELIVERED)
    assert refused_fields(refused) == {"depth_from_m"}  # identity fixed once entered (samples.IDENTITY)
    assert row_counts(db) == before  # one transaction
    assert _sample(db, job.job_id, "BH01-U1").received_at is None  # one transaction


def test_a_scheduled_sample_with_readings_received_at_another_location_is_refused_at_the_location(
    db: Database, people: People
) -> None:
    job = _scheduled(db, people)
    with db.session() as s:
        test = s.exec(select(LabTest).where(LabTest.sample_id == job.u1)).one()
    readings = {"water_content": {"determinations": NATURAL}}  # a first part of the Atterberg set
    bench.save_readings(db, people.tech, test.id or 0, readings, test.version)
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-U1", "BH02"), DELIVERED)
    # the receipt sheet's own field, where the page shows the message (ReceiptRow.location)
    assert refused_fields(refused) == {"location"}
    assert row_counts(db) == before  # one transaction: no BH02
    assert _sample(db, job.job_id, "BH01-U1").location_id == job.bh01  # the schedule's


def test_a_sample_is_received_once(db: Database, people: People) -> None:
    job = _scheduled(db, people)
    receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-U1", stored_at="Rack 1"), DELIVERED)
    before = row_counts(db)
    later = DELIVERED + timedelta(hours=3)
    with pytest.raises(Invalid) as refused:
        # the second row also names a new borehole, which must not be left behind either
        receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-U1", "BH09", stored_at="Rack 9"), later)
    assert refused_fields(refused) == {"code"}  # field-level (receipt._receive_scheduled)
    assert "received already" in refused.value.errors[0].message  # receipt._receive_scheduled
    assert row_counts(db) == before  # one transaction: no BH09, no event
    stored = _sample(db, job.job_id, "BH01-U1")
    assert (stored.received_at, stored.stored_at) == (DELIVERED, "Rack 1")  # the first receipt's, as given


def test_a_new_sample_received_twice_is_refused_the_second_time(db: Database, people: People) -> None:
    job = _scheduled(db, people)
    row = ReceiptRow("BH01-D5", "BH01", 5.0, 5.5, "disturbed")
    receive_sample(db, people.tech, job.job_id, row, DELIVERED)
    with pytest.raises(Invalid) as refused:
        receive_sample(db, people.tech, job.job_id, row, DELIVERED)
    assert refused_fields(refused) == {"code"}  # received already (receipt._receive_scheduled)
    assert row_count(db, Sample) == 2  # BH01-U1 (scheduled) and one BH01-D5


@pytest.mark.parametrize("condition", list(CONDITIONS))  # every id of vocabulary.CONDITIONS
def test_each_condition_of_the_vocabulary_is_recorded(db: Database, people: People, condition: str) -> None:
    job = _scheduled(db, people)
    receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-U1", condition=condition), DELIVERED)
    assert _sample(db, job.job_id, "BH01-U1").condition == condition  # as given


@pytest.mark.parametrize("condition", ["", "soggy", "ok"])  # not ids of vocabulary.CONDITIONS
def test_a_condition_outside_the_vocabulary_is_refused_at_its_field(
    db: Database, people: People, condition: str
) -> None:
    job = _scheduled(db, people)
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-U1", condition=condition), DELIVERED)
    assert refused_fields(refused) == {"condition"}  # field-level
    assert row_counts(db) == before  # one transaction


def test_the_receiver_is_recorded_and_must_be_an_active_member_of_the_laboratory(
    db: Database, people: People
) -> None:
    job = _scheduled(db, people)
    users.set_active(db, people.admin, people.review2.id or 0, False, "left the laboratory")
    before = row_counts(db)
    for receiver in (people.review2.id or 0, 9999):  # inactive; no such user in a fresh database
        with pytest.raises(Invalid) as refused:
            receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-U1"), DELIVERED, receiver)
        assert refused_fields(refused) == {"received_by_id"}  # field-level (receipt.receive_sample)
        new_row = ReceiptRow("BH01-D2", "BH02", 2.0, sample_type="bulk")
        with pytest.raises(Invalid) as refused:
            receive_sample(db, people.tech, job.job_id, new_row, DELIVERED, receiver)
        assert refused_fields(refused) == {"received_by_id"}  # field-level (receipt.receive_sample)
    assert row_counts(db) == before  # one transaction: neither row, nor BH02
    receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-U1"), DELIVERED, people.review.id)
    assert _sample(db, job.job_id, "BH01-U1").received_by_id == people.review.id  # as given
    assert audit_events(db, "sample", job.u1)[-1].actor == "tech"  # audit: who typed it in


def test_a_time_of_receipt_in_the_future_is_refused(db: Database, people: People) -> None:
    job = _scheduled(db, people)
    before = row_counts(db)
    tomorrow = datetime.now(UTC) + timedelta(days=1)  # beyond FUTURE_SLACK, 10 min (receipt.py)
    with pytest.raises(Invalid) as refused:
        receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-U1"), tomorrow)
    assert refused_fields(refused) == {"received_at"}  # field-level
    assert row_counts(db) == before  # one transaction


def test_a_clock_a_few_minutes_fast_and_a_blank_time_are_accepted(db: Database, people: People) -> None:
    job = _scheduled(db, people)
    fast = datetime.now(UTC) + timedelta(
        minutes=2
    )  # within FUTURE_SLACK, 10 min (receipt.py, common practice)
    receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-U1"), fast)
    assert _sample(db, job.job_id, "BH01-U1").received_at is not None  # accepted (receipt.FUTURE_SLACK)
    start = datetime.now(UTC)
    receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-D2", "BH01", 2.0, sample_type="bulk"))
    received = _sample(db, job.job_id, "BH01-D2").received_at
    assert received is not None  # a blank time is now (receipt.receive_sample)
    assert start <= received <= datetime.now(UTC)  # a blank time is now (receipt.receive_sample)


def test_a_withdrawn_scheduled_sample_cannot_be_received(db: Database, people: People) -> None:
    job = _scheduled(db, people)
    samples.withdraw_sample(db, people.review, job.u1, "Cancelled by the client's engineer")
    before = row_counts(db)
    with pytest.raises(Invalid) as refused:
        receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-U1"), DELIVERED)
    assert refused_fields(refused) == {"code"}  # field-level (receipt._receive_scheduled)
    assert row_counts(db) == before  # one transaction
    assert _sample(db, job.job_id, "BH01-U1").received_at is None  # one transaction


def test_a_new_sample_row_with_several_mistakes_names_each_field_and_stores_nothing(
    db: Database, people: People
) -> None:
    job = _scheduled(db, people)
    before = row_counts(db)
    row = ReceiptRow(
        "BH02-D1",  # not on the schedule, so it needs a location and a depth (receipt.py)
        "",  # blank location: required (fields.Checks.code)
        "abc",  # not a number
        "",  # blank base: the top's, but the top was refused (samples.sample_values)
        "bucket",  # not in vocabulary.SAMPLE_TYPES
        condition="soaked",  # not in vocabulary.CONDITIONS
        stored_at="S" * 65,  # STORE_MAX 64 (receipt.py)
        location_kind="shaft",  # not in vocabulary.LOCATION_KINDS
    )
    with pytest.raises(Invalid) as refused:
        receive_sample(db, people.tech, job.job_id, row, datetime.now(UTC) + timedelta(hours=2))  # future
    # "location" and "location_kind" are the receipt sheet's names for the location's code and kind
    everything = {
        "location",
        "location_kind",
        "depth_from_m",
        "sample_type",
        "condition",
        "stored_at",
        "received_at",
    }
    assert refused_fields(refused) == everything  # field-level, all at once (fields.Checks)
    assert row_counts(db) == before  # one transaction


def test_a_new_sample_needs_its_depth_and_type_even_when_the_rest_is_right(
    db: Database, people: People
) -> None:
    job = _scheduled(db, people)
    with pytest.raises(Invalid) as refused:
        receive_sample(
            db, people.tech, job.job_id, ReceiptRow("BH01-D2", "BH01", sample_type="bulk"), DELIVERED
        )
    assert refused_fields(refused) == {"depth_from_m"}  # required (samples.sample_values)
    with pytest.raises(Invalid) as refused:
        receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-D2", "BH01", 2.0), DELIVERED)
    # no schedule value to keep, and ReceiptRow's type defaults to blank (receipt.ReceiptRow)
    assert refused_fields(refused) == {"sample_type"}  # field-level
    assert row_count(db, Sample) == 1  # one transaction: BH01-U1 alone, as scheduled


@pytest.mark.parametrize(
    "top",
    [
        "NaN",  # not a finite number (fields.Checks.number)
        "inf",  # not a finite number (fields.Checks.number)
        "1e400",  # overflows to infinity in a double (IEEE 754, computed)
        "1000,5",  # beyond DEPTH_MAX_M 1000 m (schedule.py, common practice)
    ],
)
def test_a_bad_depth_at_receipt_is_refused_like_anywhere_else(db: Database, people: People, top: str) -> None:
    job = _scheduled(db, people)
    with pytest.raises(Invalid) as refused:
        receive_sample(db, people.tech, job.job_id, ReceiptRow("BH01-D2", "BH01", top, sample_type="bulk"))
    assert refused_fields(refused) == {"depth_from_m"}  # field-level


def test_an_unknown_method_on_a_row_leaves_no_sample_and_no_location_behind(
    db: Database, people: People
) -> None:
    job = _scheduled(db, people)
    before = row_counts(db)
    # "slake" is not one of server.engine.METHODS
    row = ReceiptRow("TP01-B1", "TP01", 0.5, 1.0, "bulk", location_kind="trial pit", methods=("slake",))
    with pytest.raises(Invalid) as refused:
        receive_sample(db, people.tech, job.job_id, row, DELIVERED)
    assert refused_fields(refused) == {"methods"}  # field-level (jobs.requests_in)
    assert row_counts(db) == before  # one transaction: no TP01, no TP01-B1


def test_a_row_requests_only_the_tests_the_sample_does_not_have(db: Database, people: People) -> None:
    job = _scheduled(db, people)
    row = ReceiptRow("BH01-U1", methods=("atterberg", "water-content"))
    receive_sample(db, people.tech, job.job_id, row, DELIVERED)
    with db.session() as s:
        methods = sorted(t.method for t in s.exec(select(LabTest).where(LabTest.sample_id == job.u1)))
    # the schedule's Atterberg set is not doubled (jobs.requests_in skip_existing)
    assert methods == ["atterberg", "water-content"]


def test_a_sample_registered_at_receipt_is_audited_as_created_with_its_receipt(
    db: Database, people: People
) -> None:
    job = _scheduled(db, people)
    row = ReceiptRow("TP01-B1", "TP01", 0.5, 1.0, "bulk", condition="leaking", location_kind="trial pit")
    done = receive_sample(db, people.tech, job.job_id, row, DELIVERED)
    (location_event,) = [
        e for e in audit_events(db, "location") if e.after and e.after["code"] == "TP01"
    ]  # one
    assert (location_event.action, location_event.actor) == ("create", "tech")  # audit
    (event,) = audit_events(db, "sample", done.sample.id)  # one event: the create carries the receipt
    assert (event.action, event.actor, event.before) == ("create", "tech", None)  # audit (receipt.py)
    assert event.after is not None
    after = (event.after["condition"], event.after["received_at"], event.after["received_by_id"])
    assert after == ("leaking", DELIVERED_JSON, people.tech.id)  # as given; the receiver when none is named


def test_a_receipt_for_a_job_that_does_not_exist_is_refused(db: Database, people: People) -> None:
    with pytest.raises(NotFound):  # no job 9999 in a fresh database (receipt.receive_sample)
        receive_sample(
            db, people.tech, 9999, ReceiptRow("BH01-U1", "BH01", 1.2, sample_type="U100"), DELIVERED
        )
    assert row_count(db, Sample) == 0  # nothing stored
