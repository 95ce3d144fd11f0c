"""The audit trail is a hash chain that shows any change or removal, on SQLite and PostgreSQL.

Events are written by the real services; tampering is done the way a person with the database's
owner password could: raw SQL after dropping the guarding trigger.
"""

from __future__ import annotations

import os
import threading
import time
import uuid
from collections.abc import Iterator
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url
from sqlalchemy.exc import DBAPIError
from sqlmodel import col, select

from server.db.migrate import upgrade
from server.db.session import Database
from server.db.tables import AuditEvent
from server.services import audit, jobs
from server.services.audit_chain import GENESIS, canonical_text, chain_hash, check, content_of, verify
from tests.conftest import PG_ENV, People

REFUSAL = "audit events are never changed or removed"  # migration 0005's trigger message


# -- helpers shared with tests/test_cli_audit.py -----------------------------------------------------


def events(db: Database) -> list[AuditEvent]:
    """The whole trail, oldest first."""
    with db.session() as s:
        return list(s.exec(select(AuditEvent).order_by(col(AuditEvent.id))))


def some_work(db: Database, people: People, code: str = "AC-1") -> None:
    """A client, a job and a change of the job: three events from the services."""
    client = jobs.create_client(db, people.admin, f"Chain Test Client {code}")
    job = jobs.create_job(db, people.admin, client.id or 0, code, title="Embankment")
    jobs.save_job(db, people.admin, jobs.JobForm(client.id or 0, code, title="Embankment, phase 2"), job.id)


def drop_guards(db: Database) -> None:
    """What only the schema's owner can do: take away the triggers that refuse the change."""
    with db.engine.begin() as conn:
        if db.is_sqlite:
            conn.execute(text("DROP TRIGGER IF EXISTS audit_event_no_update"))
            conn.execute(text("DROP TRIGGER IF EXISTS audit_event_no_delete"))
        else:
            conn.execute(text("DROP TRIGGER IF EXISTS audit_event_append_only ON audit_event"))


def forge_after(db: Database, event_id: int, after: str) -> None:
    """Rewrite one event's ``after`` (JSON text) with raw SQL, its hashes left as they were."""
    drop_guards(db)
    value = ":after" if db.is_sqlite else "CAST(:after AS jsonb)"
    with db.engine.begin() as conn:
        conn.execute(
            text(f"UPDATE audit_event SET after = {value} WHERE id = :id"), {"after": after, "id": event_id}
        )


def remove_event(db: Database, event_id: int) -> None:
    drop_guards(db)
    with db.engine.begin() as conn:
        conn.execute(text("DELETE FROM audit_event WHERE id = :id"), {"id": event_id})


# -- the definition -----------------------------------------------------------------------------------


def test_the_hashed_text_of_an_event_is_the_frozen_canonical_form() -> None:
    event = AuditEvent(
        at=datetime(2026, 12, 2, 9, 15, tzinfo=UTC),
        actor_id=3,
        actor="tech",
        entity="lab_test",
        entity_id=12,
        action="readings",
        after={"status": "draft", "readings": {"wet_tare_g": 45.0, "tare_g": 15.2}},
        reason="tin L3 \u2013 lid off",
        typed_at=datetime(2026, 12, 2, 9, 14, 30, 250000, tzinfo=UTC),
    )
    # The definition in server/services/audit_chain.py's docstring: sorted keys, no spaces, ASCII
    # escapes, UTC with microseconds, a whole float written as an integer.
    expected = (
        '{"action":"readings","actor":"tech","actor_id":3,'
        '"after":{"readings":{"tare_g":15.2,"wet_tare_g":45},"status":"draft"},'
        '"at":"2026-12-02T09:15:00.000000Z","before":null,"entity":"lab_test","entity_id":12,'
        '"prev_sha256":"","reason":"tin L3 \\u2013 lid off","typed_at":"2026-12-02T09:14:30.250000Z"}'
    )
    assert canonical_text(content_of(event), GENESIS) == expected
    # computed: `printf '%s' TEXT | sha256sum` (GNU coreutils, SHA-256 of FIPS 180-4) on that text
    assert chain_hash(content_of(event), GENESIS) == (
        "d774326dff00495e57aa495697d3f4b4cb8852595497bea7a1dcf144e8e6de05"
    )


def test_an_instant_in_another_zone_hashes_as_the_same_instant_in_utc() -> None:
    from datetime import timedelta, timezone

    def at(moment: datetime) -> AuditEvent:
        return AuditEvent(at=moment, actor="system", entity="job", entity_id=1, action="create")

    utc = datetime(2026, 12, 2, 9, 15, tzinfo=UTC)
    local = utc.astimezone(timezone(timedelta(hours=2)))  # computed: the same instant at UTC+2
    assert chain_hash(content_of(at(utc)), GENESIS) == chain_hash(content_of(at(local)), GENESIS)


