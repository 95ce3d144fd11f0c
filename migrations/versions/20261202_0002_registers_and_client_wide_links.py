"""Registers of containers and equipment; client links may span a client's jobs.

Existing links keep their job and take its client.

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-02 01:52:14.496080
"""

from collections.abc import Sequence

import sqlalchemy as sa
import sqlmodel  # noqa: F401  (autogenerate may emit sqlmodel.sql.sqltypes.AutoString)
from alembic import op

revision: str = "0002"
down_revision: str | None = "0001"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    op.create_table(
        "container",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=32), nullable=False),
        sa.Column("tare_g", sa.Float(), nullable=False),
        sa.Column("active", sa.Boolean(), nullable=False),
        sa.Column("checked_at", sa.DateTime(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_container")),
    )
    with op.batch_alter_table("container", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_container_code"), ["code"], unique=True)

    op.create_table(
        "equipment",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=32), nullable=False),
        sa.Column("kind", sqlmodel.sql.sqltypes.AutoString(length=32), nullable=False),
        sa.Column("description", sqlmodel.sql.sqltypes.AutoString(length=200), nullable=False),
        sa.Column("calibration_due", sa.Date(), nullable=True),
        sa.Column("active", sa.Boolean(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_equipment")),
    )
    with op.batch_alter_table("equipment", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_equipment_code"), ["code"], unique=True)

    with op.batch_alter_table("share_link", schema=None) as batch_op:
        batch_op.add_column(sa.Column("client_id", sa.Integer(), nullable=True))
    op.execute(
        "UPDATE share_link SET client_id = (SELECT job.client_id FROM job WHERE job.id = share_link.job_id)"
    )
    with op.batch_alter_table("share_link", schema=None) as batch_op:
        batch_op.alter_column("client_id", existing_type=sa.Integer(), nullable=False)
        batch_op.alter_column("job_id", existing_type=sa.INTEGER(), nullable=True)
        batch_op.create_index(batch_op.f("ix_share_link_client_id"), ["client_id"], unique=False)
        batch_op.create_foreign_key(
            batch_op.f("fk_share_link_client_id_client"), "client", ["client_id"], ["id"]
        )


def downgrade() -> None:
    op.execute("DELETE FROM link_access WHERE link_id IN (SELECT id FROM share_link WHERE job_id IS NULL)")
    op.execute("DELETE FROM share_link WHERE job_id IS NULL")
    with op.batch_alter_table("share_link", schema=None) as batch_op:
        batch_op.drop_constraint(batch_op.f("fk_share_link_client_id_client"), type_="foreignkey")
        batch_op.drop_index(batch_op.f("ix_share_link_client_id"))
        batch_op.alter_column("job_id", existing_type=sa.INTEGER(), nullable=False)
        batch_op.drop_column("client_id")

    with op.batch_alter_table("equipment", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_equipment_code"))

    op.drop_table("equipment")
    with op.batch_alter_table("container", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_container_code"))

    op.drop_table("container")
