"""The trail cannot be rewritten: hashes for the events written before the chain existed, SQLite
triggers that refuse to change or remove an event, and on PostgreSQL no role but the table's
owner keeps a privilege to change or remove one.

Existing events are sealed in id order with the application's own functions
(``server.services.audit_chain``), each linked to the hash stored on, or just given to, the event
before it. Only events with an empty hash are filled, so running this again (after a downgrade)
never re-seals a trail that was already sealed: a tampered trail stays visibly tampered.

PostgreSQL: the append-only trigger of 0001 is disabled for the fill and enabled again in the same
transaction (the migrations run as the table's owner, which may do that). Privileges to update,
delete or truncate the events that default privileges gave other roles (the application's role,
see migrations/postgres-init/10-roles.sql) are revoked.

SQLite: ``audit_event_no_update`` and ``audit_event_no_delete`` abort any UPDATE or DELETE. A later
migration that rebuilds the table in batch mode (copy and move) drops them with the old table and
must create them again.

The downgrade drops the SQLite triggers and leaves the hashes and the privileges as they are.

Revision ID: 0005
Revises: 0004
Create Date: 2026-12-02 18:00:00
"""

from collections.abc import Sequence
from typing import Any

import sqlalchemy as sa
from alembic import op
from sqlalchemy.dialects import postgresql

from server.services.audit_chain import GENESIS, chain_hash, content_of

revision: str = "0005"
down_revision: str | None = "0004"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

_JSON = sa.JSON().with_variant(postgresql.JSONB(astext_type=sa.Text()), "postgresql")
_EVENTS = sa.table(
    "audit_event",
    sa.column("id", sa.Integer()),
    sa.column("at", sa.DateTime()),
    sa.column("actor_id", sa.Integer()),
    sa.column("actor", sa.String()),
    sa.column("entity", sa.String()),
    sa.column("entity_id", sa.Integer()),
    sa.column("action", sa.String()),
    sa.column("before", _JSON),
    sa.column("after", _JSON),
    sa.column("reason", sa.String()),
    sa.column("typed_at", sa.DateTime()),
    sa.column("prev_sha256", sa.String()),
    sa.column("sha256", sa.String()),
)
_BATCH = 1000
_REFUSAL = "audit events are never changed or removed"

# Every grantee (PUBLIC included) but the owner loses UPDATE, DELETE and TRUNCATE on the events.
_REVOKE_FROM_ALL_BUT_THE_OWNER = """
DO $$
DECLARE
    grantee text;
BEGIN
    FOR grantee IN
        SELECT DISTINCT CASE WHEN a.grantee = 0 THEN 'PUBLIC' ELSE quote_ident(r.rolname) END
        FROM pg_class c
        CROSS JOIN LATERAL aclexplode(c.relacl) a
        LEFT JOIN pg_roles r ON r.oid = a.grantee
        WHERE c.oid = 'audit_event'::regclass
          AND a.grantee <> c.relowner
          AND a.privilege_type IN ('UPDATE', 'DELETE', 'TRUNCATE')
    LOOP
        EXECUTE 'REVOKE UPDATE, DELETE, TRUNCATE ON audit_event FROM ' || grantee;
    END LOOP;
END $$;
"""


def _seal_unsealed_events(bind: sa.Connection) -> None:
    """Fill the empty hashes in id order, a batch at a time."""
    previous, last_id = GENESIS, None
    while True:
        query = sa.select(_EVENTS).order_by(_EVENTS.c.id).limit(_BATCH)
        if last_id is not None:
            query = query.where(_EVENTS.c.id > last_id)
        rows = bind.execute(query).all()
        if not rows:
            return
        sealed: list[dict[str, Any]] = []
        for row in rows:
            if row.sha256:
                previous = row.sha256
            else:
                digest = chain_hash(content_of(row), previous)
                sealed.append({"b_id": row.id, "b_prev": previous, "b_sha": digest})
                previous = digest
            last_id = row.id
        if sealed:
            bind.execute(
                _EVENTS.update()
                .where(_EVENTS.c.id == sa.bindparam("b_id"))
                .values(prev_sha256=sa.bindparam("b_prev"), sha256=sa.bindparam("b_sha")),
                sealed,
            )


def upgrade() -> None:
    bind = op.get_bind()
    if bind.dialect.name == "postgresql":
        op.execute("ALTER TABLE audit_event DISABLE TRIGGER audit_event_append_only")
        _seal_unsealed_events(bind)
        op.execute("ALTER TABLE audit_event ENABLE TRIGGER audit_event_append_only")
        op.execute(_REVOKE_FROM_ALL_BUT_THE_OWNER)
        return
    _seal_unsealed_events(bind)
    if bind.dialect.name == "sqlite":
        for name, operation in (("audit_event_no_update", "UPDATE"), ("audit_event_no_delete", "DELETE")):
            op.execute(
                f"CREATE TRIGGER {name} BEFORE {operation} ON audit_event "
                f"BEGIN SELECT RAISE(ABORT, '{_REFUSAL}'); END"
            )


def downgrade() -> None:
    if op.get_bind().dialect.name == "sqlite":
        op.execute("DROP TRIGGER IF EXISTS audit_event_no_delete")
        op.execute("DROP TRIGGER IF EXISTS audit_event_no_update")
