"""Sessions kept on the server (``user_session``), replacing the user's session version.

A signed cookie alone cannot be ended: sign-out, a password change or an admin must be able to
end one browser's session for good, so each sign-in is now a row, and the per-user counter that
revoked every cookie at once goes.

Revision ID: 0008
Revises: 0007
Create Date: 2026-12-03 19:00:00
"""

from collections.abc import Sequence

import sqlalchemy as sa
import sqlmodel  # noqa: F401  (autogenerate may emit sqlmodel.sql.sqltypes.AutoString)
from alembic import op

revision: str = "0008"
down_revision: str | None = "0007"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "user_session",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("user_id", sa.Integer(), nullable=False),
        sa.Column("token_sha256", sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.Column("last_seen_at", sa.DateTime(), nullable=False),
        sa.Column("ended_at", sa.DateTime(), nullable=True),
        sa.Column("end_reason", sqlmodel.sql.sqltypes.AutoString(length=32), nullable=False),
        sa.Column("remote_addr", sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
        sa.Column("user_agent", sqlmodel.sql.sqltypes.AutoString(length=300), nullable=False),
        sa.ForeignKeyConstraint(["user_id"], ["user.id"], name=op.f("fk_user_session_user_id_user")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_user_session")),
    )
    with op.batch_alter_table("user_session", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_user_session_user_id"), ["user_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_user_session_token_sha256"), ["token_sha256"], unique=True)
        batch_op.create_index(batch_op.f("ix_user_session_ended_at"), ["ended_at"], unique=False)
    with op.batch_alter_table("user", schema=None) as batch_op:
        batch_op.drop_column("session_version")


def downgrade() -> None:
    with op.batch_alter_table("user", schema=None) as batch_op:
        batch_op.add_column(sa.Column("session_version", sa.Integer(), nullable=False, server_default="1"))
    with op.batch_alter_table("user_session", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_user_session_ended_at"))
        batch_op.drop_index(batch_op.f("ix_user_session_token_sha256"))
        batch_op.drop_index(batch_op.f("ix_user_session_user_id"))
    op.drop_table("user_session")
