"""The Alembic migrations, run on empty databases of both backends.

The conftest's ``database_url`` starts from a database migrated once per run; these tests need
databases nobody has migrated yet, so they make their own: a new SQLite file, or a new empty
PostgreSQL database created from the maintenance URL the test run names.
"""

from __future__ import annotations

import os
import uuid
from collections.abc import Iterator
from pathlib import Path

import pytest
from alembic.autogenerate import compare_metadata
from alembic.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Connection, create_engine, inspect, text
from sqlalchemy.engine import make_url
from sqlalchemy.exc import DBAPIError
from sqlmodel import SQLModel

from server.db import tables  # noqa: F401  (every table must be imported before the metadata is read)
from server.db.migrate import alembic_config, downgrade, upgrade
from server.db.session import make_engine

PG_ENV = "CLAYBENCH_TEST_POSTGRES_URL"
OUR_TABLES = set(SQLModel.metadata.tables)
# procrastinate's own tables: the render queue the workers share, on PostgreSQL only (migration 0009).
QUEUE_TABLES = {
    "procrastinate_jobs",
    "procrastinate_events",
    "procrastinate_periodic_defers",
    "procrastinate_workers",
}


def _expected_tables(backend: str) -> set[str]:
    return OUR_TABLES | (QUEUE_TABLES if backend == "postgresql" else set())


