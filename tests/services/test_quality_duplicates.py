"""Marking duplicates and judging them (server/services/quality_duplicates.py).

Two water-content tests of one sample: 30.0 % and w2. ASTM D2216 single-operator acceptable
range of two results 7.8 % of their mean (from memory; server/quality/precision.py).
"""

from __future__ import annotations

import pytest
from sqlmodel import select

from server.db.session import Database
from server.db.tables import AuditEvent, LabTest
from server.services import amendments, bench, jobs, quality_charts, quality_duplicates, review, samples
from server.services.errors import Invalid
from tests.conftest import PASSWORDS, People
from tests.services.test_quality_charts import water
from tests.support.scenario import small_job


def _water_test(db: Database, people: People, sample_id: int, w: float) -> int:
    (test,) = jobs.request_tests(db, people.admin, [sample_id], ["water-content"])
    saved = bench.save_readings(db, people.tech, test.id or 0, water(w), test.version)
    return bench.submit(db, people.tech, test.id or 0, saved.test.version).id or 0


def _pair(db: Database, people: People, w2: float) -> tuple[int, int, int]:
    job = small_job(db, people.admin, method="water-content")
    saved = bench.save_readings(db, people.tech, job.test_id, water(30.0), 1)
    bench.submit(db, people.tech, job.test_id, saved.test.version)
    return job.job_id, job.test_id, _water_test(db, people, job.sample_id, w2)


def test_a_marked_pair_within_the_range_is_acceptable(db: Database, people: People) -> None:
    job_id, first, second = _pair(db, people, 32.0)  # 2.0 <= 0.078 x 31.0 = 2.418 (hand-worked)
    quality_duplicates.mark(db, people.review, second, first)
    (pair,) = quality_duplicates.pairs(db, job_id=job_id)
    assert pair.verdict == "acceptable"
    assert pair.checks[0].difference == pytest.approx(2.0)
    assert pair.checks[0].acceptable_range == pytest.approx(2.418)


def test_a_pair_beyond_the_range_is_outside_and_flagged(db: Database, people: People) -> None:
    _, first, second = _pair(db, people, 33.0)  # 3.0 > 0.078 x 31.5 = 2.457 (hand-worked)
    quality_duplicates.mark(db, people.review, second, first)
    (pair,) = quality_duplicates.pairs(db, test_id=first)
    assert pair.verdict == "outside"
    for test_id in (first, second):  # the reviewer sees it on both tests
        flags = quality_charts.quality_flags(db, test_id)
        assert [(f["code"], f["severity"]) for f in flags] == [("duplicate-outside-precision", "warning")]


def test_marking_an_approved_test_leaves_its_record_as_it_was(db: Database, people: People) -> None:
    _, first, second = _pair(db, people, 30.5)
    with db.session() as s:
        version = (s.get(LabTest, first) or LabTest()).version
    review.approve(db, people.review, first, PASSWORDS["review"], version)
    with db.session() as s:
        before = (s.get(LabTest, first) or LabTest()).model_dump()
    made = quality_duplicates.mark(db, people.review, second, first)
    with db.session() as s:
        assert (s.get(LabTest, first) or LabTest()).model_dump() == before
        event = s.exec(select(AuditEvent).where(AuditEvent.entity == "quality_duplicate")).one()
    assert (event.action, event.actor_id, event.entity_id) == ("mark", people.review.id, made.id)


def test_a_test_of_another_sample_or_method_is_refused_on_the_field(db: Database, people: People) -> None:
    job = small_job(db, people.admin, method="water-content")
    location = samples.add_location(db, people.admin, job.job_id, "BH2")
    other = samples.add_sample(db, people.admin, location.id or 0, "BH2-S1", 1.0, 1.5, "U100", "")
    elsewhere = _water_test(db, people, other.id or 0, 30.0)
    (pl,) = jobs.request_tests(db, people.admin, [job.sample_id], ["plastic-limit"])
    for original, words in (
        (elsewhere, "another sample"),
        (pl.id or 0, "same method"),
        (job.test_id, "itself"),
    ):
        with pytest.raises(Invalid) as refused:
            quality_duplicates.mark(db, people.review, job.test_id, original)
        assert refused.value.errors[0].loc == ("duplicate_of",)
        assert words in refused.value.errors[0].message
    with db.session() as s:
        assert s.exec(select(AuditEvent).where(AuditEvent.entity == "quality_duplicate")).all() == []


def test_a_test_is_in_one_pair_at_a_time_until_unmarked(db: Database, people: People) -> None:
    _, first, second = _pair(db, people, 30.5)
    made = quality_duplicates.mark(db, people.review, second, first)
    with pytest.raises(Invalid):
        quality_duplicates.mark(db, people.review, first, second)
    quality_duplicates.unmark(db, people.admin, made.id or 0, "marked by mistake")
    assert quality_duplicates.pairs(db) == []
    again = quality_duplicates.mark(db, people.review, first, second)
    assert again.id != made.id
    with db.session() as s:
        actions = [
            e.action for e in s.exec(select(AuditEvent).where(AuditEvent.entity == "quality_duplicate"))
        ]
    assert actions == ["mark", "unmark", "mark"]


def test_an_amendment_is_no_duplicate_of_the_revision_it_amends(db: Database, people: People) -> None:
    _, first, second = _pair(db, people, 30.5)
    with db.session() as s:
        version = (s.get(LabTest, first) or LabTest()).version
    review.approve(db, people.review, first, PASSWORDS["review"], version)
    with db.session() as s:
        version = (s.get(LabTest, first) or LabTest()).version
    amended = amendments.amend(db, people.review, first, "the dry mass was misread on the sheet", version)
    with pytest.raises(Invalid, match="revision"):
        quality_duplicates.mark(db, people.review, amended.id or 0, first)
    quality_duplicates.mark(db, people.review, second, first)
    third = _water_test(db, people, _sample(db, first), 30)
    with pytest.raises(Invalid, match="already in a duplicate pair"):  # the amendment is the same test
        quality_duplicates.mark(db, people.review, amended.id or 0, third)


def _sample(db: Database, test_id: int) -> int:
    with db.session() as s:
        return (s.get(LabTest, test_id) or LabTest()).sample_id


def test_unmarking_needs_a_reason_of_real_words(db: Database, people: People) -> None:
    _, first, second = _pair(db, people, 30.5)
    made = quality_duplicates.mark(db, people.review, second, first)
    with pytest.raises(Invalid, match="real words"):  # services.review.required_reason
        quality_duplicates.unmark(db, people.admin, made.id or 0, "x")
    assert len(quality_duplicates.pairs(db)) == 1
