"""The audit trail's hash chain: what an event's hash covers, and the walk that checks it.

Every event carries ``sha256``, the SHA-256 (FIPS 180-4) of its canonical content, and that
content includes ``prev_sha256``, the hash of the event written just before it (the one with the
next lower id; the first event links to ``GENESIS``, the empty string). Changing any stored field
of an event breaks its own hash; removing an event breaks the link of the event after it; a person
who re-hashes a changed event breaks the link of the one after that. Database triggers (and on
PostgreSQL the application role's privileges) refuse the change in the first place; the chain is
how anyone can show afterwards that nobody got round them.

The content of an event is frozen: it is the JSON object, keys sorted, separators ``","`` and
``":"``, non-ASCII characters escaped (so the text is ASCII, hashed as such), of

- ``at``: the event's time, ISO 8601 in UTC with microseconds, ``2026-12-02T09:15:00.000000Z``;
- ``actor_id`` (a number or null), ``actor``, ``entity``, ``entity_id``, ``action``;
- ``before`` and ``after``: the JSON values as stored (null when absent), with every float that
  holds a whole number written as that integer (PostgreSQL's jsonb hands ``1e16`` back as
  ``10000000000000000``; writing both the same keeps one hash for one value on either backend);
- ``reason`` (text or null) and ``typed_at`` (like ``at``, or null);
- ``prev_sha256``.

The id is not part of the content (it is given by the database on insert); the chain's order
is the order of ids. Changing this definition would invalidate every stored hash: the migration
that filled in the hashes of older events (0005) calls these same functions.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any, Literal, Protocol, cast

from sqlalchemy import BigInteger, Connection, Table, func, literal, text
from sqlalchemy import select as core_select
from sqlmodel import Session, col, select

from server.db.session import Database
from server.db.tables import AuditEvent

GENESIS = ""
"""What the first event of a trail links to."""

LOCK_KEY = int.from_bytes(b"cb-audit", "big")
"""The PostgreSQL advisory lock that serialises appends to the chain (the ASCII bytes "cb-audit"
read as one 64-bit integer; any fixed key would do, as long as every writer uses the same one)."""

_BATCH = 1000

_AUDIT = cast(Table, AuditEvent.__table__)  # type: ignore[attr-defined]
# PostgreSQL: the lock, then the newest hash, in one round trip (migration 0011 says why a
# function and not one statement).
_LOCKED_HEAD = text("SELECT claybench_audit_head(:key)")
LOCKED_HEAD = func.claybench_audit_head(literal(LOCK_KEY, BigInteger))
"""The same as a column expression, for a statement that can carry it (``locked_head_column``)."""
_NEWEST = core_select(_AUDIT.c.sha256).order_by(_AUDIT.c.id.desc()).limit(1)


class EventFields(Protocol):
    """What the content is made of: an ``AuditEvent``, or a row read by a migration."""

    @property
    def at(self) -> datetime: ...
    @property
    def actor_id(self) -> int | None: ...
    @property
    def actor(self) -> str: ...
    @property
    def entity(self) -> str: ...
    @property
    def entity_id(self) -> int: ...
    @property
    def action(self) -> str: ...
    @property
    def before(self) -> dict[str, Any] | None: ...
    @property
    def after(self) -> dict[str, Any] | None: ...
    @property
    def reason(self) -> str | None: ...
    @property
    def typed_at(self) -> datetime | None: ...


def _instant(value: datetime | None) -> str | None:
    """One spelling of one instant: a naive value is UTC (how both databases store it)."""
    if value is None:
        return None
    utc = value.replace(tzinfo=UTC) if value.tzinfo is None else value.astimezone(UTC)
    return utc.strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def _plain(value: Any) -> Any:
    """A JSON value as either database gives it back: lists for tuples, text keys, and whole
    floats as integers (see the module's docstring)."""
    if isinstance(value, dict):
        return {k if isinstance(k, str) else json.dumps(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if isinstance(value, float) and value.is_integer():
        return int(value)
    return value


def content_of(event: EventFields) -> dict[str, Any]:
    """The fields an event's hash covers, but the link (``chain_hash`` adds it)."""
    return {
        "at": _instant(event.at),
        "actor_id": event.actor_id,
        "actor": event.actor,
        "entity": event.entity,
        "entity_id": event.entity_id,
        "action": event.action,
        "before": _plain(event.before),
        "after": _plain(event.after),
        "reason": event.reason,
        "typed_at": _instant(event.typed_at),
    }


def canonical_text(content: Mapping[str, Any], prev_sha256: str) -> str:
    """The exact text that is hashed: the content with its link, as the module's docstring says."""
    return json.dumps(
        {**content, "prev_sha256": prev_sha256}, sort_keys=True, separators=(",", ":"), ensure_ascii=True
    )


def chain_hash(content: Mapping[str, Any], prev_sha256: str) -> str:
    """SHA-256 (hex) of the content linked to the hash of the event before it."""
    return hashlib.sha256(canonical_text(content, prev_sha256).encode("ascii")).hexdigest()


def head(session: Session | Connection) -> str:
    """The hash a new event links to: the newest event's, read inside the caller's transaction.

    Two writers that read the same head would fork the chain, so the read happens under a lock
    that lasts until the transaction ends. PostgreSQL: a transaction-level advisory lock on
    ``LOCK_KEY``, taken before the read (at READ COMMITTED, the app's level, the read then sees
    the event of the writer that held the lock before), both inside ``claybench_audit_head``
    (migration 0011): one round trip, two statements, as one statement's snapshot would be taken
    before it waited for the lock. SQLite:
    ``Database.transaction`` begins with ``BEGIN IMMEDIATE``, which takes the database's single
    write lock before anything is read; a session that began without it is refused its first
    write (SQLITE_BUSY) when another writer committed after its read, so it fails, not forks.
    """
    conn = session.connection() if isinstance(session, Session) else session
    if conn.dialect.name == "postgresql":
        newest = conn.execute(_LOCKED_HEAD, {"key": LOCK_KEY}).scalar()
    else:
        newest = conn.execute(_NEWEST).scalar()
    return GENESIS if newest is None else str(newest)


# -- the walk -----------------------------------------------------------------------------------


@dataclass(frozen=True)
class BadRow:
    """The first event where the chain does not hold, and what is wrong with it."""

    event_id: int
    kind: Literal["changed", "broken-link", "removed"]
    message: str


@dataclass(frozen=True)
class Verification:
    """The outcome of one walk: how many events were read, the last good hash, the first fault."""

    checked: int
    head_sha256: str
    bad: BadRow | None


def _fault(event: AuditEvent, expected_prev: str, previous_id: int | None) -> BadRow | None:
    """Why this event breaks the chain, or None: its own hash first (a change to this very
    event), then its link to the event before it (a removal, or a change that was re-hashed)."""
    event_id = event.id or 0
    if not event.sha256:
        return BadRow(event_id, "changed", "it carries no hash: it was written outside the application")
    if chain_hash(content_of(event), event.prev_sha256) != event.sha256:
        return BadRow(
            event_id, "changed", "its content does not match its sha256: it was changed after it was written"
        )
    if event.prev_sha256 == expected_prev:
        return None
    if previous_id is None:
        return BadRow(
            event_id,
            "removed",
            "it is the oldest event but links to an earlier one: events before it were removed",
        )
    if event_id > previous_id + 1:
        first, last = previous_id + 1, event_id - 1
        missing = f"event {first}" if first == last else f"events {first} to {last}"
        return BadRow(
            event_id,
            "removed",
            f"its prev_sha256 is not the sha256 of event {previous_id}, and {missing} "
            "before it are missing: removed",
        )
    return BadRow(
        event_id,
        "broken-link",
        f"its prev_sha256 is not the sha256 of event {previous_id}: one of the two was changed and "
        "re-hashed, or written around the chain's lock",
    )


def check(db: Database) -> Verification:
    """Walk the whole trail in id order, a batch at a time (memory stays flat on a long trail)."""
    checked, expected, previous_id = 0, GENESIS, None
    with db.session() as s:
        while True:
            query = select(AuditEvent).order_by(col(AuditEvent.id)).limit(_BATCH)
            if previous_id is not None:
                query = query.where(col(AuditEvent.id) > previous_id)
            batch = list(s.exec(query))
            if not batch:
                return Verification(checked, expected, None)
            for event in batch:
                checked += 1
                bad = _fault(event, expected, previous_id)
                if bad is not None:
                    return Verification(checked, expected, bad)
                expected, previous_id = event.sha256, event.id
            s.expunge_all()


def verify(db: Database) -> BadRow | None:
    """The first event that was changed, or follows a removed one; None when the trail holds.

    An unbroken chain cannot show that its newest events were removed: keep the head hash that
    ``check`` reports (``claybench audit verify`` prints it) and compare it later.
    """
    return check(db).bad
