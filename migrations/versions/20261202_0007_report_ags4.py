"""The AGS4 file frozen with each issued report revision, with its SHA-256.

Reports issued before this revision keep no file: they were issued as a PDF alone, and a file
made now would not be the one issued with them.

Revision ID: 0007
Revises: 0006
Create Date: 2026-12-02 22:30:00
"""

from collections.abc import Sequence

import sqlalchemy as sa
import sqlmodel  # noqa: F401  (autogenerate may emit sqlmodel.sql.sqltypes.AutoString)
from alembic import op

revision: str = "0007"
down_revision: str | None = "0006"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "report_ags4",
        sa.Column("report_id", sa.Integer(), nullable=False),
        sa.Column("sha256", sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
        sa.Column("data", sa.LargeBinary(), nullable=False),
        sa.ForeignKeyConstraint(["report_id"], ["report.id"], name=op.f("fk_report_ags4_report_id_report")),
        sa.PrimaryKeyConstraint("report_id", name=op.f("pk_report_ags4")),
    )
    with op.batch_alter_table("report_ags4", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_report_ags4_sha256"), ["sha256"], unique=False)


def downgrade() -> None:
    with op.batch_alter_table("report_ags4", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_report_ags4_sha256"))
    op.drop_table("report_ags4")
