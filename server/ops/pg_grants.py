"""The privileges other roles hold on a PostgreSQL database's tables and sequences, recorded at
backup and made the same after a restore.

pg_dump writes each object's grants as the difference from the owner-only default, never as
revocations. A database prepared by migrations/postgres-init/10-roles.sql before the restore has
default privileges for the owner's new tables (the application's role may change every table), so
each table pg_restore creates gets them, and the dump's grants only add to that: the application's
role would come back able to UPDATE, DELETE and TRUNCATE the audit trail that migration 0005 had
taken from it. So the backup records every grant, and the restore takes back what the target's
defaults added, then checks that what is left is exactly what was recorded.
"""

from __future__ import annotations

from sqlalchemy import Connection, text

_GRANTS = text(
    "SELECT n.nspname, c.relname, c.relkind, "
    "CASE WHEN a.grantee = 0 THEN 'PUBLIC' ELSE pg_get_userbyid(a.grantee) END, a.privilege_type "
    "FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace "
    "CROSS JOIN LATERAL aclexplode(c.relacl) a "
    "WHERE c.relkind IN ('r', 'p', 'v', 'm', 'S', 'f') AND a.grantee <> c.relowner "
    "AND n.nspname NOT IN ('pg_catalog', 'information_schema') AND n.nspname NOT LIKE 'pg_toast%' "
    "ORDER BY 1, 2, 4, 5"
)

Grant = tuple[str, str, str, str, str]  # schema, relation, kind ('S' a sequence), grantee, privilege


def _held(conn: Connection) -> list[Grant]:
    return [(str(s), str(r), str(k), str(g), str(p)) for s, r, k, g, p in conn.execute(_GRANTS)]


def grants(conn: Connection) -> dict[str, list[str]]:
    """Each relation's grants to roles other than its owner, as ``grantee:PRIVILEGE``."""
    out: dict[str, list[str]] = {}
    for schema, relation, _, grantee, privilege in _held(conn):
        out.setdefault(f"{schema}.{relation}", []).append(f"{grantee}:{privilege}")
    return out


def take_back_extras(conn: Connection, recorded: dict[str, list[str]]) -> int:
    """Revoke every grant the database holds that the backup did not; returns how many."""
    quote = conn.dialect.identifier_preparer.quote
    taken = 0
    for schema, relation, kind, grantee, privilege in _held(conn):
        if f"{grantee}:{privilege}" in recorded.get(f"{schema}.{relation}", []):
            continue
        what = "SEQUENCE" if kind == "S" else "TABLE"
        role = "PUBLIC" if grantee == "PUBLIC" else quote(grantee)
        conn.execute(text(f"REVOKE {privilege} ON {what} {quote(schema)}.{quote(relation)} FROM {role}"))
        taken += 1
    return taken
