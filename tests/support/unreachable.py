"""A database the app cannot open, on either backend, for the checks that must say so."""

from __future__ import annotations

from pathlib import Path

from sqlalchemy.engine import make_url


def unreachable_url(backend: str, folder: Path, database_url: str) -> str:
    """An SQLite "file" that is a folder, or a database that does not exist on the PostgreSQL
    test server of ``database_url``: both refuse the first connection."""
    if backend == "sqlite":
        path = folder / "not-a-file.sqlite3"
        path.mkdir()
        return f"sqlite:///{path}"
    return make_url(database_url).set(database="claybench_no_such_db").render_as_string(False)
