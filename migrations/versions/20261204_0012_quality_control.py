"""Quality control (ISO/IEC 17025:2017 cl. 7.7): duplicate marks, the reference soil register and
its samples, and proficiency rounds.

Every table is new: no existing row changes, so approved tests, samples and their audit trail
stay exactly as they were. A test marked as a duplicate is a row of ``quality_duplicate``, not a
changed ``lab_test``; a sample that is a portion of a reference soil is a row of
``reference_sample``, not a changed ``sample``.

Revision ID: 0012
Revises: 0011
Create Date: 2026-12-04 22:00:00
"""

from collections.abc import Sequence

import sqlalchemy as sa
import sqlmodel  # noqa: F401  (autogenerate may emit sqlmodel.sql.sqltypes.AutoString)
from alembic import op
from sqlalchemy.dialects.postgresql import JSONB

revision: str = "0012"
down_revision: str | None = "0011"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

JSON = sa.JSON().with_variant(JSONB(), "postgresql")
Text = sqlmodel.sql.sqltypes.AutoString


def upgrade() -> None:
    op.create_table(
        "quality_duplicate",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("test_id", sa.Integer(), nullable=False),
        sa.Column("duplicate_of_id", sa.Integer(), nullable=False),
        sa.Column("marked_by_id", sa.Integer(), nullable=False),
        sa.Column("marked_at", sa.DateTime(), nullable=False),
        sa.Column("unmarked_by_id", sa.Integer(), nullable=True),
        sa.Column("unmarked_at", sa.DateTime(), nullable=True),
        sa.ForeignKeyConstraint(
            ["test_id"], ["lab_test.id"], name=op.f("fk_quality_duplicate_test_id_lab_test")
        ),
        sa.ForeignKeyConstraint(
            ["duplicate_of_id"], ["lab_test.id"], name=op.f("fk_quality_duplicate_duplicate_of_id_lab_test")
        ),
        sa.ForeignKeyConstraint(
            ["marked_by_id"], ["user.id"], name=op.f("fk_quality_duplicate_marked_by_id_user")
        ),
        sa.ForeignKeyConstraint(
            ["unmarked_by_id"], ["user.id"], name=op.f("fk_quality_duplicate_unmarked_by_id_user")
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_quality_duplicate")),
    )
    with op.batch_alter_table("quality_duplicate", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_quality_duplicate_test_id"), ["test_id"], unique=False)
        batch_op.create_index(
            batch_op.f("ix_quality_duplicate_duplicate_of_id"), ["duplicate_of_id"], unique=False
        )

    op.create_table(
        "reference_soil",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("code", Text(length=32), nullable=False),
        sa.Column("name", Text(length=200), nullable=False),
        sa.Column("description", Text(length=1000), nullable=False),
        sa.Column("assigned_values", JSON, nullable=True),
        sa.Column("active", sa.Boolean(), nullable=False),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_reference_soil")),
    )
    with op.batch_alter_table("reference_soil", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_reference_soil_code"), ["code"], unique=True)

    op.create_table(
        "reference_sample",
        sa.Column("sample_id", sa.Integer(), nullable=False),
        sa.Column("reference_soil_id", sa.Integer(), nullable=False),
        sa.Column("linked_by_id", sa.Integer(), nullable=False),
        sa.Column("linked_at", sa.DateTime(), nullable=False),
        sa.ForeignKeyConstraint(
            ["sample_id"], ["sample.id"], name=op.f("fk_reference_sample_sample_id_sample")
        ),
        sa.ForeignKeyConstraint(
            ["reference_soil_id"],
            ["reference_soil.id"],
            name=op.f("fk_reference_sample_reference_soil_id_reference_soil"),
        ),
        sa.ForeignKeyConstraint(
            ["linked_by_id"], ["user.id"], name=op.f("fk_reference_sample_linked_by_id_user")
        ),
        sa.PrimaryKeyConstraint("sample_id", name=op.f("pk_reference_sample")),
    )
    with op.batch_alter_table("reference_sample", schema=None) as batch_op:
        batch_op.create_index(
            batch_op.f("ix_reference_sample_reference_soil_id"), ["reference_soil_id"], unique=False
        )

    op.create_table(
        "proficiency_round",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("scheme", Text(length=100), nullable=False),
        sa.Column("round_code", Text(length=32), nullable=False),
        sa.Column("method", Text(length=40), nullable=False),
        sa.Column("result_key", Text(length=40), nullable=False),
        sa.Column("assigned_value", sa.Float(), nullable=False),
        sa.Column("sigma_pt", sa.Float(), nullable=False),
        sa.Column("result", sa.Float(), nullable=False),
        sa.Column("test_id", sa.Integer(), nullable=True),
        sa.Column("round_date", sa.Date(), nullable=False),
        sa.Column("entered_by_id", sa.Integer(), nullable=False),
        sa.Column("entered_at", sa.DateTime(), nullable=False),
        sa.ForeignKeyConstraint(
            ["test_id"], ["lab_test.id"], name=op.f("fk_proficiency_round_test_id_lab_test")
        ),
        sa.ForeignKeyConstraint(
            ["entered_by_id"], ["user.id"], name=op.f("fk_proficiency_round_entered_by_id_user")
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_proficiency_round")),
        sa.UniqueConstraint(
            "scheme", "round_code", "method", "result_key", name="uq_proficiency_round_entry"
        ),
    )


def downgrade() -> None:
    op.drop_table("proficiency_round")
    with op.batch_alter_table("reference_sample", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_reference_sample_reference_soil_id"))
    op.drop_table("reference_sample")
    with op.batch_alter_table("reference_soil", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_reference_soil_code"))
    op.drop_table("reference_soil")
    with op.batch_alter_table("quality_duplicate", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_quality_duplicate_duplicate_of_id"))
        batch_op.drop_index(batch_op.f("ix_quality_duplicate_test_id"))
    op.drop_table("quality_duplicate")
