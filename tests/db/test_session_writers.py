"""Writers on one database at once: on SQLite they take turns in the order they came, each within
its budget, and are given up with ``DatabaseBusy`` (nothing stored) rather than "database is
locked"; reads never wait for them; on PostgreSQL nothing of this applies (writers overlap)."""

from __future__ import annotations

import sqlite3
import threading
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager

import pytest
from sqlalchemy.engine import make_url
from sqlmodel import select

from server.db.session import BUSY_TIMEOUT_MS, Database, DatabaseBusy
from server.db.tables import Client

sqlite_only = pytest.mark.parametrize("backend", ["sqlite"])
postgresql_only = pytest.mark.parametrize("backend", ["postgresql"])

BUDGET_S = 0.5  # a short budget keeps the tests quick; the app's is WRITE_BUDGET_S


def _names(db: Database) -> list[str]:
    with db.session() as s:
        return sorted(c.name for c in s.exec(select(Client)))


@contextmanager
def _in_thread(work: Callable[[], None]) -> Iterator[list[BaseException]]:
    """Run ``work`` in a thread during the block; the exceptions it raised, joined at the end."""
    errors: list[BaseException] = []

    def run() -> None:
        try:
            work()
        except BaseException as exc:  # noqa: B036 - collected and asserted on by the test
            errors.append(exc)

    thread = threading.Thread(target=run)
    thread.start()
    try:
        yield errors
    finally:
        thread.join(timeout=30)
        assert not thread.is_alive(), "the writer in the thread never finished"


@contextmanager
def _holding_the_turn(db: Database, name: str) -> Iterator[list[BaseException]]:
    """Another thread inside a write transaction (its row added, not committed) during the block."""
    inside, done = threading.Event(), threading.Event()

    def hold() -> None:
        with db.transaction() as s:
            s.add(Client(name=name))
            s.flush()
            inside.set()
            assert done.wait(timeout=20)

    with _in_thread(hold) as errors:
        assert inside.wait(timeout=10)
        try:
            yield errors
        finally:
            done.set()


@contextmanager
def _another_process_writing(url: str) -> Iterator[sqlite3.Connection]:
    """SQLite's write lock held through a connection of its own, as the CLI or a worker would."""
    other = sqlite3.connect(make_url(url).database or "", isolation_level=None)
    other.execute("BEGIN IMMEDIATE")
    try:
        yield other
    finally:
        if other.in_transaction:
            other.rollback()
        other.close()


@sqlite_only
def test_writers_on_sqlite_get_their_turn_in_the_order_they_came(database_url: str) -> None:
    db = Database(database_url)
    order: list[int] = []
    errors: list[BaseException] = []

    def writer(i: int) -> None:
        try:
            with db.transaction() as s:
                order.append(i)
                s.add(Client(name=f"Writer {i}"))
        except BaseException as exc:  # noqa: B036 - collected and asserted on below
            errors.append(exc)

    threads = [threading.Thread(target=writer, args=(i,)) for i in range(1, 6)]
    with _holding_the_turn(db, "First Ltd") as holder:
        for thread in threads:
            thread.start()
            time.sleep(0.1)  # each writer is queued before the next one comes (common practice: >> a turn)
    for thread in threads:
        thread.join(timeout=30)
    assert holder == errors == []
    assert order == [1, 2, 3, 4, 5]  # first come, first served: none overtaken while it waited
    assert _names(db) == ["First Ltd", *(f"Writer {i}" for i in range(1, 6))]
    db.dispose()


@sqlite_only
def test_a_writer_that_does_not_get_its_turn_within_the_budget_is_given_up_with_nothing_stored(
    database_url: str,
) -> None:
    db = Database(database_url, write_budget_s=BUDGET_S)
    with _holding_the_turn(db, "Holder Ltd") as holder:
        started = time.monotonic()
        with pytest.raises(DatabaseBusy) as busy, db.transaction() as s:
            s.add(Client(name="Given Up Ltd"))
        waited = time.monotonic() - started
    assert holder == []
    assert BUDGET_S <= waited < BUDGET_S + 1.0  # the budget, not SQLite's own 5 s wait
    assert busy.value.retry_after_s == 1
    assert "nothing was stored" in str(busy.value)
    assert _names(db) == ["Holder Ltd"]
    with db.transaction() as s:  # the turn is free again once the holder is done
        s.add(Client(name="Next Ltd"))
    assert _names(db) == ["Holder Ltd", "Next Ltd"]
    db.dispose()


