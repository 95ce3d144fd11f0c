"""Reports rendered off the request path: ``report_render`` (a signed revision waiting for its
PDF) and ``worker_heartbeat`` (the render workers alive); on PostgreSQL, procrastinate's own
schema (its jobs, events and workers tables and functions), the queue the workers share.

procrastinate is pinned (pyproject.toml): this revision applies the schema of that version; a
later version's own migrations (procrastinate/sql/migrations) go into later revisions.

Revision ID: 0009
Revises: 0008
Create Date: 2026-12-04 19:20:00
"""

from collections.abc import Sequence

import sqlalchemy as sa
import sqlmodel  # noqa: F401  (autogenerate may emit sqlmodel.sql.sqltypes.AutoString)
from alembic import op
from procrastinate.schema import SchemaManager
from sqlalchemy.dialects.postgresql import JSONB

revision: str = "0009"
down_revision: str | None = "0008"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

JSON = sa.JSON().with_variant(JSONB(), "postgresql")
Text = sqlmodel.sql.sqltypes.AutoString


PROCRASTINATE_TABLES = (
    "procrastinate_events",
    "procrastinate_periodic_defers",
    "procrastinate_jobs",
    "procrastinate_workers",
)
PROCRASTINATE_TYPES = (
    "procrastinate_job_to_defer_v1",
    "procrastinate_job_event_type",
    "procrastinate_job_status",
)


def upgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        # Straight to psycopg, with no parameters: the schema's % signs are PL/pgSQL's. The same
        # connection, so it commits (or not) with the rest of the revision.
        driver = op.get_bind().connection.dbapi_connection
        assert driver is not None
        driver.cursor().execute(SchemaManager.get_schema())
    op.create_table(
        "report_render",
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("job_id", sa.Integer(), nullable=False),
        sa.Column("kind", Text(length=16), nullable=False),
        sa.Column("previous_report_id", sa.Integer(), nullable=True),
        sa.Column("number", Text(length=40), nullable=False),
        sa.Column("revision", sa.Integer(), nullable=False),
        sa.Column("requested_by_id", sa.Integer(), nullable=False),
        sa.Column("requested_at", sa.DateTime(), nullable=False),
        sa.Column("base_url", Text(length=300), nullable=False),
        sa.Column("sample_ids", JSON, nullable=True),
        sa.Column("tests", JSON, nullable=False),
        sa.Column("overlap_decision", Text(length=1000), nullable=False),
        sa.Column("signature_meaning", Text(length=300), nullable=False),
        sa.Column("signer_check", Text(length=64), nullable=False),
        sa.Column("status", Text(length=16), nullable=False),
        sa.Column("attempts", sa.Integer(), nullable=False),
        sa.Column("worker", Text(length=120), nullable=False),
        sa.Column("started_at", sa.DateTime(), nullable=True),
        sa.Column("finished_at", sa.DateTime(), nullable=True),
        sa.Column("error", Text(length=1000), nullable=False),
        sa.Column("report_id", sa.Integer(), nullable=True),
        sa.ForeignKeyConstraint(["job_id"], ["job.id"], name=op.f("fk_report_render_job_id_job")),
        sa.ForeignKeyConstraint(
            ["previous_report_id"], ["report.id"], name=op.f("fk_report_render_previous_report_id_report")
        ),
        sa.ForeignKeyConstraint(
            ["requested_by_id"], ["user.id"], name=op.f("fk_report_render_requested_by_id_user")
        ),
        sa.ForeignKeyConstraint(["report_id"], ["report.id"], name=op.f("fk_report_render_report_id_report")),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_report_render")),
    )
    with op.batch_alter_table("report_render", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_report_render_job_id"), ["job_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_report_render_status"), ["status"], unique=False)
    op.create_table(
        "worker_heartbeat",
        sa.Column("name", Text(length=120), nullable=False),
        sa.Column("queue", Text(length=20), nullable=False),
        sa.Column("host", Text(length=200), nullable=False),
        sa.Column("pid", sa.Integer(), nullable=False),
        sa.Column("started_at", sa.DateTime(), nullable=False),
        sa.Column("seen_at", sa.DateTime(), nullable=False),
        sa.PrimaryKeyConstraint("name", name=op.f("pk_worker_heartbeat")),
    )
    with op.batch_alter_table("worker_heartbeat", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_worker_heartbeat_seen_at"), ["seen_at"], unique=False)


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        for table in PROCRASTINATE_TABLES:
            op.execute(f"DROP TABLE IF EXISTS {table} CASCADE")
        op.execute(
            """DO $$ DECLARE f record; BEGIN
            FOR f IN SELECT p.oid::regprocedure AS sig FROM pg_proc p
                JOIN pg_namespace n ON n.oid = p.pronamespace
                WHERE n.nspname = current_schema() AND p.proname LIKE 'procrastinate%' LOOP
                EXECUTE 'DROP FUNCTION ' || f.sig || ' CASCADE';
            END LOOP; END $$"""
        )
        for type_name in PROCRASTINATE_TYPES:
            op.execute(f"DROP TYPE IF EXISTS {type_name} CASCADE")
    with op.batch_alter_table("worker_heartbeat", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_worker_heartbeat_seen_at"))
    op.drop_table("worker_heartbeat")
    with op.batch_alter_table("report_render", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_report_render_status"))
        batch_op.drop_index(batch_op.f("ix_report_render_job_id"))
    op.drop_table("report_render")
