"""Indexes for a big laboratory (issue S11 point 3), found by EXPLAIN ANALYZE on a generated lab
of 100,000 samples, 300,000 tests and 1,000,000 audit events (tests/benchmarks/build_big_lab.py):

- ``ix_lab_test_sample_status`` (sample_id, status; on PostgreSQL id and the hand-in and approval times
  included): a job's or a
  sample's current tests without the wide rows (job page, jobs list counts, the turnaround
  rollup as an index-only scan);
- ``ix_lab_test_waiting`` (id, only the tests handed in; on PostgreSQL what the review desk
  counts, orders and narrows by included): the desk reads its whole queue from this index, not
  from the wide rows of every waiting test;
- ``ix_report_test_test_id``: which reports carry a test (the primary key starts with the
  report), for turnaround, re-issue and the review page;
- ``ix_audit_event_authors`` (entity, entity_id, action, actor_id): who entered or amended a
  test's readings, read from the index alone (the review desk's authors and its person filter).

Revision ID: 0010
Revises: 0009
Create Date: 2026-12-04 21:00:00
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

WAITING = "status = 'submitted'"
# Only columns a bench save never changes: a save that changed an indexed column (flags,
# updated_at) could not be a heap-only update and would touch every index of lab_test.
WAITING_COLUMNS = ["sample_id", "method", "submitted_at", "previous_revision_id"]

revision: str = "0010"
down_revision: str | None = "0009"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    with op.batch_alter_table("lab_test", schema=None) as batch_op:
        batch_op.create_index(
            "ix_lab_test_sample_status",
            ["sample_id", "status"],
            unique=False,
            postgresql_include=["id", "submitted_at", "approved_at"],
        )
        batch_op.create_index(
            "ix_lab_test_waiting",
            ["id"],
            unique=False,
            postgresql_include=WAITING_COLUMNS,
            postgresql_where=sa.text(WAITING),
            sqlite_where=sa.text(WAITING),
        )
    with op.batch_alter_table("report_test", schema=None) as batch_op:
        batch_op.create_index("ix_report_test_test_id", ["test_id"], unique=False)
    with op.batch_alter_table("audit_event", schema=None) as batch_op:
        batch_op.create_index(
            "ix_audit_event_authors", ["entity", "entity_id", "action", "actor_id"], unique=False
        )


def downgrade() -> None:
    with op.batch_alter_table("audit_event", schema=None) as batch_op:
        batch_op.drop_index("ix_audit_event_authors")
    with op.batch_alter_table("report_test", schema=None) as batch_op:
        batch_op.drop_index("ix_report_test_test_id")
    with op.batch_alter_table("lab_test", schema=None) as batch_op:
        batch_op.drop_index("ix_lab_test_waiting")
        batch_op.drop_index("ix_lab_test_sample_status")
