"""Segregation of duties: nobody signs a test they entered or amended (a setting, on by default).

DESIGN.md section 4 ("by default nobody approves a test they entered") and ISO/IEC 17025:2017
cl. 7.8.1.1 (results are reviewed before release). Readings carried into an amended revision
keep their authors; the person who opens an amendment is an author of that revision only.
"""

from __future__ import annotations

import pytest

from server.db.review_queries import revision_authors
from server.db.session import Database
from server.services import amendments, bench, review
from server.services.errors import Forbidden
from tests.conftest import PASSWORDS, People
from tests.support.scenario import ATTERBERG
from tests.workflow.flows import Lab, load, version


def _authors(db: Database, test_id: int) -> set[int]:
    with db.session() as s:
        return revision_authors(s, test_id)


def test_a_reviewer_who_entered_readings_cannot_sign_them_and_another_reviewer_can(
    db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "SD-1")
    test_id = lab.submitted(people.review)
    with pytest.raises(Forbidden, match="another reviewer must approve it"):
        review.approve(db, people.review, test_id, PASSWORDS["review"], version(db, test_id))
    assert load(db, test_id).status == "submitted"
    review.approve(db, people.review2, test_id, PASSWORDS["review2"], version(db, test_id))
    assert load(db, test_id).approved_by_id == people.review2.id


def test_an_admin_who_changed_one_reading_of_a_technicians_sheet_cannot_sign_it(
    db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "SD-2")
    test_id = lab.new_test()
    saved = bench.save_readings(db, people.tech, test_id, ATTERBERG, 1)
    saved = bench.save_readings(
        db, people.admin, test_id, {**ATTERBERG, "clay_fraction": 31.0}, saved.test.version
    )
    bench.submit(db, people.tech, test_id, saved.test.version)
    assert _authors(db, test_id) == {people.tech.id, people.admin.id}
    with pytest.raises(Forbidden):
        review.approve(db, people.admin, test_id, PASSWORDS["admin"], version(db, test_id))


def test_whoever_amended_cannot_sign_the_new_revision_nor_can_whoever_entered_its_readings(
    db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "SD-3")
    first = lab.submitted(people.review2)  # review2 entered revision 1's readings
    review.approve(db, people.review, first, PASSWORDS["review"], version(db, first))
    second = amendments.amend(db, people.admin, first, "wrong tin tare", version(db, first)).id or 0
    bench.submit(db, people.tech, second, version(db, second))
    assert _authors(db, second) == {people.review2.id, people.admin.id}
    for who in (people.admin, people.review2):
        with pytest.raises(Forbidden):
            review.approve(db, who, second, PASSWORDS[who.username], version(db, second))
    review.approve(db, people.review, second, PASSWORDS["review"], version(db, second))
    assert load(db, second).status == "approved"


def test_opening_an_earlier_amendment_does_not_bar_signing_a_later_revision(
    db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "SD-4")
    first = lab.approved(people.tech, people.review)
    second = amendments.amend(db, people.review2, first, "typo in tare", version(db, first)).id or 0
    bench.submit(db, people.tech, second, version(db, second))
    review.approve(db, people.review, second, PASSWORDS["review"], version(db, second))
    third = amendments.amend(db, people.review, second, "blow count", version(db, second)).id or 0
    bench.submit(db, people.tech, third, version(db, third))
    assert _authors(db, third) == {people.tech.id, people.review.id}
    review.approve(db, people.review2, third, PASSWORDS["review2"], version(db, third))
    assert load(db, third).approved_by_id == people.review2.id


def test_the_laboratory_may_switch_the_rule_off(db: Database, people: People) -> None:
    lab = Lab(db, people.admin, "SD-5")
    test_id = lab.submitted(people.review)
    review.approve(
        db, people.review, test_id, PASSWORDS["review"], version(db, test_id), self_approval_forbidden=False
    )
    assert load(db, test_id).approved_by_id == people.review.id


def test_a_batch_holding_one_of_the_signers_own_tests_is_refused_whole(db: Database, people: People) -> None:
    lab = Lab(db, people.admin, "SD-6")
    others = lab.submitted(people.tech, "water-content")
    own = lab.submitted(people.review, "water-content")
    with pytest.raises(Forbidden):
        review.approve_batch(
            db, people.review, [(others, version(db, others)), (own, version(db, own))], PASSWORDS["review"]
        )
    assert (load(db, others).status, load(db, own).status) == ("submitted", "submitted")
