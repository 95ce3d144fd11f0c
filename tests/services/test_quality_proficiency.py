"""Proficiency round entries with z and verdict (server/services/quality_proficiency.py)."""

from __future__ import annotations

from datetime import date

import pytest
from sqlmodel import select

from server.db.session import Database
from server.db.tables import AuditEvent
from server.services import bench, quality_proficiency, review
from server.services.errors import Invalid
from server.services.quality_proficiency import RoundForm
from tests.conftest import PASSWORDS, People
from tests.support.scenario import ATTERBERG, small_job


def _form(**changes: object) -> RoundForm:
    values: dict[str, object] = {
        "scheme": "Regional soils scheme",
        "round_code": "R-2026-2",
        "method": "atterberg",
        "result_key": "liquid_limit",
        "assigned_value": "38.0",
        "sigma_pt": "1.5",
        "round_date": "2026-11-20",
        "result": "41.0",
    }
    values.update(changes)
    return RoundForm(**values)  # type: ignore[arg-type]


def test_a_typed_result_gets_its_z_and_verdict(db: Database, people: People) -> None:
    quality_proficiency.add_round(db, people.review, _form())
    (row,) = quality_proficiency.rounds(db)
    assert row.z == pytest.approx(2.0)  # (41.0 - 38.0) / 1.5 (ISO 13528:2015 cl. 9.4, hand-worked)
    assert row.verdict == "satisfactory"  # |z| <= 2 (cl. 9.4.1, from memory)
    assert row.entry.round_date == date(2026, 11, 20)
    with db.session() as s:
        (event,) = s.exec(select(AuditEvent).where(AuditEvent.entity == "proficiency_round")).all()
    assert (event.action, event.actor_id) == ("create", people.review.id)


def test_a_result_copied_from_an_approved_test_keeps_the_tests_value(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    saved = bench.save_readings(db, people.tech, job.test_id, ATTERBERG, 1)
    submitted = bench.submit(db, people.tech, job.test_id, saved.test.version)
    approved = review.approve(db, people.review, job.test_id, PASSWORDS["review"], submitted.version)
    entry = quality_proficiency.add_round(db, people.review, _form(result="", test_id=job.test_id))
    # LL of the Das trials, 39.67 at full precision (tests/support/scenario.py, least squares)
    assert entry.result == pytest.approx((approved.results or {})["liquid_limit"])
    assert entry.result == pytest.approx(39.67, abs=0.01)


def test_every_bad_field_is_named_and_nothing_is_stored(db: Database, people: People) -> None:
    with pytest.raises(Invalid) as refused:
        quality_proficiency.add_round(
            db,
            people.review,
            _form(
                scheme="",
                method="no-such",
                sigma_pt="0",
                assigned_value="abc",
                round_date="20/11/2026",
                result="",
            ),
        )
    fields = {e.loc[0] for e in refused.value.errors}
    assert fields == {"scheme", "method", "sigma_pt", "assigned_value", "round_date", "result"}
    assert quality_proficiency.rounds(db) == []


def test_a_test_that_is_not_approved_is_refused(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    with pytest.raises(Invalid) as refused:
        quality_proficiency.add_round(db, people.review, _form(result="", test_id=job.test_id))
    assert refused.value.errors[0].loc == ("test_id",)


def test_a_round_entered_twice_is_refused_on_the_round_field(db: Database, people: People) -> None:
    quality_proficiency.add_round(db, people.review, _form())
    with pytest.raises(Invalid) as refused:
        quality_proficiency.add_round(db, people.review, _form(result="40"))
    assert refused.value.errors[0].loc == ("round_code",)


def test_an_update_is_audited_with_before_and_after(db: Database, people: People) -> None:
    entry = quality_proficiency.add_round(db, people.review, _form())
    quality_proficiency.update_round(db, people.admin, entry.id or 0, _form(result="43.0"), "typing slip")
    (row,) = quality_proficiency.rounds(db)
    assert row.z == pytest.approx(3.333, abs=1e-3)  # (43 - 38) / 1.5, hand-worked
    assert row.verdict == "unsatisfactory"  # |z| >= 3 (ISO 13528:2015 cl. 9.4.1, from memory)
    with db.session() as s:
        event = s.exec(select(AuditEvent).where(AuditEvent.action == "update")).one()
    assert (event.before or {})["result"] == 41.0 and (event.after or {})["result"] == 43.0
    assert event.reason == "typing slip"
