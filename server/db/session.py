"""The database connection, and the one way to write: ``Database.transaction()``.

Reads use a plain session. Every use-case that changes data runs inside one transaction
that commits at the end or rolls back whole, so a change and its audit event land together.

SQLite: a transaction that reads and then writes gets SQLITE_BUSY at once under concurrent
writers, ignoring busy_timeout; write transactions therefore begin with ``BEGIN IMMEDIATE``
(SQLAlchemy's SQLite dialect docs, "Serializable isolation / Savepoints / Transactional DDL").
Pysqlite's own implicit BEGIN is turned off so that we emit BEGIN ourselves.

SQLite has one writer at a time. Left to SQLite, writers of one process queue in its busy
handler, which sleeps in growing steps (up to 100 ms) and so gives a p95 near a second under
20 writers, and a "database is locked" once one waited past busy_timeout (STACK-NOTES,
"Measured on Claybench itself"). So the writers of one process take turns on a first-come,
first-served queue instead (``_WriterQueue``, one per database file), and a transaction that
does not get its turn, or SQLite's write lock (another process: the CLI, a second worker),
within ``write_budget_s`` raises ``DatabaseBusy``: nothing was stored, and the web layer answers
503 with Retry-After (``server/web/busy.py``). Reads never queue (WAL: readers and the one
writer do not block each other). PostgreSQL has row locks and concurrent writers; none of this
applies to it.
"""

from __future__ import annotations

import os
import threading
import time
from collections import deque
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any, TypeVar

from sqlalchemy import Connection, Engine, create_engine, event
from sqlalchemy.engine import make_url
from sqlalchemy.exc import DBAPIError, OperationalError
from sqlmodel import Session

T = TypeVar("T")

_IMMEDIATE = "claybench_immediate"
_WAIT_MS = "claybench_wait_ms"

BUSY_TIMEOUT_MS = 5000
"""How long SQLite waits for another connection's write lock (common practice; STACK-NOTES). The
app's own transactions wait only what is left of their budget; this is for any other use of a
connection, and for other processes on the same file (the CLI, a worker), which set their own."""

WRITE_BUDGET_S = 5.0
"""How long a write transaction may wait for its turn before the request is answered 503: the
SQLite busy_timeout of STACK-NOTES, well inside a browser's or proxy's patience (common practice)."""

BUDGET_SLACK_MS = 250
"""How far the rest of a write's budget may differ from the connection's own wait for SQLite's lock
(``BUSY_TIMEOUT_MS``) before it is set to the rest and back: two statements more inside the one
writer's turn, on every save, for a quarter of a second either way (common practice)."""

RETRY_AFTER_S = 1
"""What a busy answer tells the client to wait (RFC 9110 section 10.2.3): a turn takes ~10 ms, so a
second is plenty for a queue of writers to drain (STACK-NOTES, "Measured on Claybench itself")."""

_SQLITE_BUSY, _SQLITE_LOCKED = 5, 6  # sqlite.org/rescode.html (primary codes)


class DatabaseBusy(Exception):
    """Other writers held the database for the whole budget: nothing was stored; try again shortly."""

    retry_after_s = RETRY_AFTER_S

    def __init__(self, waited_s: float):
        self.waited_s = waited_s
        super().__init__(
            f"the database was busy with other changes for {waited_s:.1f} s; nothing was stored, "
            f"try again in {RETRY_AFTER_S} s"
        )


def _is_busy(exc: OperationalError) -> bool:
    """SQLITE_BUSY or SQLITE_LOCKED ("database is locked"), by the code pysqlite gives (3.11+)."""
    code = getattr(exc.orig, "sqlite_errorcode", None)
    return isinstance(code, int) and code & 0xFF in (_SQLITE_BUSY, _SQLITE_LOCKED)


class _WriterQueue:
    """One writer at a time, served in the order they came (a plain Lock lets a waiter be
    overtaken again and again, and so wait past its budget while others get through).

    The turn passes straight from the writer that is done to the first one waiting. A thread
    that asks again while it has the turn would wait for itself (its second connection can
    never get SQLite's write lock), so that is refused at once as a programming error.
    """

    def __init__(self) -> None:
        self._mutex = threading.Lock()
        self._owner: int | None = None
        self._waiting: deque[tuple[int, threading.Event]] = deque()

    def acquire(self, timeout_s: float) -> bool:
        me = threading.get_ident()
        with self._mutex:
            if self._owner == me:
                raise RuntimeError("a write transaction inside another one on SQLite would wait for itself")
            if self._owner is None:
                self._owner = me
                return True
            turn = threading.Event()
            self._waiting.append((me, turn))
        if turn.wait(timeout_s):
            return True
        with self._mutex:
            if turn.is_set():  # handed over just as the wait ran out
                return True
            self._waiting.remove((me, turn))
            return False

    def release(self) -> None:
        with self._mutex:
            if self._waiting:
                self._owner, turn = self._waiting.popleft()
                turn.set()
            else:
                self._owner = None


_queues: dict[str, _WriterQueue] = {}
_queues_guard = threading.Lock()


def _queue_for(database: str | None) -> _WriterQueue:
    """The queue of every Database of this process on one SQLite file (an in-memory one: its own)."""
    if not database or database == ":memory:":
        return _WriterQueue()
    key = os.path.realpath(database)
    with _queues_guard:
        return _queues.setdefault(key, _WriterQueue())


