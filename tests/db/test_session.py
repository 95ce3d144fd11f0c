"""The database handle: SQLite's connection settings, whole transactions, concurrent writers,
and the optimistic lock every change of a test goes through."""

from __future__ import annotations

import threading
import time
from collections.abc import Callable

import pytest
from sqlalchemy import text
from sqlalchemy.exc import IntegrityError, OperationalError
from sqlmodel import select

from server.db.queries import bump_test
from server.db.session import Database
from server.db.tables import AuditEvent, Client, LabTest, Location
from server.services import audit
from tests.conftest import People
from tests.support.scenario import small_job

sqlite_only = pytest.mark.parametrize("backend", ["sqlite"])


def _names(db: Database) -> list[str]:
    with db.session() as s:
        return sorted(c.name for c in s.exec(select(Client)))


def _audited(db: Database, entity: str) -> int:
    with db.session() as s:
        return len(s.exec(select(AuditEvent).where(AuditEvent.entity == entity)).all())


def _run_together(work: Callable[[int], None], threads: int = 2) -> list[BaseException]:
    """Run ``work(i)`` in several threads at once; the exceptions they raised."""
    errors: list[BaseException] = []

    def run(i: int) -> None:
        try:
            work(i)
        except BaseException as exc:  # noqa: B036 - collected and asserted on by the test
            errors.append(exc)

    started = [threading.Thread(target=run, args=(i,)) for i in range(threads)]
    for thread in started:
        thread.start()
    for thread in started:
        thread.join(timeout=30)
    assert not any(t.is_alive() for t in started), "a writer never finished"
    return errors


@sqlite_only
@pytest.mark.parametrize(
    ("pragma", "expected"),
    [
        ("journal_mode", "wal"),  # readers never block the writer (sqlite.org/wal.html)
        ("foreign_keys", 1),  # off by default in SQLite (sqlite.org/foreignkeys.html section 2)
        ("busy_timeout", 5000),  # ms a writer waits for another's lock (common practice)
    ],
)
def test_every_sqlite_connection_gets_the_apps_pragmas(db: Database, pragma: str, expected: object) -> None:
    # Two connections at once, so the second comes from a fresh connect, not the first one reused.
    with db.engine.connect() as first, db.engine.connect() as second:
        for conn in (first, second):
            assert conn.exec_driver_sql(f"PRAGMA {pragma}").scalar() == expected


@sqlite_only
def test_sqlite_refuses_a_row_that_points_at_nothing(db: Database) -> None:
    with pytest.raises(IntegrityError), db.transaction() as s:
        s.add(Location(job_id=999_999, code="BH1"))


def test_a_transaction_commits_the_change_and_its_audit_event_together(db: Database) -> None:
    with db.transaction() as s:
        client = Client(name="Committed Ltd")
        s.add(client)
        s.flush()
        audit.record(s, None, "client", client.id or 0, "create", after={"name": client.name})
    assert _names(db) == ["Committed Ltd"]
    assert _audited(db, "client") == 1


def test_a_transaction_rolls_back_everything_when_the_block_raises(db: Database) -> None:
    class Refusal(Exception):
        pass

    with pytest.raises(Refusal), db.transaction() as s:
        client = Client(name="Rolled Back Ltd")
        s.add(client)
        s.flush()  # the rows reach the database inside the transaction ...
        audit.record(s, None, "client", client.id or 0, "create", after={"name": client.name})
        s.flush()
        assert s.exec(select(AuditEvent).where(AuditEvent.entity == "client")).first() is not None
        raise Refusal("... and the error takes them back out")
    assert _names(db) == []
    assert _audited(db, "client") == 0


def test_a_failed_transaction_leaves_the_database_usable(db: Database) -> None:
    with pytest.raises(RuntimeError), db.transaction() as s:
        s.add(Client(name="First Try Ltd"))
        raise RuntimeError("refused")
    with db.transaction() as s:
        s.add(Client(name="Second Try Ltd"))
    assert _names(db) == ["Second Try Ltd"]


