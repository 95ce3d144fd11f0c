"""Reading back what a use-case stored: row counts and audit events, for the tests that show a
refused call stored nothing and a stored one was audited."""

from __future__ import annotations

import pytest
from sqlmodel import col, func, select

from server.db.session import Database
from server.db.tables import AuditEvent, Client, Job, LabTest, Location, Sample
from server.services.errors import Invalid

INTAKE_TABLES: tuple[type, ...] = (Client, Job, Location, Sample, LabTest, AuditEvent)
"""Every table intake writes."""


def row_count(db: Database, table: type) -> int:
    with db.session() as s:
        return int(s.exec(select(func.count()).select_from(table)).one())


def row_counts(db: Database, tables: tuple[type, ...] = INTAKE_TABLES) -> dict[str, int]:
    """Rows of each table, by table name: equal before and after, nothing was stored."""
    return {t.__name__: row_count(db, t) for t in tables}


def audit_events(
    db: Database, entity: str, entity_id: int | None = None, action: str | None = None
) -> list[AuditEvent]:
    """The audit events of an entity (of one record, of one action), oldest first."""
    with db.session() as s:
        query = select(AuditEvent).where(AuditEvent.entity == entity)
        if entity_id is not None:
            query = query.where(AuditEvent.entity_id == entity_id)
        if action is not None:
            query = query.where(AuditEvent.action == action)
        return list(s.exec(query.order_by(col(AuditEvent.id))))


def refused_fields(refused: pytest.ExceptionInfo[Invalid]) -> set[str]:
    """The fields a refusal names; each error is field-level (one field per location)."""
    assert all(len(e.loc) == 1 for e in refused.value.errors), refused.value.errors  # field-level
    return {str(e.loc[0]) for e in refused.value.errors}
