"""The register of work for intake: client contacts, job order details and standards family,
location coordinates, samples unique in their job with receipt, remarks and withdrawal, and
the staging table of schedule files between preview and confirmation.

Existing samples take their location's job; existing text columns start empty and jobs start
as tested to ASTM (the only family the app knew before).

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-02 12:58:34.166700
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0003"
down_revision: str | None = "0002"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def _text(name: str, length: int, default: str = "") -> sa.Column:  # type: ignore[type-arg]
    return sa.Column(name, sa.String(length=length), nullable=False, server_default=default)


def upgrade() -> None:
    with op.batch_alter_table("client", schema=None) as batch_op:
        batch_op.add_column(_text("email", 254))
        batch_op.add_column(_text("postal_address", 500))

    with op.batch_alter_table("job", schema=None) as batch_op:
        batch_op.add_column(_text("order_reference", 100))
        batch_op.add_column(_text("standards", 16, "astm"))
        batch_op.add_column(_text("notes", 2000))

    with op.batch_alter_table("location", schema=None) as batch_op:
        batch_op.add_column(sa.Column("easting", sa.Float(), nullable=True))
        batch_op.add_column(sa.Column("northing", sa.Float(), nullable=True))
        batch_op.add_column(sa.Column("ground_level_m", sa.Float(), nullable=True))

    with op.batch_alter_table("sample", schema=None) as batch_op:
        batch_op.add_column(sa.Column("job_id", sa.Integer(), nullable=True))
    op.execute(
        "UPDATE sample SET job_id = "
        "(SELECT location.job_id FROM location WHERE location.id = sample.location_id)"
    )
    with op.batch_alter_table("sample", schema=None) as batch_op:
        batch_op.alter_column("job_id", existing_type=sa.Integer(), nullable=False)
        batch_op.add_column(_text("remarks", 1000))
        batch_op.add_column(sa.Column("received_by_id", sa.Integer(), nullable=True))
        batch_op.add_column(_text("condition", 32))
        batch_op.add_column(_text("stored_at", 64))
        batch_op.add_column(sa.Column("withdrawn_at", sa.DateTime(), nullable=True))
        batch_op.add_column(sa.Column("withdrawn_by_id", sa.Integer(), nullable=True))
        batch_op.add_column(sa.Column("withdrawn_reason", sa.String(length=1000), nullable=True))
        batch_op.alter_column("received_at", existing_type=sa.DateTime(), nullable=True)
        batch_op.drop_constraint("uq_sample_location_code", type_="unique")
        batch_op.create_index(batch_op.f("ix_sample_job_id"), ["job_id"], unique=False)
        batch_op.create_unique_constraint("uq_sample_job_code", ["job_id", "code"])
        batch_op.create_foreign_key(
            batch_op.f("fk_sample_received_by_id_user"), "user", ["received_by_id"], ["id"]
        )
        batch_op.create_foreign_key(
            batch_op.f("fk_sample_withdrawn_by_id_user"), "user", ["withdrawn_by_id"], ["id"]
        )
        batch_op.create_foreign_key(batch_op.f("fk_sample_job_id_job"), "job", ["job_id"], ["id"])

    op.create_table(
        "staged_import",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("token", sa.String(length=64), nullable=False),
        sa.Column("user_id", sa.Integer(), nullable=False),
        sa.Column("filename", sa.String(length=255), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.Column("content", sa.LargeBinary(), nullable=False),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.ForeignKeyConstraint(["user_id"], ["user.id"], name=op.f("fk_staged_import_user_id_user")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_staged_import")),
        sa.UniqueConstraint("token", name=op.f("uq_staged_import_token")),
    )
    op.create_index(op.f("ix_staged_import_user_id"), "staged_import", ["user_id"], unique=False)


def downgrade() -> None:
    op.drop_index(op.f("ix_staged_import_user_id"), table_name="staged_import")
    op.drop_table("staged_import")
    op.execute("UPDATE sample SET received_at = CURRENT_TIMESTAMP WHERE received_at IS NULL")
    with op.batch_alter_table("sample", schema=None) as batch_op:
        batch_op.drop_constraint(batch_op.f("fk_sample_job_id_job"), type_="foreignkey")
        batch_op.drop_constraint(batch_op.f("fk_sample_withdrawn_by_id_user"), type_="foreignkey")
        batch_op.drop_constraint(batch_op.f("fk_sample_received_by_id_user"), type_="foreignkey")
        batch_op.drop_constraint("uq_sample_job_code", type_="unique")
        batch_op.drop_index(batch_op.f("ix_sample_job_id"))
        batch_op.create_unique_constraint("uq_sample_location_code", ["location_id", "code"])
        batch_op.alter_column("received_at", existing_type=sa.DateTime(), nullable=False)
        for column in (
            "withdrawn_reason",
            "withdrawn_by_id",
            "withdrawn_at",
            "stored_at",
            "condition",
            "received_by_id",
            "remarks",
            "job_id",
        ):
            batch_op.drop_column(column)

    with op.batch_alter_table("location", schema=None) as batch_op:
        for column in ("ground_level_m", "northing", "easting"):
            batch_op.drop_column(column)

    with op.batch_alter_table("job", schema=None) as batch_op:
        for column in ("notes", "standards", "order_reference"):
            batch_op.drop_column(column)

    with op.batch_alter_table("client", schema=None) as batch_op:
        batch_op.drop_column("postal_address")
        batch_op.drop_column("email")
