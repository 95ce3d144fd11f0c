"""Saving readings and handing tests in: refusals store nothing, drafts keep what is typed."""

from __future__ import annotations

import copy
import threading

import pytest
from sqlmodel import col, func, select

from server.db.session import Database
from server.db.tables import AuditEvent, LabTest, User
from server.services import bench
from server.services.errors import Conflict, Invalid
from tests.conftest import People
from tests.support.bad_inputs import BAD_ATTERBERG
from tests.support.scenario import ATTERBERG, LL_TRIALS, PL_DETERMINATIONS, small_job


def _state(db: Database, test_id: int) -> tuple[LabTest, int]:
    with db.session() as s:
        test = s.get(LabTest, test_id)
        events = s.exec(select(func.count()).select_from(AuditEvent)).one()
    assert test is not None
    return test, int(events)


@pytest.mark.parametrize("case", sorted(set(BAD_ATTERBERG) - {"fewer than three multipoint trials"}))
def test_refuses_a_wrong_value_and_stores_nothing(db: Database, people: People, case: str) -> None:
    job = small_job(db, people.admin)
    before, events_before = _state(db, job.test_id)
    readings, path, _ = BAD_ATTERBERG[case]
    with pytest.raises(Invalid) as refused:
        bench.save_readings(db, people.tech, job.test_id, readings, before.version)
    assert ("readings", *path) in [e.loc for e in refused.value.errors]
    after, events_after = _state(db, job.test_id)
    assert (after.readings, after.version, after.status, events_after) == (
        None,
        before.version,
        "requested",
        events_before,
    )


