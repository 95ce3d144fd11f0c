"""``claybench backup DIR`` and ``claybench restore DIR`` on SQLite and PostgreSQL, through the
command's own entry point: the demo's every row comes back (issued PDFs and AGS4 files byte for
byte), a backup taken while the app keeps saving is one consistent state, and a damaged or
mismatched backup, a missing folder and a target that holds anything are refused with nothing
written.

Expected values come from the databases themselves (the source's rows, counted and hashed here
with hashlib), never from the code under test; the refusals' wording is the command's own
contract (server/ops).
"""

from __future__ import annotations

import hashlib
import json
import threading
import time
import uuid
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pytest
import sqlalchemy as sa
from sqlalchemy.engine import make_url
from sqlalchemy.pool import NullPool
from sqlmodel import SQLModel

from server import cli
from server.config import Settings, get_settings
from server.db import tables  # noqa: F401  (every table in SQLModel.metadata)
from server.db.migrate import upgrade
from server.db.session import Database
from server.demo import load_demo
from server.services import jobs
from server.services.users import create_user
from tests.conftest import BACKENDS, People
from tests.db import test_postgres_roles
from tests.db.test_postgres_roles import Roles, _as, _shows_the_apps_privileges, run_script

roles = test_postgres_roles.roles  # the fixture: two role names of the test's own, dropped after
REFUSAL = "audit events"  # both guards' messages begin so (migrations 0001 and 0005)

# -- helpers -------------------------------------------------------------------------------------------


@dataclass
class Ran:
    code: int
    out: str
    err: str


def claybench(
    argv: list[str],
    url: str,
    data_dir: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
    owner_url: str = "",
) -> Ran:
    """``server.cli.main`` with the database given as an operator would: DATABASE_URL, and the schema
    owner's URL when it is another role's."""
    monkeypatch.setenv("DATABASE_URL", url)
    monkeypatch.setenv("CLAYBENCH_DATA_DIR", str(data_dir))
    if owner_url:
        monkeypatch.setenv("CLAYBENCH_MIGRATE_DATABASE_URL", owner_url)
    else:
        monkeypatch.delenv("CLAYBENCH_MIGRATE_DATABASE_URL", raising=False)
    get_settings.cache_clear()
    capsys.readouterr()
    try:
        code = cli.main(argv)
    finally:
        get_settings.cache_clear()
    printed = capsys.readouterr()
    return Ran(code, printed.out, printed.err)


