"""Counting the SQL a piece of code sends: the statements run on every engine of a Database (the
writing engine, and on PostgreSQL the reading one of ``Database.read``) while a block runs."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

from sqlalchemy import event

from server.db.session import Database


@contextmanager
def statements_sent(db: Database) -> Iterator[list[str]]:
    """Every SQL statement sent to the database inside the block, in order."""
    sent: list[str] = []

    def record(_conn: Any, _cursor: Any, statement: str, *_args: Any) -> None:
        sent.append(statement)

    engines = {db.engine, db.reading_engine}
    for engine in engines:
        event.listen(engine, "before_cursor_execute", record)
    try:
        yield sent
    finally:
        for engine in engines:
            event.remove(engine, "before_cursor_execute", record)
