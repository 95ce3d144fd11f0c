"""Amending an approved test: a new revision with a reason, the old one kept; and the
field-by-field comparison of two revisions."""

from __future__ import annotations

import pytest
from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import AuditEvent
from server.services import amendments, bench, review
from server.services.amendments import Change, changes, leaves
from server.services.errors import Conflict, Forbidden, Invalid
from tests.conftest import PASSWORDS, People
from tests.support.scenario import ATTERBERG
from tests.workflow.flows import Lab, load, version


def test_amending_keeps_the_approved_revision_and_opens_a_draft_with_its_readings(
    db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "AM-1")
    old_id = lab.approved(people.tech, people.review)
    old = load(db, old_id)
    new = amendments.amend(db, people.review2, old_id, "  tare of tin P2 re-weighed  ", old.version)
    kept = load(db, old_id)
    # S7 point 5: the approved revision stays current until its amendment is approved
    assert (kept.status, kept.readings, kept.results, kept.approved_by_id) == (
        "approved",
        old.readings,
        old.results,
        people.review.id,
    )
    assert (new.status, new.revision, new.previous_revision_id, new.amendment_reason) == (
        "draft",
        2,
        old_id,
        "tare of tin P2 re-weighed",
    )
    assert (new.sample_id, new.method, new.readings, new.results, new.flags) == (
        old.sample_id,
        old.method,
        old.readings,
        old.results,
        old.flags,
    )
    assert new.approved_by_id is None and new.approved_at is None


def test_an_amendment_writes_an_event_on_each_revision_with_the_reason(db: Database, people: People) -> None:
    lab = Lab(db, people.admin, "AM-2")
    old_id = lab.approved(people.tech, people.review)
    new = amendments.amend(db, people.admin, old_id, "wrong sample depth", version(db, old_id))
    with db.session() as s:
        events = s.exec(
            select(AuditEvent).where(col(AuditEvent.action).in_(["amend", "open_amendment"]))
        ).all()
    by_test = {e.entity_id: e for e in events}
    assert set(by_test) == {old_id, new.id}
    assert by_test[old_id].action == "open_amendment" and by_test[new.id].action == "amend"
    assert by_test[old_id].after == {"status": "approved", "amended_by": new.id}
    assert by_test[new.id].after is not None and by_test[new.id].after["readings"] == new.readings
    assert {e.reason for e in events} == {"wrong sample depth"}
    assert {e.actor_id for e in events} == {people.admin.id}


def test_an_amendment_needs_a_reason(db: Database, people: People) -> None:
    lab = Lab(db, people.admin, "AM-3")
    old_id = lab.approved(people.tech, people.review)
    for reason in ("", "   ", "x" * 1001):
        with pytest.raises(Invalid) as refused:
            amendments.amend(db, people.review, old_id, reason, version(db, old_id))
        assert refused.value.errors[0].loc == ("reason",)
    assert load(db, old_id).status == "approved"


def test_only_an_approved_test_is_amended_and_only_by_a_reviewer_or_admin(
    db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "AM-4")
    submitted = lab.submitted(people.tech)
    with pytest.raises(Conflict, match="submitted test cannot be amended"):
        amendments.amend(db, people.review, submitted, "why not amend it now", version(db, submitted))
    approved = lab.approved(people.tech, people.review)
    with pytest.raises(Forbidden, match="technician may not amend"):
        amendments.amend(db, people.tech, approved, "why not amend it now", version(db, approved))
    assert load(db, approved).status == "approved"


def test_a_revision_is_amended_once_the_second_attempt_is_told_it_came_late(
    db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "AM-5")
    old_id = lab.approved(people.tech, people.review)
    seen = version(db, old_id)
    amendments.amend(db, people.review, old_id, "first amendment of the tare", seen)
    with pytest.raises(Conflict, match="Review Person amended this test"):
        amendments.amend(db, people.review2, old_id, "second amendment of the tare", seen)


# -- comparing revisions (pure) ------------------------------------------------------------------


def test_changes_lists_every_changed_added_and_removed_field_with_its_path() -> None:
    before = {"trials": [{"blows": 15, "tare_g": 10.0}, {"blows": 20}], "cone": "80g-30deg", "gone": 1}
    after = {"trials": [{"blows": 15, "tare_g": 10.01}, {"blows": 21}, {"blows": 28}], "cone": "80g-30deg"}
    found = changes(before, after)
    assert [(c.label, c.kind, c.before, c.after) for c in found] == [
        ("trials #1 › tare_g", "changed", 10.0, 10.01),
        ("trials #2 › blows", "changed", 20, 21),
        ("trials #3 › blows", "added", found[2].before, 28),
        ("gone", "removed", 1, found[3].after),
    ]
    assert str(found[2].before) == "—" and str(found[3].after) == "—"


def test_changes_compares_numbers_as_stored_and_tells_true_from_one() -> None:
    assert changes({"m": 38.1}, {"m": 38.10}) == []  # the same float typed with a trailing zero
    assert [c.key for c in changes({"m": 38.1}, {"m": 38.01})] == ["m"]
    assert [c.kind for c in changes({"nonplastic": True}, {"nonplastic": 1})] == ["changed"]
    assert changes(None, None) == [] and changes({}, {}) == []


def test_leaves_lists_every_value_in_document_order_with_rows_counted_from_one() -> None:
    doc = {"liquid_limit": 39.67, "trials": [{"w": 42.0}, {"w": 40.8}], "empty": []}
    assert [(leaf.label, leaf.key, leaf.value) for leaf in leaves(doc)] == [
        ("liquid_limit", "liquid_limit", 39.67),
        ("trials #1 › w", "w", 42.0),
        ("trials #2 › w", "w", 40.8),
        ("empty", "empty", []),
    ]
    assert Change(("a", 0), 1, 2).key == "a"


def test_approving_the_amendment_supersedes_the_revision_it_amends(db: Database, people: People) -> None:
    lab = Lab(db, people.admin, "AM-9")
    old_id = lab.approved(people.tech, people.review)
    new = amendments.amend(db, people.review2, old_id, "tare of tin P2 re-weighed", version(db, old_id))
    saved = bench.save_readings(db, people.tech, new.id or 0, ATTERBERG, version(db, new.id or 0))
    bench.submit(db, people.tech, new.id or 0, saved.test.version)
    assert load(db, old_id).status == "approved"  # still current while the amendment is reviewed
    review.approve(db, people.review, new.id or 0, PASSWORDS["review"], version(db, new.id or 0))
    assert (load(db, old_id).status, load(db, new.id or 0).status) == ("superseded", "approved")
    with db.session() as s:
        event = s.exec(select(AuditEvent).where(AuditEvent.action == "supersede")).one()
    assert (event.entity_id, event.actor_id, event.reason) == (
        old_id,
        people.review.id,
        "tare of tin P2 re-weighed",
    )
