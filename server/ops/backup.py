"""``claybench backup DIR`` and ``claybench restore DIR``: every table, there and back, checked.

Everything the laboratory keeps is in the database, issued report PDFs and their AGS4 files
included (tables ``report`` and ``report_ags4``), so a copy of the database is the whole backup.
SQLite is copied by its online backup API (``sqlite_copy``), PostgreSQL by ``pg_dump`` in custom
format (``pg_tools``); both while the app keeps running. Beside the dump, ``manifest.json`` records
the backend, the schema revision, the Claybench version, the time, every table's rows and the
dump's SHA-256 (``manifest``).

A restore refuses, before it writes anything, a folder that is missing or incomplete, a dump whose
size or SHA-256 is not the manifest's, a dump of the other backend or of a schema this Claybench
does not know, and a target database that holds anything at all: a backup goes into an empty
database, never over or beside other rows (PostgreSQL's audit trail could not be cleared anyway).
After the restore every table's rows are counted again and compared with the manifest.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import UTC, datetime
from importlib import metadata
from pathlib import Path

from alembic.script import ScriptDirectory
from sqlalchemy import Connection, create_engine
from sqlalchemy.engine import make_url
from sqlalchemy.exc import DBAPIError
from sqlalchemy.pool import NullPool

from server.db.migrate import alembic_config
from server.ops import pg_grants, pg_tools, sqlite_copy
from server.ops.errors import BackupRefused, RestoreMismatch
from server.ops.inventory import existing_objects, row_counts, schema_revision
from server.ops.manifest import MANIFEST, Manifest, check_dump, read_manifest, sha256_of

DUMP_FILES = {"sqlite": "claybench.sqlite3", "postgresql": "claybench.dump"}


@dataclass(frozen=True)
class Written:
    """A finished backup folder."""

    folder: Path
    manifest: Manifest

    def summary(self) -> str:
        m = self.manifest
        return "\n".join(
            [
                f"backed up the {m.backend} database (schema {m.schema_revision}) to {self.folder}",
                f"  {m.dump_file:<20} {m.dump_bytes} bytes, sha256 {m.dump_sha256} ({m.tool})",
                f"  {MANIFEST:<20} {len(m.tables)} tables, {m.rows} rows",
            ]
        )


@dataclass(frozen=True)
class Restored:
    """A restore whose every table count matched its manifest."""

    folder: Path
    target: str  # the database's URL, password hidden
    manifest: Manifest
    head: str  # the newest schema revision this Claybench knows
    revoked: int  # grants the target's default privileges had added, taken back (PostgreSQL)

    def summary(self) -> str:
        m = self.manifest
        width = max(map(len, m.tables), default=0) + 2
        lines = [
            f"restored {self.folder} ({m.backend}, schema {m.schema_revision}, Claybench "
            f"{m.claybench_version}, backed up {m.created_at}) into {self.target}",
            *(f"  {table:<{width}} {rows}" for table, rows in sorted(m.tables.items())),
            f"every table's row count matches the manifest: {len(m.tables)} tables, {m.rows} rows",
        ]
        if m.backend == "postgresql":
            lines.append(
                f"grants to other roles as backed up, on {len(m.grants)} tables and sequences"
                + (
                    f" ({self.revoked} added by the target's default privileges taken back)"
                    if self.revoked
                    else ""
                )
            )
        if m.schema_revision != self.head:
            lines.append(
                f"the schema is at {m.schema_revision}, older than this Claybench's {self.head}: "
                "run `claybench migrate` before starting the app"
            )
        return "\n".join(lines)


def backup(database_url: str, folder: Path) -> Written:
    """Copy the database at ``database_url`` into ``folder`` (new or empty) with its manifest."""
    backend = _backend(database_url)
    _claim_folder(folder)
    dump = folder / DUMP_FILES[backend]
    partial = dump.with_name(dump.name + ".partial")
    try:
        copied = (_sqlite_backup if backend == "sqlite" else _pg_backup)(database_url, partial)
        partial.replace(dump)
    except BaseException:
        partial.unlink(missing_ok=True)  # nothing but a finished backup stays in the folder
        raise
    manifest = Manifest(
        backend=backend,
        schema_revision=copied.revision,
        claybench_version=_claybench_version(),
        created_at=datetime.now(UTC).isoformat(timespec="seconds"),
        tool=copied.tool,
        dump_file=dump.name,
        dump_bytes=dump.stat().st_size,
        dump_sha256=sha256_of(dump),
        tables=copied.counts,
        grants=copied.grants,
    )
    manifest.write(folder)
    return Written(folder, manifest)


def restore(database_url: str, folder: Path) -> Restored:
    """Restore the backup in ``folder`` into the empty database at ``database_url``, then count."""
    if not folder.is_dir():
        raise BackupRefused(f"no backup folder at {folder}")
    manifest = read_manifest(folder)
    backend = _backend(database_url)
    if manifest.backend != backend:
        raise BackupRefused(
            f"{folder} is a backup of a {manifest.backend} database and the target is {backend}: "
            f"restore it into a {manifest.backend} database"
        )
    dump = check_dump(folder, manifest)
    head = _known_revision(manifest)
    _refuse_unless_empty(database_url)
    revoked = 0
    if backend == "sqlite":
        sqlite_copy.copy_in(dump, _sqlite_path(database_url))
    else:
        pg_tools.restore(database_url, dump)
        revoked = _grants_as_backed_up(database_url, manifest)
    with _connected(database_url) as conn:
        counts = row_counts(conn)
    _compare(manifest.tables, counts)
    return Restored(folder, _shown(database_url), manifest, head, revoked)


@dataclass(frozen=True)
class _Copied:
    """What a dump holds, read in the snapshot it was made from."""

    tool: str
    revision: str
    counts: dict[str, int]
    grants: dict[str, list[str]] = field(default_factory=dict)


def _backend(database_url: str) -> str:
    backend = make_url(database_url).get_backend_name()
    if backend not in DUMP_FILES:
        raise BackupRefused(f"backup and restore know SQLite and PostgreSQL databases, not {backend}")
    return backend


def _shown(database_url: str) -> str:
    return make_url(database_url).render_as_string(hide_password=True)


def _claybench_version() -> str:
    """The installed package's version; a source checkout run without installing has none."""
    try:
        return metadata.version("claybench")
    except metadata.PackageNotFoundError:
        return "unknown (not installed)"


