"""Duplicate tests: marking a test as a repeat of another test of the same sample by the same
method, and the verdict of each pair against the method's precision statement
(``server.quality.precision``; ISO/IEC 17025:2017 cl. 7.7.1 e, "replicate tests").

Marking is a quality decision recorded beside the tests (``quality_duplicate``), never in them:
an approved test keeps its readings, results and version. Each pair is judged on the newest
revision of each test, so an amendment is judged as amended. Marking and unmarking are audited.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

from sqlmodel import Session, col, or_, select

from server.db.queries import TestRow, test_rows, users_by_id
from server.db.session import Database
from server.db.tables import LabTest, QualityDuplicate, User, utcnow
from server.quality import precision
from server.services import audit
from server.services.errors import NotFound
from server.services.fields import refuse
from server.services.review import required_reason

JUDGED_STATUSES = ("submitted", "approved")  # results handed in; a draft's may be half-entered


def newest_revisions(s: Session, test_ids: Iterable[int]) -> dict[int, LabTest]:
    """Each test's newest revision that is handed in or approved (an amendment still in draft
    leaves the approved revision current), walking the amendments forward one generation per
    query; a test with none such is itself."""
    frontier = {tid: tid for tid in set(test_ids)}  # current id -> the id asked for
    if not frontier:
        return {}
    asked = s.exec(select(LabTest).where(col(LabTest.id).in_(list(frontier)))).all()
    found: dict[int, LabTest] = {t.id or 0: t for t in asked}
    while frontier:
        later = s.exec(select(LabTest).where(col(LabTest.previous_revision_id).in_(list(frontier)))).all()
        frontier = {t.id or 0: frontier[t.previous_revision_id or 0] for t in later}
        for t in later:
            start = frontier[t.id or 0]
            if t.status in JUDGED_STATUSES or found[start].status not in JUDGED_STATUSES:
                found[start] = t
    return found


def _active_marks(s: Session, *conditions: Any) -> list[QualityDuplicate]:
    stmt = select(QualityDuplicate).where(col(QualityDuplicate.unmarked_at).is_(None), *conditions)
    return list(s.exec(stmt.order_by(col(QualityDuplicate.id))).all())


def first_revision(s: Session, test: LabTest) -> int:
    """The id of a test's first revision: an amendment and the revision it amends are one test
    (one specimen, one set of readings revised), never a duplicate pair of each other."""
    while test.previous_revision_id is not None:
        earlier = s.get(LabTest, test.previous_revision_id)
        if earlier is None:
            break
        test = earlier
    return test.id or 0


def mark(db: Database, actor: User, test_id: int, duplicate_of_id: int) -> QualityDuplicate:
    """Mark ``test_id`` as a duplicate of ``duplicate_of_id``; refused field by field when the
    two are not tests of the same sample by the same method, or either is already paired."""
    with db.transaction() as s:
        test = s.get(LabTest, test_id)
        if test is None:
            raise NotFound(f"test {test_id} does not exist")
        original = s.get(LabTest, duplicate_of_id)
        if original is None:
            refuse("duplicate_of", f"test {duplicate_of_id} does not exist")
        if duplicate_of_id == test_id:
            refuse("duplicate_of", "a test cannot be a duplicate of itself")
        if original.sample_id != test.sample_id:
            refuse(
                "duplicate_of",
                f"test {duplicate_of_id} is of another sample: a duplicate repeats the same sample",
            )
        if original.method != test.method:
            refuse(
                "duplicate_of",
                f"test {duplicate_of_id} is {original.method}, not {test.method}: "
                "a duplicate repeats the same method",
            )
        roots = {first_revision(s, test), first_revision(s, original)}
        if len(roots) == 1:
            refuse(
                "duplicate_of",
                f"test {duplicate_of_id} is a revision of test {test_id}: a duplicate is a second "
                "test of the sample, not an amendment",
            )
        of_sample = select(LabTest.id).where(LabTest.sample_id == test.sample_id)
        marks = _active_marks(s, col(QualityDuplicate.test_id).in_(of_sample))
        paired_ids = {i for m in marks for i in (m.test_id, m.duplicate_of_id)}
        paired_roots = {
            first_revision(s, t) for t in (s.get(LabTest, i) for i in paired_ids) if t is not None
        }
        if roots & paired_roots:
            refuse(
                "duplicate_of", "one of these tests is already in a duplicate pair: unmark that pair first"
            )
        made = QualityDuplicate(test_id=test_id, duplicate_of_id=duplicate_of_id, marked_by_id=actor.id or 0)
        s.add(made)
        s.flush()
        after = {"id": made.id, "test_id": test_id, "duplicate_of_id": duplicate_of_id}
        audit.record(s, actor, "quality_duplicate", made.id or 0, "mark", after=after)
        return made


def unmark(db: Database, actor: User, mark_id: int, reason: str) -> QualityDuplicate:
    """End a duplicate pair (marked by mistake); the row stays, with who ended it, when and why
    (a reason of real words, as for every change that undoes a record)."""
    reason = required_reason(reason, "unmark a duplicate pair")
    with db.transaction() as s:
        found = s.get(QualityDuplicate, mark_id)
        if found is None or found.unmarked_at is not None:
            raise NotFound(f"duplicate pair {mark_id} is not marked")
        found.unmarked_at, found.unmarked_by_id = utcnow(), actor.id
        s.add(found)
        before = {"id": mark_id, "test_id": found.test_id, "duplicate_of_id": found.duplicate_of_id}
        audit.record(s, actor, "quality_duplicate", mark_id, "unmark", before=before, reason=reason)
        return found


@dataclass
class DuplicatePair:
    """A marked pair as the Quality page and report show it."""

    mark: QualityDuplicate
    first: TestRow  # the original, newest revision
    second: TestRow  # the duplicate, newest revision
    checks: list[precision.DuplicateCheck]
    marked_by: User | None

    @property
    def verdict(self) -> str:
        """The pair's worst verdict: outside if any key is, else acceptable if any key was judged."""
        verdicts = {c.verdict for c in self.checks}
        if "outside" in verdicts:
            return "outside"
        return "acceptable" if "acceptable" in verdicts else "not judged"


def pairs(db: Database, *, job_id: int | None = None, test_id: int | None = None) -> list[DuplicatePair]:
    """The marked pairs (of one job, or touching one test), each judged on its newest revisions."""
    with db.session() as s:
        conditions: list[Any] = []
        if test_id is not None:
            conditions.append(
                or_(QualityDuplicate.test_id == test_id, QualityDuplicate.duplicate_of_id == test_id)
            )
        marks = _active_marks(s, *conditions)
        newest = newest_revisions(s, [i for m in marks for i in (m.test_id, m.duplicate_of_id)])
        wanted = [t.id for t in newest.values()]
        rows = {r.test.id: r for r in test_rows(s, col(LabTest.id).in_(wanted))} if wanted else {}
        people = users_by_id(s, [m.marked_by_id for m in marks])
    out = []
    for m in marks:
        first, second = rows.get(newest[m.duplicate_of_id].id), rows.get(newest[m.test_id].id)
        if first is None or second is None:
            continue
        if job_id is not None and (first.job.id != job_id):
            continue
        checks = []
        if first.test.status in JUDGED_STATUSES and second.test.status in JUDGED_STATUSES:
            checks = precision.check_results(
                first.test.method,
                first.test.results or {},
                second.test.results or {},
                (first.test.readings, second.test.readings),
            )
        out.append(DuplicatePair(m, first, second, checks, people.get(m.marked_by_id)))
    return out
