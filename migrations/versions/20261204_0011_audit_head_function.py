"""On PostgreSQL, ``claybench_audit_head(key)``: take the audit chain's lock and read the newest
event's hash in one round trip instead of two; and ``ix_audit_event_entity`` (entity, entity_id)
dropped, as ``ix_audit_event_authors`` (0010) starts with the same two columns and serves the same
reads: one index less to write on every audit event.

Every change appends an audit event, and every append must read the chain's head under the
chain's advisory lock. One SQL statement cannot do both (its snapshot is taken before it waits
for the lock, so it could read a head another writer has since replaced); a VOLATILE PL/pgSQL
function can, as each statement inside it takes a new snapshot at READ COMMITTED (PostgreSQL
documentation, "Transaction Isolation" and "Function Volatility Categories"). SQLite needs
nothing: its write transactions begin with the database's single write lock.

Revision ID: 0011
Revises: 0010
Create Date: 2026-12-04 19:45:00
"""

from collections.abc import Sequence

from alembic import op

revision: str = "0011"
down_revision: str | None = "0010"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    with op.batch_alter_table("audit_event", schema=None) as batch_op:
        batch_op.drop_index("ix_audit_event_entity")
    if op.get_bind().dialect.name != "postgresql":
        return
    op.execute(
        """
        CREATE FUNCTION claybench_audit_head(lock_key bigint) RETURNS text
        LANGUAGE plpgsql VOLATILE AS $$
        BEGIN
            PERFORM pg_advisory_xact_lock(lock_key);
            RETURN (SELECT sha256 FROM audit_event ORDER BY id DESC LIMIT 1);
        END
        $$
        """
    )


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        op.execute("DROP FUNCTION IF EXISTS claybench_audit_head(bigint)")
    with op.batch_alter_table("audit_event", schema=None) as batch_op:
        batch_op.create_index("ix_audit_event_entity", ["entity", "entity_id"], unique=False)
