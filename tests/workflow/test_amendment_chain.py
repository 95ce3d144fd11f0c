"""An approved test amended twice: three revisions, each kept, and its report re-issued each time.

ISO/IEC 17025:2017 cl. 7.8.8.1-7.8.8.3: a change to an issued report is made as a new document,
uniquely identified, that refers to the one it replaces; cl. 7.5.2: the original record stays
retrievable beside its amendments. DESIGN.md section 4: an approved test is never edited in
place; an amendment opens a new revision with a reason.
"""

from __future__ import annotations

import copy

import pytest
from sqlmodel import col, select

from server.db.review_queries import needs_reissue, revisions
from server.db.session import Database
from server.db.tables import Report, ReportTest
from server.services import amendments, bench, reports, review
from server.services.errors import Conflict, Forbidden, Invalid
from tests.conftest import PASSWORDS, People
from tests.support.scenario import ATTERBERG
from tests.workflow.flows import Lab, load, version

BASE = "http://lab.example"


def _corrected(dry_tare_g: float) -> dict[str, object]:
    """The scenario's readings with the natural water content's dry mass re-weighed."""
    readings = copy.deepcopy(ATTERBERG)
    readings["water_content"]["determinations"][0]["dry_tare_g"] = dry_tare_g
    return readings


def _correct_and_hand_in(db: Database, people: People, test_id: int, dry_tare_g: float) -> None:
    saved = bench.save_readings(db, people.tech, test_id, _corrected(dry_tare_g), version(db, test_id))
    bench.submit(db, people.tech, test_id, saved.test.version)


def _reissue_state(db: Database, job_id: int) -> list[tuple[str, int, list[int], bool]]:
    with db.session() as s:
        return [
            (r.report.number, r.report.revision, [t.carried.revision for t in r.stale], r.ready)
            for r in needs_reissue(s, job_id=job_id)
        ]


def _reports(db: Database, job_id: int) -> list[tuple[int, str, int | None, list[int]]]:
    with db.session() as s:
        found = s.exec(select(Report).where(Report.job_id == job_id).order_by(col(Report.revision))).all()
        carried = {
            r.id: sorted(s.exec(select(ReportTest.test_id).where(ReportTest.report_id == r.id)).all())
            for r in found
        }
    return [(r.revision, r.status, r.superseded_by_id, carried[r.id]) for r in found]


def test_three_revisions_are_kept_and_the_report_is_marked_and_reissued_each_time(
    db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "AM-3")
    job_id = lab.job.id or 0
    rev1 = lab.approved(people.tech, people.review)
    first = reports.issue_report(db, people.review, job_id, BASE, password=PASSWORDS["review"])
    assert _reissue_state(db, job_id) == []

    # Revision 2: review2 amends; revision 1 stays the current approved one, and the report that
    # carries it needs no re-issue, until revision 2 is approved (S7 point 5).
    rev2 = (
        amendments.amend(db, people.review2, rev1, "dry mass of tin N1 mis-keyed", version(db, rev1)).id or 0
    )
    assert (load(db, rev1).status, load(db, rev2).status, load(db, rev2).revision) == (
        "approved",
        "draft",
        2,
    )
    assert _reissue_state(db, job_id) == []
    with pytest.raises(Conflict):  # one amendment of a revision at a time
        amendments.amend(db, people.admin, rev1, "a second correction at once", version(db, rev1))
    with pytest.raises(Invalid):  # not until the amended revision is approved
        reports.reissue_report(db, people.review, first.id or 0, BASE, password=PASSWORDS["review"])
    _correct_and_hand_in(db, people, rev2, 30.10)
    with pytest.raises(Forbidden):  # whoever amended may not sign the new revision
        review.approve(db, people.review2, rev2, PASSWORDS["review2"], version(db, rev2))
    review.approve(db, people.review, rev2, PASSWORDS["review"], version(db, rev2))
    assert load(db, rev1).status == "superseded"  # only now (S7 point 5)
    assert _reissue_state(db, job_id) == [(first.number, 1, [1], True)]
    second = reports.reissue_report(db, people.review, first.id or 0, BASE, password=PASSWORDS["review"])
    assert (second.number, second.revision) == (first.number, 2)
    assert _reissue_state(db, job_id) == []

    # Revision 3: the admin amends; review2, who only opened revision 2, may sign this one.
    rev3 = (
        amendments.amend(db, people.admin, rev2, "oven temperature log re-checked", version(db, rev2)).id or 0
    )
    assert _reissue_state(db, job_id) == []
    _correct_and_hand_in(db, people, rev3, 30.05)
    with pytest.raises(Forbidden):
        review.approve(db, people.admin, rev3, PASSWORDS["admin"], version(db, rev3))
    review.approve(db, people.review2, rev3, PASSWORDS["review2"], version(db, rev3))
    third = reports.reissue_report(db, people.review, second.id or 0, BASE, password=PASSWORDS["review"])
    assert _reissue_state(db, job_id) == []

    # Every report revision is kept; each earlier one names the one that replaced it.
    assert _reports(db, job_id) == [
        (1, "superseded", second.id, [rev1]),
        (2, "superseded", third.id, [rev2]),
        (3, "issued", None, [rev3]),
    ]
    # Every test revision is kept as it was, in a chain, with its reason.
    with db.session() as s:
        chain = revisions(s, rev3)
    assert [(t.id, t.revision, t.status) for t in chain] == [
        (rev1, 1, "superseded"),
        (rev2, 2, "superseded"),
        (rev3, 3, "approved"),
    ]
    assert [t.previous_revision_id for t in chain] == [None, rev1, rev2]
    assert [t.amendment_reason for t in chain] == [
        None,
        "dry mass of tin N1 mis-keyed",
        "oven temperature log re-checked",
    ]
    dry = [t.readings["water_content"]["determinations"][0]["dry_tare_g"] for t in chain]  # type: ignore[index]
    assert dry == [30.00, 30.10, 30.05]
    # ASTM D2216 cl. 12.1, w = (wet - dry) / (dry - tare): (36.00 - 30.10) / 20.10 = 29.35 % on revision 2
    assert chain[1].results is not None
    assert chain[1].results["water_content"] == pytest.approx(100 * 5.90 / 20.10)
    assert chain[0].approved_by_id == people.review.id  # revision 1 keeps its own signature
