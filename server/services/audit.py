"""Writing audit events: always inside the caller's transaction, never updated or deleted.

Also the two ways the trail is read back: replaying a test's events, and exporting as CSV.
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Iterable
from dataclasses import dataclass
from datetime import datetime
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
    typed_at: datetime | None = None,
) -> AuditEvent:
    """Add one event to the session; it commits (or not) with the change it describes.
    ``typed_at`` is when the person typed the change, given when it reached the server later
    (an entry kept on an offline tablet); the event's own time is its arrival."""
    event = AuditEvent(
        actor_id=actor.id if actor else None,
        actor=actor.username if actor else "system",
        entity=entity,
        entity_id=entity_id,
        action=action,
        before=before,
        after=after,
        reason=reason,
        typed_at=typed_at,
    )
    session.add(event)
    return event


# -- reading the trail back ---------------------------------------------------------------------


@dataclass
class Replayed:
    """A test revision as its audit events describe it."""

    status: str | None = None
    readings: dict[str, Any] | None = None
    events: int = 0


def replay(events: Iterable[AuditEvent]) -> Replayed:
    """Rebuild a test revision's status and readings from its events alone, in written order.

    Every event that changes readings carries them whole in ``after["readings"]`` (entered at
    the bench, or copied by an amendment), and every status change carries ``after["status"]``,
    so the trail is complete enough to rebuild the record (ISO/IEC 17025:2017 cl. 7.5.2: the
    original observations and every change to them are retained).
    """
    state = Replayed()
    for event in events:
        state.events += 1
        after = event.after or {}
        if "status" in after:
            state.status = after["status"]
        if "readings" in after:
            state.readings = after["readings"]
    return state


CSV_COLUMNS = (
    "event",
    "at_utc",
    "actor",
    "entity",
    "entity_id",
    "record",
    "action",
    "before",
    "after",
    "reason",
)
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _cell(value: str) -> str:
    """Text a spreadsheet will not run as a formula (OWASP "CSV Injection": a leading quote)."""
    return "'" + value if value.startswith(_FORMULA_START) else value


def _json_text(value: dict[str, Any] | None) -> str:
    return (
        "" if value is None else json.dumps(value, sort_keys=True, ensure_ascii=False, separators=(",", ":"))
    )


def csv_text(events: Iterable[AuditEvent], labels: dict[tuple[str, int], str] | None = None) -> str:
    """The events as CSV (RFC 4180, one row per event, before/after as JSON)."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow(CSV_COLUMNS)
    for e in events:
        writer.writerow(
            [
                e.id,
                e.at.isoformat(),
                _cell(e.actor),
                e.entity,
                e.entity_id,
                _cell((labels or {}).get((e.entity, e.entity_id), "")),
                e.action,
                _json_text(e.before),
                _json_text(e.after),
                _cell(e.reason or ""),
            ]
        )
    return out.getvalue()
