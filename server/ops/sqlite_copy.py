"""Copying an SQLite database file with SQLite's online backup API, in both directions.

Copying the file with ``cp`` while the app runs can catch a page half-written and misses what
still sits in the write-ahead log; the backup API reads through SQLite itself. Copying every page
in one step (``pages=-1``) holds one read transaction, so in WAL mode the copy is one consistent
snapshot while the app's writers carry on (they are not blocked, and the copy is not restarted by
their commits). The copy is then switched out of WAL mode so that the backup is one self-contained
file, and checked with ``PRAGMA integrity_check`` before it counts as written.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

from server.db.session import BUSY_TIMEOUT_MS
from server.ops.errors import BackupRefused

TOOL = f"SQLite {sqlite3.sqlite_version} online backup"


def _open(path: Path, mode: str) -> sqlite3.Connection:
    """A connection that never creates a missing file by accident (``mode=rw`` or ``ro``)."""
    uri = f"{path.resolve().as_uri()}?mode={mode}"
    return sqlite3.connect(uri, uri=True, timeout=BUSY_TIMEOUT_MS / 1000)


def _integrity(conn: sqlite3.Connection, path: Path) -> None:
    found = [str(row[0]) for row in conn.execute("PRAGMA integrity_check")]
    if found != ["ok"]:
        raise BackupRefused(f"{path} fails SQLite's integrity check: {'; '.join(found[:5])}")


def copy_out(source: Path, dest: Path) -> None:
    """The live database at ``source`` into a new file ``dest``, while the app keeps writing."""
    src = _open(source, "rw")  # rw, not ro: a reader of a WAL database may need to build its -shm
    try:
        dst = sqlite3.connect(dest)
        try:
            src.backup(dst)
            dst.execute("PRAGMA journal_mode=DELETE")
            _integrity(dst, dest)
        finally:
            dst.close()
    except sqlite3.Error as exc:
        raise BackupRefused(f"SQLite could not copy {source}: {exc}") from exc
    finally:
        src.close()


def copy_in(backup: Path, target: Path) -> None:
    """The backup file into the (empty) database at ``target``, in one step: all pages or none.

    Writing through the backup API rather than replacing the file keeps any connection that has
    the target open consistent, and leaves no stale -wal file to be replayed over the restored
    pages. The target is put back in WAL mode, as the app runs it."""
    src = _open(backup, "ro")
    try:
        _integrity(src, backup)
        target.parent.mkdir(parents=True, exist_ok=True)
        dst = sqlite3.connect(target, timeout=BUSY_TIMEOUT_MS / 1000)
        try:
            src.backup(dst)
            dst.execute("PRAGMA journal_mode=WAL")
        finally:
            dst.close()
    except sqlite3.Error as exc:
        raise BackupRefused(f"SQLite could not restore {backup} into {target}: {exc}") from exc
    finally:
        src.close()
