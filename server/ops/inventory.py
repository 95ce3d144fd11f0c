"""What a database holds, read the same way on SQLite and PostgreSQL: its tables, their row counts,
its schema revision, and whether anything is there at all.

Tables are found in the database itself, not in ``SQLModel.metadata``: a backup must count what it
copied, including tables the app's models do not describe (``alembic_version``, and the task
queue's ``procrastinate_*`` tables on PostgreSQL).
"""

from __future__ import annotations

from sqlalchemy import Connection, text

_PG_TABLES = text(
    "SELECT table_schema, table_name FROM information_schema.tables "
    "WHERE table_type = 'BASE TABLE' AND table_schema NOT IN ('pg_catalog', 'information_schema') "
    "ORDER BY table_schema, table_name"
)
_SQLITE_TABLES = text(
    "SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%' ORDER BY name"
)

# Relations and schemas of a PostgreSQL database that someone made: anything but the system's own
# and the empty ``public`` schema every new database has.
_PG_OBJECTS = text(
    "SELECT n.nspname || '.' || c.relname FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace "
    "WHERE c.relkind IN ('r', 'p', 'v', 'm', 'S', 'f') "
    "AND n.nspname NOT IN ('pg_catalog', 'information_schema') AND n.nspname NOT LIKE 'pg_toast%' "
    "UNION ALL SELECT 'schema ' || nspname FROM pg_namespace "
    "WHERE nspname NOT IN ('public', 'pg_catalog', 'information_schema') AND nspname NOT LIKE 'pg_toast%' "
    "AND nspname NOT LIKE 'pg_temp%' ORDER BY 1"
)
_SQLITE_OBJECTS = text(
    "SELECT type || ' ' || name FROM sqlite_master WHERE name NOT LIKE 'sqlite_%' ORDER BY name"
)


def table_names(conn: Connection) -> list[tuple[str | None, str]]:
    """Every base table as (schema, name); the schema is None for SQLite and for PostgreSQL's public."""
    if conn.dialect.name == "sqlite":
        return [(None, name) for (name,) in conn.execute(_SQLITE_TABLES)]
    return [(None if schema == "public" else schema, name) for schema, name in conn.execute(_PG_TABLES)]


def row_counts(conn: Connection) -> dict[str, int]:
    """Every table's rows, keyed ``name`` or ``schema.name``, as this connection's snapshot sees them."""
    quote = conn.dialect.identifier_preparer.quote
    counts: dict[str, int] = {}
    for schema, name in table_names(conn):
        qualified = f"{quote(schema)}.{quote(name)}" if schema else quote(name)
        counts[f"{schema}.{name}" if schema else name] = int(
            conn.execute(text(f"SELECT count(*) FROM {qualified}")).scalar_one()
        )
    return counts


def schema_revision(conn: Connection) -> str:
    """The Alembic revision the database is at ('' when it was never migrated)."""
    if (None, "alembic_version") not in table_names(conn):
        return ""
    return str(conn.execute(text("SELECT version_num FROM alembic_version")).scalar_one_or_none() or "")


def existing_objects(conn: Connection) -> list[str]:
    """What the database already holds (tables, views, sequences, indexes, triggers, schemas):
    a restore goes only into a database with nothing, so no old row can mix with the backup's."""
    query = _SQLITE_OBJECTS if conn.dialect.name == "sqlite" else _PG_OBJECTS
    return [str(name) for (name,) in conn.execute(query)]