# -- the chain as the services write it ---------------------------------------------------------------


def test_events_written_by_the_services_form_one_unbroken_chain(db: Database, people: People) -> None:
    some_work(db, people)
    trail = events(db)
    assert len(trail) == 4 + 3  # the template's four users (tests/conftest.py), then some_work's three
    assert trail[0].prev_sha256 == GENESIS
    for before, event in zip(trail, trail[1:], strict=False):
        assert event.prev_sha256 == before.sha256, event.id
    for event in trail:
        assert event.sha256 == chain_hash(content_of(event), event.prev_sha256), event.id
    assert len({e.sha256 for e in trail}) == len(trail)
    outcome = check(db)
    assert (outcome.checked, outcome.head_sha256, outcome.bad) == (len(trail), trail[-1].sha256, None)


def test_two_events_recorded_in_one_transaction_chain_to_each_other(db: Database, people: People) -> None:
    newest = events(db)[-1]
    with db.transaction() as s:
        first = audit.record(s, people.admin, "job", 1, "note", after={"n": 1})
        second = audit.record(s, people.admin, "job", 1, "note", after={"n": 2})
    assert first.prev_sha256 == newest.sha256
    assert second.prev_sha256 == first.sha256
    assert [e.sha256 for e in events(db)[-2:]] == [first.sha256, second.sha256]  # in id order
    assert verify(db) is None


def test_an_event_of_a_rolled_back_savepoint_leaves_no_hole_in_the_chain(
    db: Database, people: People
) -> None:
    with db.transaction() as s:
        audit.record(s, people.admin, "job", 1, "note", after={"n": 1})
        savepoint = s.begin_nested()
        audit.record(s, people.admin, "job", 1, "note", after={"n": "rolled back"})
        savepoint.rollback()
        audit.record(s, people.admin, "job", 1, "note", after={"n": 3})
    assert [e.after for e in events(db)[-2:]] == [{"n": 1}, {"n": 3}]
    assert verify(db) is None


def test_values_both_databases_store_differently_still_verify(db: Database, people: People) -> None:
    # PostgreSQL's jsonb gives 1e16 back as an integer and keeps 45.0 as 45.0 (PostgreSQL 15
    # manual, 8.14 "JSON Types": numbers are stored as numeric); SQLite keeps the JSON text.
    odd: dict[Any, Any] = {
        "whole": 45.0,
        "huge": 1e16,
        "tiny": 1.5e-7,
        "pair": (1, 2),
        7: "int key",
        "text": "\u00e9\u2013",
    }
    with db.transaction() as s:
        audit.record(s, people.admin, "job", 1, "note", after=odd)
    odd["whole"] = 46.0  # a caller changing its dict after recording it changes nothing stored
    assert events(db)[-1].after == {
        "whole": 45.0,
        "huge": 1e16,
        "tiny": 1.5e-7,
        "pair": [1, 2],
        "7": "int key",
        "text": "\u00e9\u2013",
    }
    assert verify(db) is None


