"""Approval with a signature (one test or a batch), return with a reason, and what is refused."""

from __future__ import annotations

import pytest
from sqlmodel import select

from server.db.session import Database
from server.db.tables import AuditEvent
from server.services import bench, review, users
from server.services.errors import Conflict, Forbidden, Invalid
from tests.conftest import PASSWORDS, People
from tests.support.scenario import ATTERBERG, small_job
from tests.workflow.flows import Lab, load, version


def _submitted(db: Database, people: People, enterer: str = "tech") -> tuple[int, int]:
    job = small_job(db, people.admin)
    who = getattr(people, enterer)
    saved = bench.save_readings(db, who, job.test_id, ATTERBERG, 1)
    test = bench.submit(db, who, job.test_id, saved.test.version)
    return job.test_id, test.version


def test_approval_records_who_when_role_and_meaning(db: Database, people: People) -> None:
    test_id, version_seen = _submitted(db, people)
    test = review.approve(
        db, people.review, test_id, PASSWORDS["review"], version_seen, meaning="Checked against sheet"
    )
    assert (test.status, test.approved_by_id, test.approver_role, test.signature_meaning) == (
        "approved",
        people.review.id,
        "reviewer",
        "Checked against sheet",
    )
    assert test.approved_at is not None
    with db.session() as s:
        event = s.exec(select(AuditEvent).where(AuditEvent.action == "approve")).one()
    assert event.after is not None
    assert (event.after["signed_by"], event.after["role"], event.after["meaning"]) == (
        "Review Person",
        "reviewer",
        "Checked against sheet",
    )


def test_a_wrong_password_applies_no_signature(db: Database, people: People) -> None:
    test_id, version_seen = _submitted(db, people)
    with pytest.raises(Invalid) as refused:
        review.approve(db, people.review, test_id, "not-my-password", version_seen)
    assert refused.value.errors[0].loc == ("password",)
    assert load(db, test_id).status == "submitted"


def test_a_signature_needs_a_meaning_of_at_most_300_characters(db: Database, people: People) -> None:
    test_id, version_seen = _submitted(db, people)
    for meaning in ("   ", "x" * 301):
        with pytest.raises(Invalid) as refused:
            review.approve(db, people.review, test_id, PASSWORDS["review"], version_seen, meaning=meaning)
        assert refused.value.errors[0].loc == ("meaning",)
    assert load(db, test_id).status == "submitted"


def test_a_deactivated_reviewer_cannot_sign_even_with_the_right_password(
    db: Database, people: People
) -> None:
    test_id, version_seen = _submitted(db, people)
    users.set_active(db, people.admin, people.review.id or 0, False, "left the laboratory")
    with pytest.raises(Invalid):
        review.approve(db, people.review, test_id, PASSWORDS["review"], version_seen)


def test_nobody_approves_a_test_they_entered(db: Database, people: People) -> None:
    test_id, version_seen = _submitted(db, people, enterer="review")
    with pytest.raises(Forbidden):
        review.approve(db, people.review, test_id, PASSWORDS["review"], version_seen)
    assert (
        review.approve(db, people.review2, test_id, PASSWORDS["review2"], version_seen).status == "approved"
    )


def test_the_rule_can_be_switched_off_by_the_laboratory(db: Database, people: People) -> None:
    test_id, version_seen = _submitted(db, people, enterer="review")
    test = review.approve(
        db, people.review, test_id, PASSWORDS["review"], version_seen, self_approval_forbidden=False
    )
    assert test.status == "approved"


def test_a_technician_is_forbidden_to_approve(db: Database, people: People) -> None:
    test_id, version_seen = _submitted(db, people, enterer="admin")
    with pytest.raises(Forbidden, match="technician may not approve"):
        review.approve(db, people.tech, test_id, PASSWORDS["tech"], version_seen)


def test_returning_needs_a_reason_and_reopens_the_bench(db: Database, people: People) -> None:
    test_id, version_seen = _submitted(db, people)
    with pytest.raises(Invalid):
        review.return_test(db, people.review, test_id, "   ", version_seen)
    test = review.return_test(db, people.review, test_id, "Re-weigh tin L2", version_seen)
    assert (test.status, test.return_reason) == ("returned", "Re-weigh tin L2")
    corrected = {**ATTERBERG, "clay_fraction": 31.0}
    saved = bench.save_readings(db, people.tech, test_id, corrected, test.version)
    assert saved.test.status == "draft"


