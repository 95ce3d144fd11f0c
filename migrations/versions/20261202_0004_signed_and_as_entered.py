"""The record as entered, by whom, signed: the audit trail's typing time and hash chain
columns, the issuer's signature and any overlap decision on a report, a balance's capacity,
and the reasons a technician gives for error flags that stand.

Existing audit events start with empty hashes (the chain is filled in by the next revision);
existing reports with an empty signature meaning; existing instruments with no capacity.

Revision ID: 0004
Revises: 0003
Create Date: 2026-12-02 16:30:00
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op
from sqlalchemy.dialects import postgresql

revision: str = "0004"
down_revision: str | None = "0003"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def _text(name: str, length: int) -> sa.Column:  # type: ignore[type-arg]
    return sa.Column(name, sa.String(length=length), nullable=False, server_default="")


def upgrade() -> None:
    with op.batch_alter_table("audit_event", schema=None) as batch_op:
        batch_op.add_column(sa.Column("typed_at", sa.DateTime(), nullable=True))
        batch_op.add_column(_text("prev_sha256", 64))
        batch_op.add_column(_text("sha256", 64))
    with op.batch_alter_table("report", schema=None) as batch_op:
        batch_op.add_column(_text("signature_meaning", 300))
        batch_op.add_column(_text("overlap_decision", 1000))
    with op.batch_alter_table("equipment", schema=None) as batch_op:
        batch_op.add_column(sa.Column("capacity_g", sa.Float(), nullable=True))
    with op.batch_alter_table("lab_test", schema=None) as batch_op:
        batch_op.add_column(
            sa.Column(
                "flag_reasons",
                sa.JSON().with_variant(postgresql.JSONB(astext_type=sa.Text()), "postgresql"),
                nullable=True,
            )
        )


def downgrade() -> None:
    with op.batch_alter_table("lab_test", schema=None) as batch_op:
        batch_op.drop_column("flag_reasons")
    with op.batch_alter_table("equipment", schema=None) as batch_op:
        batch_op.drop_column("capacity_g")
    with op.batch_alter_table("report", schema=None) as batch_op:
        batch_op.drop_column("overlap_decision")
        batch_op.drop_column("signature_meaning")
    with op.batch_alter_table("audit_event", schema=None) as batch_op:
        batch_op.drop_column("sha256")
        batch_op.drop_column("prev_sha256")
        batch_op.drop_column("typed_at")
