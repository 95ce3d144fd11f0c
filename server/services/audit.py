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
from typing import Any, cast

from sqlalchemy import ColumnElement, Connection, Table, Transaction, insert
from sqlmodel import Session

from server.db.queries import loaded
from server.db.tables import AuditEvent, User, utcnow
from server.services import audit_chain

_CHAIN = "claybench_audit_chain"
"""Where a connection keeps the hash of the last event it added, with the transaction it belongs to."""

_INSERT = insert(cast(Table, AuditEvent.__table__))  # type: ignore[attr-defined]


def record(
    session: Session | Connection,
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
    """Write one event in the caller's transaction (an ORM session's, or a bare connection's on
    the hot path); it commits (or not) with the change it describes. ``typed_at`` is when the
    person typed the change, given when it reached the server later (an entry kept on an offline
    tablet); the event's own time is its arrival.

    The event is sealed into the hash chain here (``audit_chain`` says what the hash covers): it
    links to the newest event, read once per transaction under the chain's lock, and later events
    of the same transaction link to the one before them. ``before`` and ``after`` are stored as
    copies, so a caller that changes its dict afterwards cannot make the stored value differ from
    the hashed one. One Core INSERT, at once: the returned event carries its id, in no session.
    """
    conn = session.connection() if isinstance(session, Session) else session
    values: dict[str, Any] = {
        "at": utcnow(),
        "actor_id": actor.id if actor else None,
        "actor": actor.username if actor else "system",
        "entity": entity,
        "entity_id": entity_id,
        "action": action,
        "before": _copy(before),
        "after": _copy(after),
        "reason": reason,
        "typed_at": typed_at,
        "prev_sha256": _previous_sha256(conn),
    }
    event = loaded(AuditEvent, values)
    values["sha256"] = event.__dict__["sha256"] = audit_chain.chain_hash(
        audit_chain.content_of(event), event.prev_sha256
    )
    (event.__dict__["id"],) = conn.execute(_INSERT, values).inserted_primary_key or (None,)
    conn.info[_CHAIN] = (_innermost(conn), event.sha256)
    return event


def _copy(value: dict[str, Any] | None) -> dict[str, Any] | None:
    """The value as the JSON column will store it, detached from the caller's dict."""
    return None if value is None else dict(json.loads(json.dumps(value)))


def locked_head_column(conn: Connection) -> ColumnElement[Any] | None:
    """On PostgreSQL, what an earlier statement of the transaction may return to take the
    chain's lock and read its head in its own round trip (``remember_head`` keeps it for the
    event); None where there is nothing to take (SQLite's write transaction holds the lock)."""
    return audit_chain.LOCKED_HEAD if conn.dialect.name == "postgresql" else None


def remember_head(conn: Connection, head: str | None) -> None:
    """The chain's head read under its lock by another statement of this transaction: the next
    event links to it without a query of its own."""
    conn.info[_CHAIN] = (_innermost(conn), audit_chain.GENESIS if head is None else str(head))


def _innermost(conn: Connection) -> Transaction | None:
    """The transaction (or savepoint) events are being added in: a remembered hash is only good
    inside the one it was remembered in, since a commit or a rolled-back savepoint ends it."""
    return conn.get_nested_transaction() or conn.get_transaction()


def _previous_sha256(conn: Connection) -> str:
    """The hash the next event links to: this connection's last event of this transaction, or
    else the newest stored event (one SELECT, under the lock that keeps writers from forking)."""
    remembered = conn.info.get(_CHAIN)
    current = _innermost(conn)
    if remembered is not None and current is not None and remembered[0] is current:
        return str(remembered[1])
    return audit_chain.head(conn)


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