def test_writers_at_the_same_time_do_not_fork_the_chain(db: Database, people: People) -> None:
    writers, rounds = 6, 3
    start = threading.Barrier(writers)
    failures: list[BaseException] = []

    def write(n: int) -> None:
        try:
            start.wait()
            for r in range(rounds):
                with db.transaction() as s:
                    audit.record(s, people.admin, "job", n, "note", after={"writer": n, "round": r})
                    time.sleep(0.01)  # a wide window: without the chain's lock the chain forks here
                    audit.record(s, people.admin, "job", n, "note", after={"writer": n, "round": r, "b": 1})
        except BaseException as exc:  # collected and raised in the test's own thread
            failures.append(exc)

    threads = [threading.Thread(target=write, args=(n,)) for n in range(writers)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    assert failures == []
    outcome = check(db)
    assert outcome.bad is None
    assert outcome.checked == 4 + writers * rounds * 2  # computed: the template's users plus every note


# -- tampering ------------------------------------------------------------------------------------------


def test_verify_names_an_event_whose_content_was_changed(db: Database, people: People) -> None:
    some_work(db, people)
    target = events(db)[-2]  # the job's creation
    forge_after(db, target.id or 0, '{"code": "AC-1", "title": "Something else"}')
    bad = verify(db)
    assert bad is not None
    assert (bad.event_id, bad.kind) == (target.id, "changed")


def test_verify_names_the_event_after_a_changed_and_rehashed_one(db: Database, people: People) -> None:
    some_work(db, people)
    target, after = events(db)[-2:]
    forged = AuditEvent.model_validate({**target.model_dump(), "after": {"code": "AC-1", "title": "Other"}})
    digest = chain_hash(content_of(forged), target.prev_sha256)
    drop_guards(db)
    with db.engine.begin() as conn:  # the forger knows the recipe: the changed event verifies alone
        conn.execute(
            text("UPDATE audit_event SET after = :after, sha256 = :sha WHERE id = :id")
            if db.is_sqlite
            else text("UPDATE audit_event SET after = CAST(:after AS jsonb), sha256 = :sha WHERE id = :id"),
            {"after": '{"code": "AC-1", "title": "Other"}', "sha": digest, "id": target.id},
        )
    bad = verify(db)
    assert bad is not None
    assert (bad.event_id, bad.kind) == (after.id, "broken-link")


def test_verify_names_the_event_after_a_removed_one(db: Database, people: People) -> None:
    some_work(db, people)
    trail = events(db)
    middle = len(trail) // 2
    remove_event(db, trail[middle].id or 0)
    bad = verify(db)
    assert bad is not None
    assert (bad.event_id, bad.kind) == (trail[middle + 1].id, "removed")
    assert f"event {trail[middle].id} " in bad.message


def test_verify_names_the_oldest_event_left_when_the_first_ones_were_removed(
    db: Database, people: People
) -> None:
    trail = events(db)
    remove_event(db, trail[0].id or 0)
    bad = verify(db)
    assert bad is not None
    assert (bad.event_id, bad.kind) == (trail[1].id, "removed")


def test_a_removed_newest_event_leaves_a_chain_that_holds_but_a_shorter_head(db: Database) -> None:
    # The chain alone cannot show a cut at its end (audit_chain.verify's docstring): the head
    # hash that `claybench audit verify` prints is what shows it.
    trail = events(db)
    remove_event(db, trail[-1].id or 0)
    outcome = check(db)
    assert outcome.bad is None
    assert outcome.head_sha256 == trail[-2].sha256 != trail[-1].sha256


@pytest.mark.parametrize("backend", ["sqlite"])
@pytest.mark.parametrize(
    "statement",
    ["UPDATE audit_event SET action = 'forged'", "DELETE FROM audit_event WHERE id = 1"],
    ids=["update", "delete"],
)
def test_sqlite_triggers_refuse_to_change_or_remove_an_event(db: Database, statement: str) -> None:
    before = [(e.id, e.action, e.after) for e in events(db)]
    with pytest.raises(DBAPIError) as refused, db.engine.begin() as conn:
        conn.execute(text(statement))
    assert REFUSAL in str(refused.value)
    assert [(e.id, e.action, e.after) for e in events(db)] == before
    assert verify(db) is None


# -- the migration that sealed older events -------------------------------------------------------------


@pytest.fixture
def unmigrated_url(backend: str, tmp_path: Path) -> Iterator[str]:
    """An empty database of this run's backend, for migrating step by step."""
    if backend == "sqlite":
        yield f"sqlite:///{tmp_path / 'unmigrated.sqlite3'}"
        return
    admin = os.environ.get(PG_ENV)
    if not admin:
        pytest.skip(f"no PostgreSQL server for the tests ({PG_ENV} not set)")
    name = f"claybench_ac_{uuid.uuid4().hex[:10]}"
    engine = create_engine(admin, isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    yield make_url(admin).set(database=name).render_as_string(hide_password=False)
    with engine.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
    engine.dispose()


def test_the_migration_seals_events_written_before_the_chain_in_id_order(unmigrated_url: str) -> None:
    upgrade(unmigrated_url, "0004")
    old = Database(unmigrated_url)
    try:
        at, after = (
            (":at", ":after") if old.is_sqlite else ("CAST(:at AS timestamp)", "CAST(:after AS jsonb)")
        )
        insert = text(
            "INSERT INTO audit_event (at, actor, entity, entity_id, action, after) "
            f"VALUES ({at}, 'system', 'job', :n, 'create', {after})"
        )
        with old.engine.begin() as conn:
            for n, value in enumerate(['{"n": 1}', '{"mass_g": 45.0}', "null"]):
                conn.execute(insert, {"at": f"2026-11-02 08:30:0{n}.125000", "n": n, "after": value})
    finally:
        old.dispose()
    upgrade(unmigrated_url)
    db = Database(unmigrated_url)
    try:
        trail = events(db)
        assert [e.entity_id for e in trail] == [0, 1, 2]
        assert trail[0].prev_sha256 == GENESIS
        assert [e.prev_sha256 for e in trail[1:]] == [e.sha256 for e in trail[:-1]]
        assert verify(db) is None
        with db.transaction() as s:  # the app's next event continues the sealed chain
            added = audit.record(s, None, "job", 3, "create")
        assert added.prev_sha256 == trail[-1].sha256
        assert verify(db) is None
    finally:
        db.dispose()
