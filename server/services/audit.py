"""Writing audit events: always inside the caller's transaction, never updated or deleted."""

from __future__ import annotations

from typing import Any

from sqlmodel import Session

from server.db.tables import AuditEvent, User


def record(
    session: Session,
    actor: User | None,
    entity: str,
    entity_id: int,
    action: str,
    *,
    before: dict[str, Any] | None = None,
    after: dict[str, Any] | None = None,
    reason: str | None = None,
) -> AuditEvent:
    """Add one event to the session; it commits (or not) with the change it describes."""
    event = AuditEvent(
        actor_id=actor.id if actor else None,
        actor=actor.username if actor else "system",
        entity=entity,
        entity_id=entity_id,
        action=action,
        before=before,
        after=after,
        reason=reason,
    )
    session.add(event)
    return event
