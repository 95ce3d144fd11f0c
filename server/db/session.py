"""The database connection, and the one way to write: ``Database.transaction()``.

Reads use a plain session. Every use-case that changes data runs inside one transaction
that commits at the end or rolls back whole, so a change and its audit event land together.

SQLite: a transaction that reads and then writes gets SQLITE_BUSY at once under concurrent
writers, ignoring busy_timeout; write transactions therefore begin with ``BEGIN IMMEDIATE``
(SQLAlchemy's SQLite dialect docs, "Serializable isolation / Savepoints / Transactional DDL").
Pysqlite's own implicit BEGIN is turned off so that we emit BEGIN ourselves.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from sqlalchemy import Engine, create_engine, event
from sqlalchemy.engine import make_url
from sqlmodel import Session

_IMMEDIATE = "claybench_immediate"


def make_engine(url: str) -> Engine:
    """An SQLAlchemy engine for an SQLite file or a PostgreSQL server, tuned for the app."""
    parsed = make_url(url)
    if parsed.get_backend_name() != "sqlite":
        return create_engine(url, pool_size=10, max_overflow=20, pool_pre_ping=True)
    if parsed.database and parsed.database != ":memory:":
        Path(parsed.database).parent.mkdir(parents=True, exist_ok=True)
    engine = create_engine(
        url, connect_args={"check_same_thread": False, "timeout": 5}, pool_size=10, max_overflow=20
    )

    @event.listens_for(engine, "connect")
    def _pragmas(dbapi_conn: Any, _record: Any) -> None:
        dbapi_conn.isolation_level = None
        cur = dbapi_conn.cursor()
        for pragma in ("journal_mode=WAL", "synchronous=NORMAL", "busy_timeout=5000", "foreign_keys=ON"):
            cur.execute(f"PRAGMA {pragma}")
        cur.close()

    @event.listens_for(engine, "begin")
    def _begin(conn: Any) -> None:
        immediate = conn.get_execution_options().get(_IMMEDIATE, False)
        conn.exec_driver_sql("BEGIN IMMEDIATE" if immediate else "BEGIN")

    return engine


class Database:
    """The app's handle on its database: read sessions and write transactions."""

    def __init__(self, url: str):
        self.url = url
        self.engine = make_engine(url)
        self.is_sqlite = self.engine.dialect.name == "sqlite"

    def session(self) -> Session:
        """A session for reading; it must not be used to commit changes."""
        return Session(self.engine, expire_on_commit=False)

    @contextmanager
    def transaction(self) -> Iterator[Session]:
        """One unit of work: commits when the block ends, rolls back everything on error."""
        with Session(self.engine, expire_on_commit=False) as session:
            session.connection(execution_options={_IMMEDIATE: True})
            try:
                yield session
                session.commit()
            except BaseException:
                session.rollback()
                raise

    def dispose(self) -> None:
        self.engine.dispose()
