"""Personal API tokens (only their SHA-256 is kept) and the log of their uses.

Revision ID: 0006
Revises: 0005
Create Date: 2026-12-02 20:00:00
"""

from collections.abc import Sequence

import sqlalchemy as sa
import sqlmodel  # noqa: F401  (autogenerate may emit sqlmodel.sql.sqltypes.AutoString)
from alembic import op

revision: str = "0006"
down_revision: str | None = "0005"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "api_token",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("user_id", sa.Integer(), nullable=False),
        sa.Column("name", sqlmodel.sql.sqltypes.AutoString(length=100), nullable=False),
        sa.Column("token_sha256", sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
        sa.Column("prefix", sqlmodel.sql.sqltypes.AutoString(length=8), nullable=False),
        sa.Column("scope", sqlmodel.sql.sqltypes.AutoString(length=8), nullable=False),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.Column("expires_at", sa.DateTime(), nullable=False),
        sa.Column("revoked_at", sa.DateTime(), nullable=True),
        sa.Column("last_used_at", sa.DateTime(), nullable=True),
        sa.ForeignKeyConstraint(["user_id"], ["user.id"], name=op.f("fk_api_token_user_id_user")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_api_token")),
    )
    with op.batch_alter_table("api_token", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_api_token_user_id"), ["user_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_api_token_token_sha256"), ["token_sha256"], unique=True)

    op.create_table(
        "api_token_use",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("token_id", sa.Integer(), nullable=False),
        sa.Column("at", sa.DateTime(), nullable=False),
        sa.Column("method", sqlmodel.sql.sqltypes.AutoString(length=8), nullable=False),
        sa.Column("path", sqlmodel.sql.sqltypes.AutoString(length=300), nullable=False),
        sa.Column("status", sa.Integer(), nullable=False),
        sa.ForeignKeyConstraint(
            ["token_id"], ["api_token.id"], name=op.f("fk_api_token_use_token_id_api_token")
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_api_token_use")),
    )
    with op.batch_alter_table("api_token_use", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_api_token_use_token_id"), ["token_id"], unique=False)


def downgrade() -> None:
    with op.batch_alter_table("api_token_use", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_api_token_use_token_id"))
    op.drop_table("api_token_use")
    with op.batch_alter_table("api_token", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_api_token_token_sha256"))
        batch_op.drop_index(batch_op.f("ix_api_token_user_id"))
    op.drop_table("api_token")
