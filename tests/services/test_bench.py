"""Saving readings and handing tests in: refusals store nothing, drafts keep what is typed."""

from __future__ import annotations

import copy

import pytest
from sqlmodel import func, select

from server.db.session import Database
from server.db.tables import AuditEvent, LabTest
from server.services import bench
from server.services.errors import Conflict, Invalid
from tests.conftest import People
from tests.support.bad_inputs import BAD_ATTERBERG
from tests.support.scenario import ATTERBERG, small_job


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