@sqlite_only
def test_another_process_holding_sqlites_write_lock_makes_a_writer_busy_within_its_budget(
    database_url: str,
) -> None:
    db = Database(database_url, write_budget_s=BUDGET_S)
    with _another_process_writing(database_url):
        started = time.monotonic()
        with pytest.raises(DatabaseBusy), db.transaction() as s:
            s.add(Client(name="Blocked Ltd"))
        waited = time.monotonic() - started
        with db.session() as s:  # reading goes on meanwhile (sqlite.org/wal.html)
            assert s.exec(select(Client)).all() == []
    # SQLite's busy handler waited what was left of the budget, not busy_timeout's 5 s
    assert BUDGET_S * 0.8 <= waited < BUDGET_S + 1.0
    with db.engine.connect() as conn:  # every connection keeps its usual wait for other uses
        assert conn.exec_driver_sql("PRAGMA busy_timeout").scalar() == BUSY_TIMEOUT_MS
    with db.transaction() as s:
        s.add(Client(name="After Ltd"))
    assert _names(db) == ["After Ltd"]
    db.dispose()


@sqlite_only
def test_a_writer_waiting_on_another_process_gets_through_when_that_one_commits_in_time(
    database_url: str,
) -> None:
    db = Database(database_url, write_budget_s=5.0)
    with _another_process_writing(database_url) as other:
        other.execute("INSERT INTO client (name, contact) VALUES ('Other Process Ltd', '')")

        def write() -> None:
            with db.transaction() as s:
                s.add(Client(name="Waited Ltd"))

        with _in_thread(write) as errors:
            time.sleep(0.3)  # the writer is waiting in SQLite's busy handler meanwhile
            other.commit()
    assert errors == []
    assert _names(db) == ["Other Process Ltd", "Waited Ltd"]
    db.dispose()


@sqlite_only
def test_a_write_transaction_inside_another_on_sqlite_is_refused_at_once(db: Database) -> None:
    started = time.monotonic()
    with pytest.raises(RuntimeError, match="would wait for itself"), db.transaction() as outer:
        outer.add(Client(name="Outer Ltd"))
        with db.transaction() as inner:
            inner.add(Client(name="Inner Ltd"))
    assert time.monotonic() - started < 1.0  # refused at once, not after the budget
    assert _names(db) == []  # the outer one rolled back whole
    with db.transaction() as s:  # and the turn was given back
        s.add(Client(name="Later Ltd"))
    assert _names(db) == ["Later Ltd"]


def test_a_write_transaction_inside_an_open_read_session_commits(db: Database) -> None:
    with db.session() as reading:
        assert reading.exec(select(Client)).all() == []  # the read session holds its snapshot
        with db.transaction() as s:
            s.add(Client(name="Written Ltd"))
        assert _names(db) == ["Written Ltd"]


def test_reads_do_not_wait_for_a_writer_and_do_not_see_its_change_before_it_commits(db: Database) -> None:
    with _holding_the_turn(db, "Uncommitted Ltd") as holder:
        started = time.monotonic()
        assert _names(db) == []
        assert time.monotonic() - started < 1.0  # no wait behind the writer (sqlite.org/wal.html)
    assert holder == []
    assert _names(db) == ["Uncommitted Ltd"]


@postgresql_only
def test_on_postgresql_two_write_transactions_are_open_at_once(database_url: str) -> None:
    db = Database(database_url, write_budget_s=BUDGET_S)
    assert not db.is_sqlite
    first_inside, second_inside = threading.Event(), threading.Event()

    def first() -> None:
        with db.transaction() as s:
            s.add(Client(name="First Ltd"))
            s.flush()
            first_inside.set()
            # Inside its transaction, it waits for the second to be inside its own: writers that
            # took turns would never get here (the second would wait for the first to finish).
            assert second_inside.wait(timeout=10)

    with _in_thread(first) as errors:
        assert first_inside.wait(timeout=10)
        with db.transaction() as s:
            s.add(Client(name="Second Ltd"))
            s.flush()
            second_inside.set()
            time.sleep(BUDGET_S + 0.2)  # longer than the budget: PostgreSQL writers have none
    assert errors == []
    assert _names(db) == ["First Ltd", "Second Ltd"]
    db.dispose()


def test_twenty_threads_writing_at_once_all_commit(db: Database) -> None:
    start = threading.Barrier(20)
    rounds = 5
    errors: list[BaseException] = []

    def work(i: int) -> None:
        try:
            start.wait(timeout=10)
            for n in range(rounds):
                with db.transaction() as s:
                    s.exec(select(Client).where(Client.name == f"Writer {i}")).first()  # read, then write
                    s.add(Client(name=f"Writer {i} round {n}"))
        except BaseException as exc:  # noqa: B036 - collected and asserted on below
            errors.append(exc)

    threads = [threading.Thread(target=work, args=(i,)) for i in range(20)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join(timeout=60)
    assert not any(t.is_alive() for t in threads)
    assert errors == []
    assert len(_names(db)) == 20 * rounds
