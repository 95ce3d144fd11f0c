"""The audit trail is complete and append-only.

Complete: replaying a test's events alone rebuilds its current readings and status exactly, on
SQLite and PostgreSQL (ISO/IEC 17025:2017 cl. 7.5.2: changes to technical records are traceable
to the original observations). Append-only: no code of ours updates or deletes an event, and
PostgreSQL itself refuses to (the trigger of migration 0001).
"""

from __future__ import annotations

import copy
import re

import pytest
from sqlalchemy import delete, text, update
from sqlalchemy.exc import DBAPIError
from sqlmodel import col, select

from server.config import ROOT
from server.db import audit_queries
from server.db.session import Database
from server.db.tables import AuditEvent, LabTest
from server.engine import evaluate
from server.services import amendments, audit, bench, review
from server.services.errors import Forbidden
from tests.conftest import PASSWORDS, People
from tests.support.scenario import ATTERBERG
from tests.workflow.flows import Lab, version


def _with_blows(blows: int) -> dict[str, object]:
    readings = copy.deepcopy(ATTERBERG)
    readings["liquid_limit"]["trials"][2]["blows"] = blows
    return readings


def _busy_job(db: Database, people: People) -> Lab:
    """Tests in every state, reached by saves, returns, re-saves, approval and amendment."""
    lab = Lab(db, people.admin, "AU-1")
    lab.new_test()  # requested, no readings
    draft = lab.new_test()
    bench.save_readings(db, people.tech, draft, {"water_content": ATTERBERG["water_content"]}, 1)
    returned = lab.submitted(people.tech)
    review.return_test(db, people.review, returned, "tin L3 lid was off", version(db, returned))
    reworked = lab.submitted(people.tech)
    review.return_test(db, people.review, reworked, "re-count blows", version(db, reworked))
    bench.save_readings(db, people.tech, reworked, _with_blows(29), version(db, reworked))
    bench.save_readings(db, people.tech, reworked, _with_blows(27), version(db, reworked))
    bench.submit(db, people.tech, reworked, version(db, reworked))
    lab.approved(people.tech, people.review2)
    approved = lab.approved(people.tech, people.review)
    new = amendments.amend(db, people.review2, approved, "blow count misread", version(db, approved))
    saved = bench.save_readings(db, people.tech, new.id or 0, _with_blows(26), new.version)
    bench.submit(db, people.tech, new.id or 0, saved.test.version)
    review.approve(db, people.review, new.id or 0, PASSWORDS["review"], version(db, new.id or 0))
    return lab


def test_replaying_the_events_of_each_test_rebuilds_its_readings_and_status_exactly(
    db: Database, people: People
) -> None:
    lab = _busy_job(db, people)
    with db.session() as s:
        tests = s.exec(select(LabTest).order_by(col(LabTest.id))).all()
        trails = {t.id: audit_queries.events_of_tests(s, [t.id or 0]) for t in tests}
    assert {t.status for t in tests} == {
        "requested",
        "draft",
        "returned",
        "submitted",
        "approved",
        "superseded",
    }
    assert len(tests) == lab.samples + 1  # one sample's test has two revisions
    for test in tests:
        rebuilt = audit.replay(trails[test.id])
        assert rebuilt.status == test.status, test.id
        assert rebuilt.readings == test.readings, test.id  # exact: JSON equality, floats as stored
        if test.readings is not None:  # and the results follow from the readings by the engine
            assert evaluate(test.method, test.readings).results == test.results, test.id


def test_every_event_says_who_when_what_and_for_a_test_its_status_after(db: Database, people: People) -> None:
    _busy_job(db, people)
    with db.session() as s:
        events = s.exec(select(AuditEvent).where(AuditEvent.entity == "lab_test")).all()
    assert events
    for e in events:
        assert e.actor and e.at is not None and e.action, e.id
        assert e.after is not None and "status" in e.after, (e.id, e.action)
    wanted = ("return", "amend", "open_amendment", "supersede")
    reasons = {e.action: e.reason for e in events if e.action in wanted}
    assert reasons == {
        "return": reasons["return"],
        "amend": "blow count misread",
        "open_amendment": "blow count misread",
        "supersede": "blow count misread",
    }
    assert reasons["return"] in ("tin L3 lid was off", "re-count blows")