def test_a_late_second_reviewer_is_told_who_acted_first(db: Database, people: People) -> None:
    test_id, version_seen = _submitted(db, people)
    review.approve(db, people.review, test_id, PASSWORDS["review"], version_seen)
    with pytest.raises(Conflict) as refused:
        review.return_test(db, people.review2, test_id, "too late to return it", version_seen)
    message = str(refused.value)
    assert message.startswith("Review Person approved this test at ")
    assert message.endswith(
        " UTC, after you opened it; your return was not applied and nothing was changed"
        " (reload to see it as it is now)"
    )


# -- batch approval ------------------------------------------------------------------------------


def _clean_batch(db: Database, people: People, n: int) -> tuple[Lab, list[tuple[int, int]]]:
    lab = Lab(db, people.admin, "BA-1")
    ids = [lab.submitted(people.tech, "water-content") for _ in range(n)]
    return lab, [(i, version(db, i)) for i in ids]


def test_one_signature_approves_every_test_of_a_clean_batch(db: Database, people: People) -> None:
    _lab, picked = _clean_batch(db, people, 3)
    done = review.approve_batch(db, people.review, picked, PASSWORDS["review"], meaning="Batch checked")
    assert [t.status for t in done] == ["approved"] * 3
    for test_id, _ in picked:
        test = load(db, test_id)
        assert (test.approved_by_id, test.signature_meaning) == (people.review.id, "Batch checked")
    with db.session() as s:
        events = s.exec(select(AuditEvent).where(AuditEvent.action == "approve")).all()
    assert sorted(e.entity_id for e in events) == sorted(i for i, _ in picked)
    assert {e.after["batch_of"] for e in events if e.after} == {3}


def test_a_batch_holding_a_flagged_test_is_refused_whole(db: Database, people: People) -> None:
    lab, picked = _clean_batch(db, people, 2)
    flagged = lab.submitted(people.tech)  # the Atterberg scenario carries a plastic-limit spread warning
    assert load(db, flagged).flags
    with pytest.raises(Invalid, match="carry quality flags"):
        review.approve_batch(
            db, people.review, [*picked, (flagged, version(db, flagged))], PASSWORDS["review"]
        )
    assert {load(db, i).status for i, _ in picked} == {"submitted"}


def test_a_batch_with_a_test_changed_meanwhile_is_refused_whole(db: Database, people: People) -> None:
    _lab, picked = _clean_batch(db, people, 2)
    (first, seen), (second, _) = picked
    review.return_test(db, people.review2, second, "re-weigh the tins", version(db, second))
    with pytest.raises(Conflict):
        review.approve_batch(db, people.review, [(first, seen), (second, seen)], PASSWORDS["review"])
    assert load(db, first).status == "submitted"


def test_an_empty_batch_or_a_wrong_password_approves_nothing(db: Database, people: People) -> None:
    _lab, picked = _clean_batch(db, people, 1)
    with pytest.raises(Invalid):
        review.approve_batch(db, people.review, [], PASSWORDS["review"])
    with pytest.raises(Invalid):
        review.approve_batch(db, people.review, picked, "wrong-password-1")
    assert load(db, picked[0][0]).status == "submitted"


@pytest.mark.parametrize(
    "reason",
    ["x", "ok", "..........", "aaaaaaaaaaaa", "xyxyxyxyxyxy", "1234567890", "!!  ??  !!  ??"],
)
def test_a_reason_must_be_real_words(reason: str) -> None:
    # S7 point 3: at least 10 characters, not only punctuation, digits or repeated letters
    with pytest.raises(Invalid) as refused:
        review.required_reason(reason, "return a test")
    assert refused.value.errors[0].loc == ("reason",)


@pytest.mark.parametrize("reason", ["Re-weigh tin L2", "blow count misread", "Tin N1 re-weighed"])
def test_a_reason_of_a_few_real_words_is_kept_with_blanks_folded(reason: str) -> None:
    assert review.required_reason(f"  {reason}  ", "return a test") == reason  # common practice