def _claim_folder(folder: Path) -> None:
    """A new or empty folder: a backup never overwrites or mixes with an earlier one."""
    if folder.exists() and not folder.is_dir():
        raise BackupRefused(f"{folder} is a file: name a new or empty folder for the backup")
    if folder.is_dir() and any(folder.iterdir()):
        raise BackupRefused(f"{folder} is not empty: name a new or empty folder for each backup")
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise BackupRefused(f"cannot make the folder {folder}: {exc.strerror}") from exc


@contextmanager
def _connected(database_url: str, *, read_only_sqlite: bool = False) -> Iterator[Connection]:
    """One connection of its own (no pool left behind); a database that cannot be reached or
    read is a refusal with the driver's reason."""
    url = database_url
    if read_only_sqlite:
        url = f"sqlite:///{_sqlite_path(database_url).resolve().as_uri()}?mode=ro&uri=true"
    engine = create_engine(url, poolclass=NullPool)
    try:
        with engine.connect() as conn:
            yield conn
    except DBAPIError as exc:
        raise BackupRefused(f"cannot read the database at {_shown(database_url)}: {exc.orig}") from exc
    finally:
        engine.dispose()


def _sqlite_path(database_url: str) -> Path:
    name = make_url(database_url).database
    if not name or name == ":memory:":
        raise BackupRefused("an in-memory SQLite database has nothing to back up or restore into")
    return Path(name)