_WRITES_TO_EVENTS = [
    re.compile(r"\b(update|delete)\(\s*AuditEvent\b"),
    re.compile(
        r"(?i)\b(update\s+audit_event|delete\s+from\s+audit_event|truncate\s+(table\s+)?audit_event)\b"
    ),
    re.compile(r"\.delete\(\s*(event|e|audit_event)\s*\)"),
]


def test_no_code_of_ours_updates_or_deletes_an_audit_event() -> None:
    # A text search: it catches the plain ways to write such code; the database trigger below is
    # the guarantee on PostgreSQL.
    found = []
    for path in sorted((ROOT / "server").rglob("*.py")):
        source = path.read_text(encoding="utf-8")
        for pattern in _WRITES_TO_EVENTS:
            found += [f"{path.relative_to(ROOT)}: {m.group(0)}" for m in pattern.finditer(source)]
    assert found == []


def test_the_search_for_event_writes_would_see_one() -> None:
    # The patterns above are not vacuous: each kind of forbidden statement is caught.
    samples = [
        "session.execute(update(AuditEvent).values(action='x'))",
        "session.execute(delete(AuditEvent))",
        'conn.exec_driver_sql("DELETE FROM audit_event")',
        'text("TRUNCATE audit_event")',
        "s.delete(event)",
    ]
    for sample in samples:
        assert any(p.search(sample) for p in _WRITES_TO_EVENTS), sample


@pytest.mark.postgres
@pytest.mark.parametrize("backend", ["postgresql"])
@pytest.mark.parametrize(
    "statement",
    [
        update(AuditEvent).values(action="forged"),
        delete(AuditEvent),
        text("TRUNCATE audit_event"),
    ],
    ids=["update", "delete", "truncate"],
)
def test_postgresql_refuses_to_change_or_remove_an_event_even_from_the_apps_own_transaction(
    db: Database, people: People, statement: object
) -> None:
    lab = Lab(db, people.admin, "AU-PG")
    lab.new_test()
    with db.session() as s:
        before = [(e.id, e.action, e.after) for e in s.exec(select(AuditEvent).order_by(col(AuditEvent.id)))]
    with pytest.raises(DBAPIError) as refused, db.transaction() as s:
        s.execute(statement)  # type: ignore[call-overload]
    assert "append-only" in str(refused.value)
    with db.session() as s:
        after = [(e.id, e.action, e.after) for e in s.exec(select(AuditEvent).order_by(col(AuditEvent.id)))]
    assert after == before and before


def test_a_change_refused_half_way_leaves_neither_the_change_nor_its_event(
    db: Database, people: People
) -> None:
    # One batch signature over two tests: the first is approved and its event written inside the
    # transaction, then the second turns out to be the signer's own, so everything rolls back.
    lab = Lab(db, people.admin, "AU-TX")
    first = lab.submitted(people.tech, "water-content")
    own = lab.submitted(people.review, "water-content")
    assert first < own  # the batch signs in id order, so the refusal comes after the first write
    with db.session() as s:
        count = len(s.exec(select(AuditEvent)).all())
    with pytest.raises(Forbidden):
        review.approve_batch(
            db, people.review, [(first, version(db, first)), (own, version(db, own))], PASSWORDS["review"]
        )
    with db.session() as s:
        assert len(s.exec(select(AuditEvent)).all()) == count
        assert [t.status for t in s.exec(select(LabTest).where(col(LabTest.id).in_([first, own])))] == [
            "submitted",
            "submitted",
        ]