@contextmanager
def empty_database(kind: str, folder: Path, pg_template: tuple[str, str] | None) -> Iterator[str]:
    """A database with nothing in it: a new SQLite path, or a new PostgreSQL database from template0."""
    if kind == "sqlite":
        yield f"sqlite:///{folder / f'empty-{uuid.uuid4().hex[:8]}' / 'claybench.sqlite3'}"
        return
    if pg_template is None:
        pytest.skip("no PostgreSQL server for the tests (CLAYBENCH_TEST_POSTGRES_URL not set)")
    admin = pg_template[0]
    name = f"claybench_r_{uuid.uuid4().hex[:10]}"
    engine = sa.create_engine(admin, isolation_level="AUTOCOMMIT", poolclass=NullPool)
    with engine.connect() as conn:
        conn.execute(sa.text(f'CREATE DATABASE "{name}" TEMPLATE template0'))
    try:
        yield make_url(admin).set(database=name).render_as_string(hide_password=False)
    finally:
        with engine.connect() as conn:
            conn.execute(sa.text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        engine.dispose()


@contextmanager
def connected(url: str) -> Iterator[sa.Connection]:
    engine = sa.create_engine(url, poolclass=NullPool)
    try:
        with engine.connect() as conn:
            yield conn
    finally:
        engine.dispose()


def every_row(url: str) -> dict[str, list[tuple[Any, ...]]]:
    """All rows of every table of the app's models and of alembic_version, in primary-key order."""
    with connected(url) as conn:
        found = [
            *SQLModel.metadata.sorted_tables,
            sa.Table("alembic_version", sa.MetaData(), autoload_with=conn),
        ]
        return {
            t.name: [tuple(r) for r in conn.execute(sa.select(t).order_by(*t.primary_key.columns))]
            for t in found
        }


def holds_nothing(url: str) -> bool:
    """No table at all (SQLite: no file either), by SQLAlchemy's inspector, not the code under test."""
    if url.startswith("sqlite"):
        path = Path(make_url(url).database or "")
        if not path.exists():
            return True
    with connected(url) as conn:
        return sa.inspect(conn).get_table_names() == []


def manifest_of(folder: Path) -> dict[str, Any]:
    found: dict[str, Any] = json.loads((folder / "manifest.json").read_text())
    return found


def dump_of(folder: Path) -> Path:
    return folder / str(manifest_of(folder)["dump_file"])


# -- the demo, there and back ------------------------------------------------------------------------


@pytest.fixture(scope="module", params=BACKENDS)
def demo_url(
    request: pytest.FixtureRequest,
    tmp_path_factory: pytest.TempPathFactory,
    pg_template: tuple[str, str] | None,
) -> Iterator[str]:
    """The demo scenario (server/demo.py: every test state, an issued report with its AGS4 file, a
    client link, the registers), loaded once per backend into a database of its own."""
    folder = tmp_path_factory.mktemp("demo")
    with empty_database(str(request.param), folder, pg_template) as url:
        load_demo(Settings(data_dir=folder / "data", DATABASE_URL=url, secret_key="d" * 48), reset=False)
        yield url


def test_the_demo_comes_back_row_for_row_with_its_issued_pdfs_and_ags4_files(
    demo_url: str,
    tmp_path: Path,
    pg_template: tuple[str, str] | None,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    source = every_row(demo_url)
    assert source["report"] and source["report_ags4"] and source["audit_event"]  # server/demo.py issues one
    folder = tmp_path / "backup-2026-12-04"
    made = claybench(["backup", str(folder)], demo_url, tmp_path, monkeypatch, capsys)
    assert made.code == 0, made.err
    manifest = manifest_of(folder)
    dump = dump_of(folder)
    assert manifest["dump_sha256"] == hashlib.sha256(dump.read_bytes()).hexdigest()
    assert manifest["dump_bytes"] == dump.stat().st_size
    assert str(folder) in made.out and dump.name in made.out and manifest["dump_sha256"] in made.out
    assert manifest["backend"] == make_url(demo_url).get_backend_name()
    assert manifest["schema_revision"] == source["alembic_version"][0][0]
    assert {t: manifest["tables"][t] for t in source} == {t: len(rows) for t, rows in source.items()}

    kind = manifest["backend"]
    with empty_database(kind, tmp_path, pg_template) as target:
        if kind == "postgresql":  # a password in the URL goes to pg_restore by PGPASSWORD, never printed
            target = make_url(target).set(password="never-printed-7").render_as_string(hide_password=False)
        back = claybench(["restore", str(folder)], target, tmp_path, monkeypatch, capsys)
        assert back.code == 0, back.err
        assert "every table's row count matches the manifest" in back.out
        assert "never-printed-7" not in back.out + back.err + (folder / "manifest.json").read_text()
        restored = every_row(target)
        assert restored == source
        # Each issued file is whole and is the one its stored SHA-256 names. Headers: a PDF begins
        # "%PDF-" (ISO 32000-1 cl. 7.5.2); an AGS4 file with a GROUP line (AGS4 rules 2, 3; from memory).
        for table, data, header in (("report", "pdf", b"%PDF-"), ("report_ags4", "data", b'"GROUP"')):
            names = [c.name for c in SQLModel.metadata.tables[table].columns]
            for row in restored[table]:
                assert row[names.index(data)].startswith(header)
                assert hashlib.sha256(row[names.index(data)]).hexdigest() == row[names.index("sha256")]
        checked = claybench(["audit", "verify"], target, tmp_path, monkeypatch, capsys)
        assert checked.code == 0 and "trail intact" in checked.out, checked.out
        with connected(target) as conn, pytest.raises(sa.exc.DBAPIError, match=REFUSAL):
            conn.execute(sa.text("UPDATE audit_event SET reason = 'rewritten'"))  # the guards came too


# -- while the app keeps saving ----------------------------------------------------------------------


@dataclass
class Writer:
    """The app's writer: new clients through the service, each with its audit event in one transaction."""

    db: Database
    people: People
    stop: threading.Event = field(default_factory=threading.Event)
    commits: list[float] = field(default_factory=list)
    errors: list[BaseException] = field(default_factory=list)

    def run(self) -> None:
        while not self.stop.is_set():
            try:
                jobs.create_client(self.db, self.people.admin, f"Writer Client {len(self.commits):05d}")
            except Exception as exc:  # kept for the test to show, the thread stops
                self.errors.append(exc)
                return
            self.commits.append(time.monotonic())

    def wait_for(self, done: Callable[[], bool]) -> None:
        deadline = time.monotonic() + 60
        while not done() and not self.errors and time.monotonic() < deadline:
            time.sleep(0.005)


def writer_clients(url: str) -> tuple[set[int], set[int]]:
    """The writer's clients, and the clients whose creation the audit trail records."""
    with connected(url) as conn:
        clients = {
            i for (i,) in conn.execute(sa.text("SELECT id FROM client WHERE name LIKE 'Writer Client %'"))
        }
        created = {
            i
            for (i,) in conn.execute(
                sa.text("SELECT entity_id FROM audit_event WHERE entity = 'client' AND action = 'create'")
            )
        }
    return clients, created


def test_a_backup_taken_while_the_app_keeps_saving_is_one_consistent_state(
    backend: str,
    database_url: str,
    db: Database,
    people: People,
    tmp_path: Path,
    pg_template: tuple[str, str] | None,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    writer = Writer(db, people)
    thread = threading.Thread(target=writer.run, daemon=True)
    thread.start()
    folder = tmp_path / "backup"
    try:
        writer.wait_for(lambda: len(writer.commits) >= 20)
        before, started = len(writer.commits), time.monotonic()
        made = claybench(["backup", str(folder)], database_url, tmp_path, monkeypatch, capsys)
        ended = time.monotonic()
        writer.wait_for(
            lambda: any(t > ended for t in writer.commits[-5:]) and len(writer.commits) > before + 5
        )
    finally:
        writer.stop.set()
        thread.join(60)
    assert writer.errors == []  # the backup never made the app's writer fail or wait past its budget
    assert made.code == 0, made.err
    assert any(started <= t <= ended for t in writer.commits)  # saves went on during the backup
    after = len(writer.commits)
    with empty_database(backend, tmp_path, pg_template) as target:
        back = claybench(["restore", str(folder)], target, tmp_path, monkeypatch, capsys)
        assert back.code == 0, back.err
        clients, created = writer_clients(target)
        assert clients <= created  # no client without the audit event of its own transaction
        assert created - clients == set()  # and no event without its client
        assert before <= len(clients) <= after
        assert manifest_of(folder)["tables"]["client"] == len(clients)
        checked = claybench(["audit", "verify"], target, tmp_path, monkeypatch, capsys)
        assert checked.code == 0 and "trail intact" in checked.out, checked.out


# -- refusals ----------------------------------------------------------------------------------------


def flip_a_byte(folder: Path, _later: Path) -> None:
    dump = dump_of(folder)
    data = bytearray(dump.read_bytes())
    data[len(data) // 2] ^= 0xFF
    dump.write_bytes(bytes(data))


def truncate(folder: Path, _later: Path) -> None:
    dump = dump_of(folder)
    dump.write_bytes(dump.read_bytes()[: dump.stat().st_size // 2])


def swap_in_a_later_dump(folder: Path, later: Path) -> None:
    dump_of(folder).write_bytes(dump_of(later).read_bytes())


def remove_the_manifest(folder: Path, _later: Path) -> None:
    (folder / "manifest.json").unlink()


def remove_the_dump(folder: Path, _later: Path) -> None:
    dump_of(folder).unlink()


def edit_manifest(**changes: Any) -> Callable[[Path, Path], None]:
    def edit(folder: Path, _later: Path) -> None:
        manifest = {**manifest_of(folder), **changes}
        (folder / "manifest.json").write_text(json.dumps(manifest))

    return edit


def remove_the_folder(folder: Path, _later: Path) -> None:
    for path in folder.iterdir():
        path.unlink()
    folder.rmdir()


DAMAGE: dict[str, tuple[Callable[[Path, Path], None], str]] = {
    "a byte of the dump changed": (flip_a_byte, "has SHA-256"),
    "the dump cut short": (truncate, "bytes but the manifest says"),
    "the dump of a later backup": (swap_in_a_later_dump, "not this backup's dump"),
    "no manifest": (remove_the_manifest, "has no manifest.json"),
    "no dump": (remove_the_dump, "is missing: the backup folder is incomplete"),
    "a manifest of another layout": (edit_manifest(format=99), "not a Claybench backup manifest"),
    "a schema this Claybench does not know": (
        edit_manifest(schema_revision="9999"),
        "not one this Claybench knows",
    ),
    "no backup folder": (remove_the_folder, "no backup folder at"),
}


@pytest.mark.parametrize("damage", sorted(DAMAGE))
def test_a_damaged_or_mismatched_backup_is_refused_and_nothing_is_written(
    damage: str,
    backend: str,
    database_url: str,
    db: Database,
    people: People,
    tmp_path: Path,
    pg_template: tuple[str, str] | None,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    folder, later = tmp_path / "backup", tmp_path / "later"
    assert claybench(["backup", str(folder)], database_url, tmp_path, monkeypatch, capsys).code == 0
    jobs.create_client(db, people.admin, "Client After The First Backup")
    assert claybench(["backup", str(later)], database_url, tmp_path, monkeypatch, capsys).code == 0
    harm, says = DAMAGE[damage]
    harm(folder, later)
    with empty_database(backend, tmp_path, pg_template) as target:
        back = claybench(["restore", str(folder)], target, tmp_path, monkeypatch, capsys)
        assert back.code == 2, back.out
        assert back.err.startswith("refused: ") and says in back.err, back.err
        assert back.out == ""
        assert holds_nothing(target)


def test_a_backup_of_the_other_backend_is_refused(
    backend: str,
    database_url: str,
    tmp_path: Path,
    pg_template: tuple[str, str] | None,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    folder = tmp_path / "backup"
    assert claybench(["backup", str(folder)], database_url, tmp_path, monkeypatch, capsys).code == 0
    other = "postgresql" if backend == "sqlite" else "sqlite"
    with empty_database(other, tmp_path, pg_template) as target:
        back = claybench(["restore", str(folder)], target, tmp_path, monkeypatch, capsys)
        assert back.code == 2
        assert f"a backup of a {backend} database and the target is {other}" in back.err, back.err
        assert holds_nothing(target)


@pytest.mark.parametrize("kind", ["rows", "schema only"])
def test_a_target_that_holds_anything_is_refused_and_left_as_it_was(
    kind: str,
    backend: str,
    database_url: str,
    db: Database,
    people: People,
    tmp_path: Path,
    pg_template: tuple[str, str] | None,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    jobs.create_client(db, people.admin, "Client Of The Backup")
    folder = tmp_path / "backup"
    assert claybench(["backup", str(folder)], database_url, tmp_path, monkeypatch, capsys).code == 0
    with empty_database(backend, tmp_path, pg_template) as fresh:
        if kind == "rows":
            target = database_url  # the very database backed up: its users, its client, its audit trail
        else:
            target = fresh
            upgrade(target)  # `claybench migrate` run first: tables, not a row of the laboratory's
        kept = every_row(target)
        back = claybench(["restore", str(folder)], target, tmp_path, monkeypatch, capsys)
        assert back.code == 2, back.out
        assert "is not empty" in back.err and "restore only into a new, empty database" in back.err
        assert every_row(target) == kept


def test_restored_rows_that_differ_from_the_manifest_fail_with_exit_1_naming_the_table(
    backend: str,
    database_url: str,
    tmp_path: Path,
    pg_template: tuple[str, str] | None,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    folder = tmp_path / "backup"
    assert claybench(["backup", str(folder)], database_url, tmp_path, monkeypatch, capsys).code == 0
    users = manifest_of(folder)["tables"]["user"]
    assert users == 4  # tests/conftest.py PEOPLE
    edit_manifest(tables={**manifest_of(folder)["tables"], "user": users + 1})(folder, folder)
    with empty_database(backend, tmp_path, pg_template) as target:
        back = claybench(["restore", str(folder)], target, tmp_path, monkeypatch, capsys)
        assert back.code == 1, back.out
        assert f"user: {users + 1} in the backup, {users} restored" in back.err
        assert "do not use it" in back.err


def test_a_backup_goes_only_into_a_new_or_empty_folder(
    database_url: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    folder = tmp_path / "used"
    folder.mkdir()
    (folder / "notes.txt").write_text("an earlier backup lives here")
    made = claybench(["backup", str(folder)], database_url, tmp_path, monkeypatch, capsys)
    assert made.code == 2
    assert "is not empty: name a new or empty folder" in made.err
    assert [p.name for p in folder.iterdir()] == ["notes.txt"]


def test_a_backup_of_an_sqlite_file_that_does_not_exist_is_refused_and_makes_none(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    missing = tmp_path / "no-such" / "claybench.sqlite3"
    made = claybench(
        ["backup", str(tmp_path / "backup")], f"sqlite:///{missing}", tmp_path, monkeypatch, capsys
    )
    assert made.code == 2
    assert f"no SQLite database at {missing}" in made.err
    assert not missing.exists() and list((tmp_path / "backup").iterdir()) == []


# -- PostgreSQL's roles --------------------------------------------------------------------------------


@pytest.mark.postgres
@pytest.mark.parametrize("backend", ["postgresql"])
def test_restored_by_the_schemas_owner_the_apps_role_keeps_its_rights_and_cannot_change_the_trail(
    roles: Roles,
    backend: str,
    tmp_path: Path,
    pg_template: tuple[str, str] | None,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    """As docker-compose.yml runs it: the app as its own role (DATABASE_URL), backup and restore as
    the schema's owner (CLAYBENCH_MIGRATE_DATABASE_URL), each database given the roles by
    migrations/postgres-init/10-roles.sql before anything else."""
    folder = tmp_path / "backup"
    with empty_database(backend, tmp_path, pg_template) as source:
        run_script(source, roles.owner, roles.app)
        upgrade(_as(source, roles.owner))
        app = Database(_as(source, roles.app))
        try:
            create_user(app, None, "admin", "Admin Person", "admin", "admin-password-1")
            jobs.create_client(app, None, "Client Before The Backup")
        finally:
            app.dispose()
        made = claybench(
            ["backup", str(folder)],
            _as(source, roles.app),
            tmp_path,
            monkeypatch,
            capsys,
            _as(source, roles.owner),
        )
        assert made.code == 0, made.err
        kept = every_row(source)
    with empty_database(backend, tmp_path, pg_template) as target:
        run_script(target, roles.owner, roles.app)
        back = claybench(
            ["restore", str(folder)],
            _as(target, roles.app),
            tmp_path,
            monkeypatch,
            capsys,
            _as(target, roles.owner),
        )
        assert back.code == 0, back.err
        assert every_row(target) == kept
        with connected(target) as conn:
            owners = set(
                conn.execute(sa.text("SELECT DISTINCT tableowner FROM pg_tables WHERE schemaname = 'public'"))
            )
        assert owners == {(roles.owner,)}  # the owner may migrate it next
        _shows_the_apps_privileges(_as(target, roles.app))
