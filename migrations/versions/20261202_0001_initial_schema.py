"""Initial schema: users, clients, jobs, samples, tests, reports, links, audit events.

Revision ID: 0001
Revises:
Create Date: 2026-12-02 01:24:04.353916
"""

from collections.abc import Sequence

import sqlalchemy as sa
import sqlmodel  # noqa: F401  (autogenerate may emit sqlmodel.sql.sqltypes.AutoString)
from alembic import op
from sqlalchemy.dialects import postgresql

revision: str = "0001"
down_revision: str | None = None
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:

    op.create_table(
        "client",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("name", sqlmodel.sql.sqltypes.AutoString(length=200), nullable=False),
        sa.Column("contact", sqlmodel.sql.sqltypes.AutoString(length=200), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_client")),
        sa.UniqueConstraint("name", name=op.f("uq_client_name")),
    )
    op.create_table(
        "laboratory",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("name", sqlmodel.sql.sqltypes.AutoString(length=200), nullable=False),
        sa.Column("address", sqlmodel.sql.sqltypes.AutoString(length=500), nullable=False),
        sa.Column("accreditation", sqlmodel.sql.sqltypes.AutoString(length=200), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_laboratory")),
    )
    op.create_table(
        "user",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("username", sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
        sa.Column("full_name", sqlmodel.sql.sqltypes.AutoString(length=200), nullable=False),
        sa.Column("role", sqlmodel.sql.sqltypes.AutoString(length=16), nullable=False),
        sa.Column("password_hash", sqlmodel.sql.sqltypes.AutoString(length=255), nullable=False),
        sa.Column("active", sa.Boolean(), nullable=False),
        sa.Column("session_version", sa.Integer(), nullable=False),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_user")),
    )
    with op.batch_alter_table("user", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_user_username"), ["username"], unique=True)

    op.create_table(
        "audit_event",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("at", sa.DateTime(), nullable=False),
        sa.Column("actor_id", sa.Integer(), nullable=True),
        sa.Column("actor", sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
        sa.Column("entity", sqlmodel.sql.sqltypes.AutoString(length=32), nullable=False),
        sa.Column("entity_id", sa.Integer(), nullable=False),
        sa.Column("action", sqlmodel.sql.sqltypes.AutoString(length=32), nullable=False),
        sa.Column(
            "before",
            sa.JSON().with_variant(postgresql.JSONB(astext_type=sa.Text()), "postgresql"),
            nullable=True,
        ),
        sa.Column(
            "after",
            sa.JSON().with_variant(postgresql.JSONB(astext_type=sa.Text()), "postgresql"),
            nullable=True,
        ),
        sa.Column("reason", sqlmodel.sql.sqltypes.AutoString(length=1000), nullable=True),
        sa.ForeignKeyConstraint(["actor_id"], ["user.id"], name=op.f("fk_audit_event_actor_id_user")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_audit_event")),
    )
    with op.batch_alter_table("audit_event", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_audit_event_at"), ["at"], unique=False)
        batch_op.create_index("ix_audit_event_entity", ["entity", "entity_id"], unique=False)

    op.create_table(
        "job",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=32), nullable=False),
        sa.Column("title", sqlmodel.sql.sqltypes.AutoString(length=200), nullable=False),
        sa.Column("site", sqlmodel.sql.sqltypes.AutoString(length=200), nullable=False),
        sa.Column("client_id", sa.Integer(), nullable=False),
        sa.Column("due_date", sa.Date(), nullable=True),
        sa.Column("received_at", sa.DateTime(), nullable=False),
        sa.ForeignKeyConstraint(["client_id"], ["client.id"], name=op.f("fk_job_client_id_client")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_job")),
    )
    with op.batch_alter_table("job", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_job_client_id"), ["client_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_job_code"), ["code"], unique=True)

    op.create_table(
        "location",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("job_id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=32), nullable=False),
        sa.Column("kind", sqlmodel.sql.sqltypes.AutoString(length=32), nullable=False),
        sa.ForeignKeyConstraint(["job_id"], ["job.id"], name=op.f("fk_location_job_id_job")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_location")),
        sa.UniqueConstraint("job_id", "code", name="uq_location_job_code"),
    )
    with op.batch_alter_table("location", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_location_job_id"), ["job_id"], unique=False)

    op.create_table(
        "report",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("job_id", sa.Integer(), nullable=False),
        sa.Column("number", sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
        sa.Column("revision", sa.Integer(), nullable=False),
        sa.Column("status", sqlmodel.sql.sqltypes.AutoString(length=16), nullable=False),
        sa.Column("issued_at", sa.DateTime(), nullable=False),
        sa.Column("issued_by_id", sa.Integer(), nullable=False),
        sa.Column("sha256", sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
        sa.Column("fingerprint", sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
        sa.Column("pdf", sa.LargeBinary(), nullable=False),
        sa.Column("superseded_by_id", sa.Integer(), nullable=True),
        sa.ForeignKeyConstraint(["issued_by_id"], ["user.id"], name=op.f("fk_report_issued_by_id_user")),
        sa.ForeignKeyConstraint(["job_id"], ["job.id"], name=op.f("fk_report_job_id_job")),
        sa.ForeignKeyConstraint(
            ["superseded_by_id"], ["report.id"], name=op.f("fk_report_superseded_by_id_report")
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_report")),
        sa.UniqueConstraint("number", "revision", name="uq_report_number_revision"),
    )
    with op.batch_alter_table("report", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_report_job_id"), ["job_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_report_number"), ["number"], unique=False)
        batch_op.create_index(batch_op.f("ix_report_sha256"), ["sha256"], unique=False)

    op.create_table(
        "share_link",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("job_id", sa.Integer(), nullable=False),
        sa.Column("token_hash", sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
        sa.Column("label", sqlmodel.sql.sqltypes.AutoString(length=200), nullable=False),
        sa.Column("created_by_id", sa.Integer(), nullable=False),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.Column("expires_at", sa.DateTime(), nullable=False),
        sa.Column("revoked_at", sa.DateTime(), nullable=True),
        sa.ForeignKeyConstraint(
            ["created_by_id"], ["user.id"], name=op.f("fk_share_link_created_by_id_user")
        ),
        sa.ForeignKeyConstraint(["job_id"], ["job.id"], name=op.f("fk_share_link_job_id_job")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_share_link")),
    )
    with op.batch_alter_table("share_link", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_share_link_job_id"), ["job_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_share_link_token_hash"), ["token_hash"], unique=True)

    op.create_table(
        "link_access",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("link_id", sa.Integer(), nullable=False),
        sa.Column("at", sa.DateTime(), nullable=False),
        sa.Column("path", sqlmodel.sql.sqltypes.AutoString(length=300), nullable=False),
        sa.Column("outcome", sqlmodel.sql.sqltypes.AutoString(length=16), nullable=False),
        sa.Column("remote_addr", sqlmodel.sql.sqltypes.AutoString(length=64), nullable=False),
        sa.Column("user_agent", sqlmodel.sql.sqltypes.AutoString(length=300), nullable=False),
        sa.ForeignKeyConstraint(
            ["link_id"], ["share_link.id"], name=op.f("fk_link_access_link_id_share_link")
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_link_access")),
    )
    with op.batch_alter_table("link_access", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_link_access_link_id"), ["link_id"], unique=False)

    op.create_table(
        "sample",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("location_id", sa.Integer(), nullable=False),
        sa.Column("code", sqlmodel.sql.sqltypes.AutoString(length=32), nullable=False),
        sa.Column("depth_from_m", sa.Float(), nullable=False),
        sa.Column("depth_to_m", sa.Float(), nullable=False),
        sa.Column("sample_type", sqlmodel.sql.sqltypes.AutoString(length=32), nullable=False),
        sa.Column("description", sqlmodel.sql.sqltypes.AutoString(length=1000), nullable=False),
        sa.Column("received_at", sa.DateTime(), nullable=False),
        sa.CheckConstraint("depth_to_m >= depth_from_m", name=op.f("ck_sample_depth_order")),
        sa.ForeignKeyConstraint(
            ["location_id"], ["location.id"], name=op.f("fk_sample_location_id_location")
        ),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_sample")),
        sa.UniqueConstraint("location_id", "code", name="uq_sample_location_code"),
    )
    with op.batch_alter_table("sample", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_sample_location_id"), ["location_id"], unique=False)

    op.create_table(
        "lab_test",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("sample_id", sa.Integer(), nullable=False),
        sa.Column("method", sqlmodel.sql.sqltypes.AutoString(length=40), nullable=False),
        sa.Column("status", sqlmodel.sql.sqltypes.AutoString(length=16), nullable=False),
        sa.Column("revision", sa.Integer(), nullable=False),
        sa.Column("previous_revision_id", sa.Integer(), nullable=True),
        sa.Column("amendment_reason", sqlmodel.sql.sqltypes.AutoString(length=1000), nullable=True),
        sa.Column("version", sa.Integer(), nullable=False),
        sa.Column(
            "readings",
            sa.JSON().with_variant(postgresql.JSONB(astext_type=sa.Text()), "postgresql"),
            nullable=True,
        ),
        sa.Column(
            "results",
            sa.JSON().with_variant(postgresql.JSONB(astext_type=sa.Text()), "postgresql"),
            nullable=True,
        ),
        sa.Column(
            "flags",
            sa.JSON().with_variant(postgresql.JSONB(astext_type=sa.Text()), "postgresql"),
            nullable=True,
        ),
        sa.Column("requested_by_id", sa.Integer(), nullable=True),
        sa.Column("assigned_to_id", sa.Integer(), nullable=True),
        sa.Column("created_at", sa.DateTime(), nullable=False),
        sa.Column("updated_at", sa.DateTime(), nullable=False),
        sa.Column("submitted_at", sa.DateTime(), nullable=True),
        sa.Column("approved_at", sa.DateTime(), nullable=True),
        sa.Column("approved_by_id", sa.Integer(), nullable=True),
        sa.Column("approver_role", sqlmodel.sql.sqltypes.AutoString(length=16), nullable=True),
        sa.Column("signature_meaning", sqlmodel.sql.sqltypes.AutoString(length=300), nullable=True),
        sa.Column("return_reason", sqlmodel.sql.sqltypes.AutoString(length=1000), nullable=True),
        sa.ForeignKeyConstraint(
            ["approved_by_id"], ["user.id"], name=op.f("fk_lab_test_approved_by_id_user")
        ),
        sa.ForeignKeyConstraint(
            ["assigned_to_id"], ["user.id"], name=op.f("fk_lab_test_assigned_to_id_user")
        ),
        sa.ForeignKeyConstraint(
            ["previous_revision_id"], ["lab_test.id"], name=op.f("fk_lab_test_previous_revision_id_lab_test")
        ),
        sa.ForeignKeyConstraint(
            ["requested_by_id"], ["user.id"], name=op.f("fk_lab_test_requested_by_id_user")
        ),
        sa.ForeignKeyConstraint(["sample_id"], ["sample.id"], name=op.f("fk_lab_test_sample_id_sample")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_lab_test")),
    )
    with op.batch_alter_table("lab_test", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_lab_test_sample_id"), ["sample_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_lab_test_status"), ["status"], unique=False)

    op.create_table(
        "report_test",
        sa.Column("report_id", sa.Integer(), nullable=False),
        sa.Column("test_id", sa.Integer(), nullable=False),
        sa.ForeignKeyConstraint(["report_id"], ["report.id"], name=op.f("fk_report_test_report_id_report")),
        sa.ForeignKeyConstraint(["test_id"], ["lab_test.id"], name=op.f("fk_report_test_test_id_lab_test")),
        sa.PrimaryKeyConstraint("report_id", "test_id", name=op.f("pk_report_test")),
    )

    if op.get_bind().dialect.name == "postgresql":
        # The audit trail is append-only: the database itself refuses to change or remove an event.
        op.execute(
            """
            CREATE FUNCTION audit_event_append_only() RETURNS trigger LANGUAGE plpgsql AS $$
            BEGIN
                RAISE EXCEPTION 'audit events are append-only (% refused)', TG_OP;
            END $$;
            """
        )
        op.execute(
            "CREATE TRIGGER audit_event_append_only BEFORE UPDATE OR DELETE OR TRUNCATE ON audit_event "
            "FOR EACH STATEMENT EXECUTE FUNCTION audit_event_append_only()"
        )


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        op.execute("DROP TRIGGER IF EXISTS audit_event_append_only ON audit_event")
        op.execute("DROP FUNCTION IF EXISTS audit_event_append_only()")

    op.drop_table("report_test")
    with op.batch_alter_table("lab_test", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_lab_test_status"))
        batch_op.drop_index(batch_op.f("ix_lab_test_sample_id"))

    op.drop_table("lab_test")
    with op.batch_alter_table("sample", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_sample_location_id"))

    op.drop_table("sample")
    with op.batch_alter_table("link_access", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_link_access_link_id"))

    op.drop_table("link_access")
    with op.batch_alter_table("share_link", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_share_link_token_hash"))
        batch_op.drop_index(batch_op.f("ix_share_link_job_id"))

    op.drop_table("share_link")
    with op.batch_alter_table("report", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_report_sha256"))
        batch_op.drop_index(batch_op.f("ix_report_number"))
        batch_op.drop_index(batch_op.f("ix_report_job_id"))

    op.drop_table("report")
    with op.batch_alter_table("location", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_location_job_id"))

    op.drop_table("location")
    with op.batch_alter_table("job", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_job_code"))
        batch_op.drop_index(batch_op.f("ix_job_client_id"))

    op.drop_table("job")
    with op.batch_alter_table("audit_event", schema=None) as batch_op:
        batch_op.drop_index("ix_audit_event_entity")
        batch_op.drop_index(batch_op.f("ix_audit_event_at"))

    op.drop_table("audit_event")
    with op.batch_alter_table("user", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_user_username"))

    op.drop_table("user")
    op.drop_table("laboratory")
    op.drop_table("client")