def _sqlite_backup(database_url: str, out: Path) -> _Copied:
    """The online copy, counted in the copy itself: the manifest describes exactly what was written."""
    source = _sqlite_path(database_url)
    if not source.is_file():
        raise BackupRefused(f"no SQLite database at {source}")
    sqlite_copy.copy_out(source, out)
    copy_url = f"sqlite:///{out}"
    with _connected(copy_url, read_only_sqlite=True) as conn:
        return _Copied(sqlite_copy.TOOL, _revision(conn, database_url), row_counts(conn))


def _pg_backup(database_url: str, out: Path) -> _Copied:
    """pg_dump of an exported snapshot: the counts, the revision and the grants are read in the
    transaction that exported it, so they describe the dump exactly while the app keeps writing."""
    with _connected(database_url) as conn:
        conn.execution_options(isolation_level="REPEATABLE READ", postgresql_readonly=True)
        with conn.begin():
            snapshot = str(conn.exec_driver_sql("SELECT pg_export_snapshot()").scalar_one())
            revision, counts, grants = _revision(conn, database_url), row_counts(conn), pg_grants.grants(conn)
            tool = pg_tools.dump(database_url, snapshot, out)
    return _Copied(tool, revision, counts, grants)


def _revision(conn: Connection, database_url: str) -> str:
    revision = schema_revision(conn)
    if not revision:
        raise BackupRefused(
            f"the database at {_shown(database_url)} has no schema revision (alembic_version): "
            "it is not a Claybench database"
        )
    return revision


def _known_revision(manifest: Manifest) -> str:
    """This Claybench's newest revision, once the backup's is one of its own; a backup made by a
    newer Claybench is restored by that version (then its data would meet a schema it knows)."""
    script = ScriptDirectory.from_config(alembic_config(""))
    if manifest.schema_revision not in {r.revision for r in script.walk_revisions()}:
        raise BackupRefused(
            f"the backup's schema revision {manifest.schema_revision!r} is not one this Claybench knows "
            f"(the backup was made by Claybench {manifest.claybench_version}): restore it with that version"
        )
    return str(script.get_current_head())


def _refuse_unless_empty(database_url: str) -> None:
    if make_url(database_url).get_backend_name() == "sqlite" and not _sqlite_path(database_url).exists():
        return  # a new file: nothing to check, and no empty file made by looking
    with _connected(database_url) as conn:
        found = existing_objects(conn)
    if found:
        shown = ", ".join(found[:5]) + (f" and {len(found) - 5} more" if len(found) > 5 else "")
        raise BackupRefused(
            f"the target database {_shown(database_url)} is not empty ({shown}): "
            "restore only into a new, empty database (do not run `claybench migrate` on it first)"
        )


def _grants_as_backed_up(database_url: str, manifest: Manifest) -> int:
    """Take back what the target's default privileges added (server/ops/pg_grants.py), then check
    that every relation's grants are the backup's; returns how many were taken back."""
    with _connected(database_url) as conn, conn.begin():
        revoked = pg_grants.take_back_extras(conn, manifest.grants)
        found = pg_grants.grants(conn)
    if found != manifest.grants:
        differ = sorted(
            name
            for name in found.keys() | manifest.grants.keys()
            if found.get(name) != manifest.grants.get(name)
        )
        raise RestoreMismatch(
            "the restored database's privileges are not the backup's; do not use it: " + ", ".join(differ)
        )
    return revoked


def _compare(expected: dict[str, int], found: dict[str, int]) -> None:
    differ = [
        f"{table}: {expected.get(table, 'absent')} in the backup, {found.get(table, 'absent')} restored"
        for table in sorted(expected.keys() | found.keys())
        if expected.get(table) != found.get(table)
    ]
    if differ:
        raise RestoreMismatch(
            "the restored database does not hold the backup's rows; do not use it: " + "; ".join(differ)
        )