@pytest.fixture
def empty_database_url(backend: str, tmp_path: Path) -> Iterator[str]:
    """A database with no tables at all, on the backend of this run of the test."""
    if backend == "sqlite":
        yield f"sqlite:///{tmp_path / 'empty.sqlite3'}"
        return
    admin = os.environ.get(PG_ENV)
    if not admin:
        if os.environ.get("CLAYBENCH_REQUIRE_POSTGRES") == "1":
            pytest.fail(f"{PG_ENV} is not set but CLAYBENCH_REQUIRE_POSTGRES=1")
        pytest.skip(f"no PostgreSQL server for the tests ({PG_ENV} not set)")
    name = f"claybench_m_{uuid.uuid4().hex[:10]}"
    engine = create_engine(admin, isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    yield make_url(admin).set(database=name).render_as_string(hide_password=False)
    with engine.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
    engine.dispose()


def _columns(url: str) -> dict[str, set[str]]:
    """Every table in the database (but Alembic's own) with the names of its columns."""
    engine = make_engine(url)
    try:
        found = inspect(engine)
        return {
            t: {c["name"] for c in found.get_columns(t)}
            for t in found.get_table_names()
            if t != "alembic_version"
        }
    finally:
        engine.dispose()


def _stamped(url: str) -> list[str]:
    engine = make_engine(url)
    try:
        with engine.connect() as conn:
            return [row[0] for row in conn.execute(text("SELECT version_num FROM alembic_version"))]
    finally:
        engine.dispose()


def _revisions_oldest_first() -> list[str]:
    script = ScriptDirectory.from_config(alembic_config("sqlite://"))
    return [rev.revision for rev in reversed(list(script.walk_revisions()))]


def _append_only_function_exists(url: str) -> bool:
    engine = create_engine(url)
    try:
        with engine.connect() as conn:
            return bool(
                conn.execute(
                    text("SELECT count(*) FROM pg_proc WHERE proname = 'audit_event_append_only'")
                ).scalar_one()
            )
    finally:
        engine.dispose()


def test_an_empty_database_starts_with_no_tables(empty_database_url: str) -> None:
    # The fixture's promise, so that the tests below really start from nothing.
    assert _columns(empty_database_url) == {}


def test_upgrading_to_head_creates_every_table_with_the_models_columns(
    empty_database_url: str, backend: str
) -> None:
    upgrade(empty_database_url)
    found = _columns(empty_database_url)
    assert set(found) == _expected_tables(backend)
    for name, table in SQLModel.metadata.tables.items():
        assert found[name] == set(table.columns.keys()), name


def test_upgrading_stamps_the_newest_revision(empty_database_url: str) -> None:
    upgrade(empty_database_url)
    head = ScriptDirectory.from_config(alembic_config(empty_database_url)).get_current_head()
    assert _stamped(empty_database_url) == [head]


def test_downgrading_to_base_removes_every_table_and_upgrading_again_restores_them(
    empty_database_url: str, backend: str
) -> None:
    upgrade(empty_database_url)
    first = _columns(empty_database_url)

    downgrade(empty_database_url, "base")
    assert _columns(empty_database_url) == {}
    assert _stamped(empty_database_url) == []
    if backend == "postgresql":
        assert not _append_only_function_exists(empty_database_url)

    upgrade(empty_database_url)
    assert _columns(empty_database_url) == first
    if backend == "postgresql":
        assert _append_only_function_exists(empty_database_url)


def test_every_revision_applies_reverts_one_step_and_applies_again(empty_database_url: str) -> None:
    revisions = _revisions_oldest_first()
    assert revisions, "no migrations found"
    for revision in revisions:
        upgrade(empty_database_url, revision)
        after = _columns(empty_database_url)
        downgrade(empty_database_url, "-1")
        upgrade(empty_database_url, revision)
        assert _columns(empty_database_url) == after, revision
        assert _stamped(empty_database_url) == [revision]


# Differences between the migrated schema and the models that are known and harmless. Alembic
# reports none today on either backend (types, nullability, indexes, unique constraints and
# foreign keys all agree), so any entry it reports is a real drift: a model changed without a
# migration, or a migration that does not build what the models say.
BENIGN_DIFFERENCES: list[str] = []


def test_the_migrated_schema_matches_the_models(empty_database_url: str) -> None:
    upgrade(empty_database_url)
    engine = make_engine(empty_database_url)
    try:
        with engine.connect() as conn:
            context = MigrationContext.configure(
                conn,
                opts={
                    "compare_type": True,
                    "target_metadata": SQLModel.metadata,
                    # procrastinate's tables are its own schema, applied whole by migration 0009.
                    "include_name": lambda name, kind, parent: not (name or "").startswith("procrastinate"),
                },
            )
            differences = [repr(d) for d in compare_metadata(context, SQLModel.metadata)]
    finally:
        engine.dispose()
    assert [d for d in differences if d not in BENIGN_DIFFERENCES] == []


def _insert_event(conn: Connection) -> None:
    conn.execute(
        text(
            "INSERT INTO audit_event (at, actor, entity, entity_id, action) "
            "VALUES (now(), 'system', 'lab_test', 1, 'create')"
        )
    )


def _events(conn: Connection) -> list[tuple[object, ...]]:
    return [tuple(row) for row in conn.execute(text("SELECT * FROM audit_event ORDER BY id"))]


@pytest.mark.postgres
@pytest.mark.parametrize("backend", ["postgresql"])
@pytest.mark.parametrize(
    "statement",
    [
        "UPDATE audit_event SET action = 'forged'",
        "DELETE FROM audit_event",
        "TRUNCATE audit_event",
    ],
)
def test_postgresql_refuses_to_change_or_remove_an_audit_event(database_url: str, statement: str) -> None:
    engine = create_engine(database_url)
    try:
        with engine.begin() as conn:
            _insert_event(conn)
            before = _events(conn)
        with pytest.raises(DBAPIError) as refused, engine.begin() as conn:
            conn.execute(text(statement))
        assert "append-only" in str(refused.value)
        with engine.connect() as conn:
            assert _events(conn) == before
    finally:
        engine.dispose()


@pytest.mark.postgres
@pytest.mark.parametrize("backend", ["postgresql"])
def test_postgresql_still_lets_audit_events_be_added(database_url: str) -> None:
    engine = create_engine(database_url)
    try:
        with engine.connect() as conn:
            before = len(_events(conn))
        with engine.begin() as conn:
            _insert_event(conn)
            _insert_event(conn)
        with engine.connect() as conn:
            assert len(_events(conn)) == before + 2
    finally:
        engine.dispose()


def test_the_intake_migration_keeps_existing_samples_in_their_locations_job(empty_database_url: str) -> None:
    """0003 gives every existing sample its location's job, keeps its receipt time, and starts
    the new text columns empty and jobs as tested to ASTM (the migration's own rule)."""
    upgrade(empty_database_url, "0002")
    engine = make_engine(empty_database_url)
    received = "2026-11-02 08:30:00"
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO client (id, name, contact) VALUES (1, 'Old Client', '')"))
        for job in (1, 2):
            conn.execute(
                text(
                    "INSERT INTO job (id, code, title, site, client_id, received_at) "
                    "VALUES (:id, :code, 'Old job', '', 1, :at)"
                ),
                {"id": job, "code": f"OLD-{job}", "at": received},
            )
            conn.execute(
                text("INSERT INTO location (id, job_id, code, kind) VALUES (:id, :job, 'BH1', 'borehole')"),
                {"id": 10 + job, "job": job},
            )
            conn.execute(
                text(
                    "INSERT INTO sample (id, location_id, code, depth_from_m, depth_to_m, sample_type, "
                    "description, received_at) VALUES (:id, :loc, 'S1', 1.0, 1.5, 'U100', 'Clay', :at)"
                ),
                {"id": 100 + job, "loc": 10 + job, "at": received},
            )
    engine.dispose()
    upgrade(empty_database_url)
    engine = make_engine(empty_database_url)
    try:
        with engine.connect() as conn:
            rows = conn.execute(
                text("SELECT id, job_id, code, received_at, remarks, condition FROM sample ORDER BY id")
            ).all()
            jobs = conn.execute(text("SELECT standards, order_reference, notes FROM job ORDER BY id")).all()
    finally:
        engine.dispose()
    # computed: each sample was inserted at location 10 + n of job n
    assert [(r[0], r[1], r[2]) for r in rows] == [(101, 1, "S1"), (102, 2, "S1")]
    assert all(str(r[3]).startswith("2026-11-02 08:30") for r in rows)  # the receipt time is kept
    assert {(r[4], r[5]) for r in rows} == {("", "")}
    assert set(jobs) == {("astm", "", "")}
