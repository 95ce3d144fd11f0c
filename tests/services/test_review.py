"""Approval with a signature, return with a reason, segregation of duties."""

from __future__ import annotations

import pytest

from server.db.session import Database
from server.services import bench, review
from server.services.errors import Conflict, Forbidden, Invalid
from tests.conftest import PASSWORDS, People
from tests.support.scenario import ATTERBERG, small_job


def _submitted(db: Database, people: People, enterer: str = "tech") -> tuple[int, int]:
    job = small_job(db, people.admin)
    who = getattr(people, enterer)
    saved = bench.save_readings(db, who, job.test_id, ATTERBERG, 1)
    test = bench.submit(db, who, job.test_id, saved.test.version)
    return job.test_id, test.version


def test_approval_records_who_when_role_and_meaning(db: Database, people: People) -> None:
    test_id, version = _submitted(db, people)
    test = review.approve(
        db, people.review, test_id, PASSWORDS["review"], version, meaning="Checked against sheet"
    )
    assert (test.status, test.approved_by_id, test.approver_role, test.signature_meaning) == (
        "approved",
        people.review.id,
        "reviewer",
        "Checked against sheet",
    )
    assert test.approved_at is not None


def test_a_wrong_password_applies_no_signature(db: Database, people: People) -> None:
    test_id, version = _submitted(db, people)
    with pytest.raises(Invalid) as refused:
        review.approve(db, people.review, test_id, "not-my-password", version)
    assert refused.value.errors[0].loc == ("password",)


def test_nobody_approves_a_test_they_entered(db: Database, people: People) -> None:
    test_id, version = _submitted(db, people, enterer="review")
    with pytest.raises(Forbidden):
        review.approve(db, people.review, test_id, PASSWORDS["review"], version)
    assert review.approve(db, people.review2, test_id, PASSWORDS["review2"], version).status == "approved"


def test_the_rule_can_be_switched_off_by_the_laboratory(db: Database, people: People) -> None:
    test_id, version = _submitted(db, people, enterer="review")
    test = review.approve(
        db, people.review, test_id, PASSWORDS["review"], version, self_approval_forbidden=False
    )
    assert test.status == "approved"


def test_a_technician_cannot_approve(db: Database, people: People) -> None:
    test_id, version = _submitted(db, people, enterer="admin")
    with pytest.raises(Conflict, match="technician may not approve"):
        review.approve(db, people.tech, test_id, PASSWORDS["tech"], version)


def test_returning_needs_a_reason_and_reopens_the_bench(db: Database, people: People) -> None:
    test_id, version = _submitted(db, people)
    with pytest.raises(Invalid):
        review.return_test(db, people.review, test_id, "   ", version)
    test = review.return_test(db, people.review, test_id, "Re-weigh tin L2", version)
    assert (test.status, test.return_reason) == ("returned", "Re-weigh tin L2")
    saved = bench.save_readings(db, people.tech, test_id, ATTERBERG, test.version)
    assert saved.test.status == "draft"


def test_two_reviewers_acting_at_once_give_one_result_and_one_conflict(db: Database, people: People) -> None:
    test_id, version = _submitted(db, people)
    review.approve(db, people.review, test_id, PASSWORDS["review"], version)
    with pytest.raises(Conflict):
        review.return_test(db, people.review2, test_id, "too late", version)
