"""The reference soil register and its samples (server/services/quality_references.py)."""

from __future__ import annotations

import pytest
from sqlmodel import select

from server.db.session import Database
from server.db.tables import AuditEvent, ReferenceSample
from server.services import quality_references as refs
from server.services.errors import Conflict, Invalid
from tests.conftest import People
from tests.support.scenario import small_job


def _events(db: Database, entity: str) -> list[AuditEvent]:
    with db.session() as s:
        return list(s.exec(select(AuditEvent).where(AuditEvent.entity == entity).order_by(AuditEvent.id)))


def test_a_reference_soil_is_added_with_its_assigned_values_and_audited(db: Database, people: People) -> None:
    soil = refs.add_soil(
        db, people.review, "rs-1", "Grey clay stock", "", {"atterberg": {"liquid_limit": 45}}
    )
    assert (soil.code, soil.assigned_values) == ("RS-1", {"atterberg": {"liquid_limit": 45.0}})
    (event,) = _events(db, "reference_soil")
    assert (event.action, event.actor_id, event.after and event.after["code"]) == (
        "create",
        people.review.id,
        "RS-1",
    )


def test_a_bad_entry_is_refused_field_by_field_and_nothing_is_stored(db: Database, people: People) -> None:
    with pytest.raises(Invalid) as refused:
        refs.add_soil(
            db, people.review, "", "", "", {"no-such-method": {"liquid_limit": 1}, "atterberg": {"LL": 1}}
        )
    fields = [e.loc for e in refused.value.errors]
    assert fields.count(("assigned_values",)) == 2
    assert ("code",) in fields and ("name",) in fields
    assert refs.soils(db) == [] and _events(db, "reference_soil") == []


def test_a_code_in_use_is_refused_on_the_code_field(db: Database, people: People) -> None:
    refs.add_soil(db, people.review, "RS-1", "Grey clay stock")
    with pytest.raises(Invalid) as refused:
        refs.add_soil(db, people.review, "rs-1", "Another")
    assert refused.value.errors[0].loc == ("code",)


def test_an_update_records_before_and_after(db: Database, people: People) -> None:
    soil = refs.add_soil(db, people.review, "RS-1", "Grey clay stock")
    refs.update_soil(db, people.admin, soil.id or 0, "RS-1", "Grey clay stock B", "", {}, active=False)
    event = _events(db, "reference_soil")[-1]
    assert event.action == "update" and event.actor_id == people.admin.id
    assert (event.before or {})["name"] == "Grey clay stock" and (event.after or {})["active"] is False


def test_a_sample_is_linked_once_and_unlinked_with_a_reason(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    soil = refs.add_soil(db, people.review, "RS-1", "Grey clay stock")
    refs.link_sample(db, people.review, job.sample_id, soil.id or 0)
    assert [s.id for s in refs.portions(db, soil.id or 0)] == [job.sample_id]
    with pytest.raises(Conflict):
        refs.link_sample(db, people.review, job.sample_id, soil.id or 0)
    with pytest.raises(Invalid):
        refs.unlink_sample(db, people.review, job.sample_id, "  ")
    refs.unlink_sample(db, people.review, job.sample_id, "linked to the wrong stock")
    with db.session() as s:
        assert s.exec(select(ReferenceSample)).all() == []
    assert [e.action for e in _events(db, "reference_sample")] == ["link", "unlink"]


def test_a_sample_cannot_join_an_inactive_soil(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    soil = refs.add_soil(db, people.review, "RS-1", "Used up")
    refs.update_soil(db, people.review, soil.id or 0, "RS-1", "Used up", "", {}, active=False)
    with pytest.raises(Invalid) as refused:
        refs.link_sample(db, people.review, job.sample_id, soil.id or 0)
    assert refused.value.errors[0].loc == ("reference_soil_id",)