def test_keeps_an_unfinished_sheet_as_a_draft_but_will_not_hand_it_in(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    two_trials = copy.deepcopy(ATTERBERG)
    two_trials["liquid_limit"]["trials"] = two_trials["liquid_limit"]["trials"][:2]
    saved = bench.save_readings(db, people.tech, job.test_id, two_trials, 1)
    assert saved.test.status == "draft" and saved.test.readings == two_trials
    # each water content is computed while the set is unfinished: 42.0 % (Das problem set, trial 1)
    assert saved.test.results is not None
    assert saved.test.results["liquid_limit_trials"][0]["water_content"] == pytest.approx(42.0)
    with pytest.raises(Invalid) as refused:
        bench.submit(db, people.tech, job.test_id, saved.test.version)
    assert any("at least 3" in e.message for e in refused.value.errors)
    assert _state(db, job.test_id)[0].status == "draft"


def test_hands_in_a_complete_sheet_with_its_results(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    saved = bench.save_readings(db, people.tech, job.test_id, ATTERBERG, 1)
    test = bench.submit(db, people.tech, job.test_id, saved.test.version)
    assert test.status == "submitted" and test.submitted_at is not None
    assert test.results is not None and round(test.results["liquid_limit"]) == 40  # Das: LL 39.67 -> 40


def test_a_stale_version_is_refused_and_the_newer_readings_are_kept(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    first = bench.save_readings(db, people.tech, job.test_id, ATTERBERG, 1)
    other = copy.deepcopy(ATTERBERG)
    other["water_content"]["determinations"][0]["wet_tare_g"] = 35.0
    with pytest.raises(Conflict):
        bench.save_readings(db, people.review, job.test_id, other, 1)  # typed against version 1
    assert _state(db, job.test_id)[0].readings == first.test.readings


def test_every_saved_change_is_an_audit_event_that_replays_to_the_readings(
    db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    versions = []
    v = 1
    for wet in (36.0, 35.5, 36.2):
        readings = copy.deepcopy(ATTERBERG)
        readings["water_content"]["determinations"][0]["wet_tare_g"] = wet
        v = bench.save_readings(db, people.tech, job.test_id, readings, v).test.version
        versions.append(readings)
    with db.session() as s:
        events = s.exec(
            select(AuditEvent)
            .where(
                AuditEvent.entity == "lab_test",
                AuditEvent.entity_id == job.test_id,
                AuditEvent.action == "readings",
            )
            .order_by(AuditEvent.id)
        ).all()
        stored = s.get(LabTest, job.test_id)
    assert [e.after["readings"] for e in events if e.after] == versions
    assert events[-1].after is not None and events[-1].after["readings"] == stored.readings  # type: ignore[union-attr]
    assert events[1].before is not None and events[1].before["readings"] == versions[0]


# -- saving field by field (the bench page's autosave) ------------------------------------------

W1 = "water_content.determinations.0.wet_tare_g"


def _readings_events(db: Database, test_id: int) -> list[AuditEvent]:
    with db.session() as s:
        return list(
            s.exec(
                select(AuditEvent)
                .where(
                    AuditEvent.entity == "lab_test",
                    AuditEvent.entity_id == test_id,
                    AuditEvent.action == "readings",
                )
                .order_by(col(AuditEvent.id))
            ).all()
        )


def test_a_field_saved_against_what_was_seen_is_stored_with_an_event_that_replays(
    db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    saved = bench.save_changes(db, people.tech, job.test_id, [bench.Change("fines", 86.0, base=None)])
    assert saved.changed and saved.paths == ["fines"] and saved.test.status == "draft"
    again = bench.save_changes(db, people.tech, job.test_id, [bench.Change("fines", 87.0, base=86.0)])
    assert again.test.version == saved.test.version + 1 and again.test.readings == {"fines": 87.0}
    events = _readings_events(db, job.test_id)
    assert [e.after["readings"] for e in events if e.after] == [{"fines": 86.0}, {"fines": 87.0}]
    assert events[-1].after is not None and events[-1].after["fields"] == ["fines"]


def test_a_field_changed_meanwhile_on_another_device_is_refused_with_both_values(
    db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    bench.save_changes(db, people.tech, job.test_id, [bench.Change(W1, 36.0, base=None)])  # tablet A
    test, events = _state(db, job.test_id)
    with pytest.raises(bench.FieldConflicts) as refused:  # tablet B saw the field empty
        bench.save_changes(db, people.review, job.test_id, [bench.Change(W1, 36.5, base=None)])
    assert refused.value.conflicts == [bench.FieldConflict(W1, 36.0, 36.5)]
    after, events_after = _state(db, job.test_id)
    assert (after.readings, after.version, events_after) == (test.readings, test.version, events)
    kept = bench.save_changes(db, people.review, job.test_id, [bench.Change(W1, 36.5, base=36.0)])
    assert kept.test.readings == {"water_content": {"determinations": [{"wet_tare_g": 36.5}]}}


def test_two_devices_typing_different_fields_of_one_test_both_keep_their_values(
    db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    bench.save_changes(db, people.tech, job.test_id, [bench.Change("fines", 86.0, base=None)])
    bench.save_changes(db, people.review, job.test_id, [bench.Change("sand", 12.0, base=None)])
    bench.save_changes(db, people.tech, job.test_id, [bench.Change("gravel", 2.0, base=None)])
    assert _state(db, job.test_id)[0].readings == {"fines": 86.0, "sand": 12.0, "gravel": 2.0}


def test_the_same_value_typed_on_two_devices_is_no_conflict(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    bench.save_changes(db, people.tech, job.test_id, [bench.Change("fines", 86.0, base=None)])
    saved = bench.save_changes(db, people.review, job.test_id, [bench.Change("fines", 86, base=None)])
    assert not saved.changed and _state(db, job.test_id)[0].readings == {"fines": 86.0}


def test_a_field_that_makes_a_stored_one_wrong_is_refused_and_nothing_is_stored(
    db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    det = "water_content.determinations.0."
    first = [bench.Change(det + k, v, base=None) for k, v in (("tare_g", 10.0), ("dry_tare_g", 30.0))]
    bench.save_changes(db, people.tech, job.test_id, first)
    before, events = _state(db, job.test_id)
    with pytest.raises(Invalid) as refused:  # ASTM D2216: dry mass plus tare cannot exceed wet mass plus tare
        bench.save_changes(db, people.tech, job.test_id, [bench.Change(det + "wet_tare_g", 29.0, base=None)])
    assert [e.loc for e in refused.value.errors] == [
        ("readings", "water_content", "determinations", 0, "dry_tare_g")
    ]
    after, events_after = _state(db, job.test_id)
    assert (after.readings, after.version, events_after) == (before.readings, before.version, events)


def test_saving_what_is_already_stored_changes_nothing(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    bench.save_changes(db, people.tech, job.test_id, [bench.Change("fines", 86.0, base=None)])
    before, events = _state(db, job.test_id)
    saved = bench.save_changes(db, people.tech, job.test_id, [bench.Change("fines", 86.0, base=86.0)])
    after, events_after = _state(db, job.test_id)
    assert not saved.changed
    assert (after.version, after.readings, events_after) == (before.version, before.readings, events)


def test_a_path_that_names_no_field_is_refused(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    with pytest.raises(Invalid):
        bench.save_changes(db, people.tech, job.test_id, [bench.Change("trials..blows", 25, base=None)])


def test_a_handed_in_test_takes_no_more_field_changes(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    saved = bench.save_readings(db, people.tech, job.test_id, ATTERBERG, 1)
    bench.submit(db, people.tech, job.test_id, saved.test.version)
    with pytest.raises(Conflict, match="cannot be edited"):
        bench.save_changes(db, people.tech, job.test_id, [bench.Change("fines", 86.0, base=None)])


def test_hands_in_the_draft_saved_field_by_field(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    fields = [("liquid_limit.method", "ll-cup-multipoint")]
    fields += [(f"liquid_limit.trials.{i}.{k}", v) for i, t in enumerate(LL_TRIALS) for k, v in t.items()]
    pl = "plastic_limit.determinations"
    fields += [(f"{pl}.{i}.{k}", v) for i, d in enumerate(PL_DETERMINATIONS) for k, v in d.items()]
    changes = [bench.Change(path, value, base=None) for path, value in fields]
    version = 1
    for change in changes:  # one request per field, as the bench page sends them
        version = bench.save_changes(db, people.tech, job.test_id, [change]).test.version
    test = bench.submit(db, people.tech, job.test_id, version)
    assert test.status == "submitted"
    assert test.results is not None and round(test.results["liquid_limit"]) == 40  # Das: LL 39.67 -> 40
    assert round(test.results["plastic_limit"]) == 21  # Liu & Evett: PL 21.2 -> 21
    assert len(_readings_events(db, job.test_id)) == len(changes)


def test_two_devices_saving_different_fields_at_the_same_moment_both_land(
    db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    start = threading.Barrier(2)
    failures: list[BaseException] = []

    def type_in(who: User, path: str, value: float) -> None:
        try:
            start.wait(timeout=10)
            bench.save_changes(db, who, job.test_id, [bench.Change(path, value, base=None)])
        except BaseException as exc:  # noqa: BLE001 - reported by the assertion below
            failures.append(exc)

    threads = [
        threading.Thread(target=type_in, args=(people.tech, "fines", 86.0)),
        threading.Thread(target=type_in, args=(people.review, "sand", 12.0)),
    ]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=30)
    assert not failures
    test = _state(db, job.test_id)[0]
    assert test.readings == {"fines": 86.0, "sand": 12.0} and test.version == 3