def _reading_engine(url: str) -> Engine:
    """PostgreSQL's engine for ``Database.read``: autocommit, a pool of its own, no ping (the
    read retries once on a dropped connection instead, which a read may)."""
    return create_engine(url, pool_size=10, max_overflow=20, isolation_level="AUTOCOMMIT")


def make_engine(url: str) -> Engine:
    """An SQLAlchemy engine for an SQLite file or a PostgreSQL server, tuned for the app."""
    parsed = make_url(url)
    if parsed.get_backend_name() != "sqlite":
        return create_engine(url, pool_size=10, max_overflow=20, pool_pre_ping=True)
    if parsed.database and parsed.database != ":memory:":
        Path(parsed.database).parent.mkdir(parents=True, exist_ok=True)
    engine = create_engine(
        url,
        connect_args={"check_same_thread": False, "timeout": BUSY_TIMEOUT_MS / 1000},
        pool_size=10,
        max_overflow=20,
    )

    @event.listens_for(engine, "connect")
    def _pragmas(dbapi_conn: Any, _record: Any) -> None:
        dbapi_conn.isolation_level = None
        cur = dbapi_conn.cursor()
        for pragma in (
            "journal_mode=WAL",
            "synchronous=NORMAL",
            f"busy_timeout={BUSY_TIMEOUT_MS}",
            "foreign_keys=ON",
        ):
            cur.execute(f"PRAGMA {pragma}")
        cur.close()

    @event.listens_for(engine, "begin")
    def _begin(conn: Any) -> None:
        options = conn.get_execution_options()
        if not options.get(_IMMEDIATE, False):
            conn.exec_driver_sql("BEGIN")
            return
        wait_ms = options.get(_WAIT_MS)
        if wait_ms is None or abs(wait_ms - BUSY_TIMEOUT_MS) <= BUDGET_SLACK_MS:
            conn.exec_driver_sql("BEGIN IMMEDIATE")  # the connection's own wait is close enough
            return
        # Only BEGIN IMMEDIATE waits for the write lock (after it, in WAL mode, nothing does), so
        # the budget's rest applies to it alone, and the connection's usual wait comes back after.
        raw = conn.connection.dbapi_connection
        raw.execute(f"PRAGMA busy_timeout={int(wait_ms)}")
        try:
            conn.exec_driver_sql("BEGIN IMMEDIATE")
        finally:
            raw.execute(f"PRAGMA busy_timeout={BUSY_TIMEOUT_MS}")

    return engine


class Database:
    """The app's handle on its database: read sessions and write transactions."""

    def __init__(self, url: str, *, write_budget_s: float = WRITE_BUDGET_S):
        self.url = url
        self.engine = make_engine(url)
        self.is_sqlite = self.engine.dialect.name == "sqlite"
        self.write_budget_s = write_budget_s
        self._writers = _queue_for(self.engine.url.database) if self.is_sqlite else None
        self.reading_engine = self.engine if self.is_sqlite else _reading_engine(url)

    def session(self) -> Session:
        """A session for reading; it must not be used to commit changes."""
        return Session(self.engine, expire_on_commit=False)

    def read(self, query: Callable[[Connection], T]) -> T:
        """``query`` run on a connection for one plain Core read on the hot path (the session
        lookup of every request): no ORM session around it, and on PostgreSQL no BEGIN and
        ROLLBACK either (autocommit: one statement sees what is committed, as at READ
        COMMITTED), nor the pool's ping before it: a connection the server dropped (a restart)
        fails its read, is thrown away with the rest of the pool, and the read, which changed
        nothing, runs once more on a fresh one. ``query`` must not write."""
        try:
            with self.reading_engine.connect() as conn:
                return query(conn)
        except DBAPIError as exc:
            if not exc.connection_invalidated:
                raise
        with self.reading_engine.connect() as conn:
            return query(conn)

    @contextmanager
    def transaction(self) -> Iterator[Session]:
        """One unit of work: commits when the block ends, rolls back everything on error.

        On SQLite it first waits its turn among this process's writers, then for SQLite's write
        lock, both within ``write_budget_s``; ``DatabaseBusy`` when either does not come in time.
        """
        with self._turn() as options, Session(self.engine, expire_on_commit=False) as session:
            session.connection(execution_options={_IMMEDIATE: True, **options})
            try:
                yield session
                session.commit()
            except BaseException:
                session.rollback()
                raise

    @contextmanager
    def write(self) -> Iterator[Connection]:
        """The same unit of work as ``transaction`` on a bare connection, for Core statements on
        the hot path (a bench save): no ORM session to set up, flush and close around them."""
        with self._turn() as options, self.engine.connect() as conn:
            conn = conn.execution_options(**{_IMMEDIATE: True, **options})
            with conn.begin():
                yield conn

    @contextmanager
    def _turn(self) -> Iterator[dict[str, Any]]:
        """This process's turn to write (SQLite; PostgreSQL needs none): the options that give
        BEGIN IMMEDIATE what is left of the budget, and ``DatabaseBusy`` when it runs out."""
        if self._writers is None:
            yield {}
            return
        started = time.monotonic()
        if not self._writers.acquire(self.write_budget_s):
            raise DatabaseBusy(time.monotonic() - started)
        try:
            left_ms = max(0.0, self.write_budget_s - (time.monotonic() - started)) * 1000
            yield {_WAIT_MS: left_ms}
        except OperationalError as exc:
            if _is_busy(exc):
                raise DatabaseBusy(time.monotonic() - started) from exc
            raise
        finally:
            self._writers.release()

    def dispose(self) -> None:
        self.engine.dispose()
        if self.reading_engine is not self.engine:
            self.reading_engine.dispose()