@sqlite_only
def test_two_threads_reading_then_writing_at_once_both_succeed_on_sqlite(db: Database) -> None:
    start = threading.Barrier(2)
    rounds = 5

    def read_then_write(i: int) -> None:
        start.wait(timeout=10)
        for n in range(rounds):
            with db.transaction() as s:
                seen = len(s.exec(select(Client)).all())
                time.sleep(0.02)  # hold the transaction open so the other thread arrives meanwhile
                s.add(Client(name=f"Writer {i} round {n} saw {seen}"))

    assert _run_together(read_then_write) == []
    names = _names(db)
    assert len(names) == 2 * rounds
    # Each transaction saw every row committed before it: no two saw the same count.
    assert sorted(int(n.rsplit(" ", 1)[1]) for n in names) == list(range(2 * rounds))


@sqlite_only
def test_without_begin_immediate_the_same_race_hits_database_is_locked(db: Database) -> None:
    # Why transaction() begins IMMEDIATE: a deferred transaction that has read and then writes
    # gets SQLITE_BUSY at once when another writer got there first (sqlite.org/lang_transaction.html,
    # "Read transactions versus write transactions"). This is the failure the test above guards against.
    both_read = threading.Barrier(2)

    def deferred_read_then_write(i: int) -> None:
        with db.engine.connect() as conn, conn.begin():  # our engine emits a plain BEGIN here
            conn.execute(text("SELECT count(*) FROM client")).scalar_one()
            both_read.wait(timeout=10)
            conn.execute(text("INSERT INTO client (name, contact) VALUES (:n, '')"), {"n": f"Deferred {i}"})

    errors = _run_together(deferred_read_then_write)
    assert len(errors) == 1
    assert isinstance(errors[0], OperationalError)
    assert "database is locked" in str(errors[0])


def test_bump_test_changes_a_test_whose_version_is_the_one_seen(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    with db.transaction() as s:
        test = s.get(LabTest, job.test_id)
        assert test is not None and test.version == 1
        assert bump_test(s, test, 1, status="draft").changed is True
        assert (test.version, test.status) == (2, "draft")  # the loaded object is refreshed
    with db.session() as s:
        stored = s.get(LabTest, job.test_id)
        assert stored is not None and (stored.version, stored.status) == (2, "draft")


def test_bump_test_refuses_a_stale_version_and_changes_nothing(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    with db.session() as s:
        seen = s.get(LabTest, job.test_id)  # a person opens the test at version 1 ...
    assert seen is not None
    with db.transaction() as s:  # ... somebody else saves first ...
        other = s.get(LabTest, job.test_id)
        assert other is not None and bump_test(s, other, 1, status="draft", readings={"by": "other"})
    with db.transaction() as s:  # ... and the first person's change, made against version 1, is refused.
        mine = s.get(LabTest, job.test_id)
        assert mine is not None
        assert bump_test(s, mine, seen.version, status="submitted", readings={"by": "me"}).changed is False
    with db.session() as s:
        stored = s.get(LabTest, job.test_id)
        assert stored is not None
        assert (stored.version, stored.status, stored.readings) == (2, "draft", {"by": "other"})


def test_a_read_on_a_connection_the_server_dropped_runs_again_on_a_fresh_one(
    db: Database, backend: str
) -> None:
    """``Database.read`` takes pooled connections without a ping (one round trip less on every
    request): when the server has dropped one (a restart, an idle timeout), the read fails,
    the pool is refreshed, and the read runs once more."""
    if backend != "postgresql":
        pytest.skip("SQLite has no server to drop a connection")
    query = text("SELECT pg_backend_pid()")
    first = db.read(lambda conn: conn.execute(query).scalar_one())
    with db.engine.connect() as other:  # another connection ends the reader's pooled one
        other.execute(text("SELECT pg_terminate_backend(:pid)"), {"pid": first})
        other.commit()
    time.sleep(0.2)
    second = db.read(lambda conn: conn.execute(query).scalar_one())
    assert second != first
