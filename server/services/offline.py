"""Entries kept on a tablet without a connection: whose they are, and when they were typed.

A tablet keeps what is typed while it has no connection in its own storage, bound to the person
who typed it (``static/bench.js``), and sends it when that person is signed in and the connection
is back. Between typing and sending, the tablet may change hands. The record has to say who made
each observation and when (ISO/IEC 17025:2017 cl. 7.5.1: the date and the identity of the person
responsible, original observations recorded at the time they are made; cl. 7.11.3: the data are
protected from unauthorised access and safeguarded against tampering), so:

- an entry is saved only in its typist's own session. An entry whose typist is another user is
  refused with ``OtherTypist`` (HTTP 409) and nothing is stored: the next person on the tablet
  can never send it, and so never sign it as theirs. They may discard it, with a reason that is
  recorded with the discarded values and the typist's name (``discard``);
- the audit event of a save is written on arrival (its ``at``) and, when the entry was typed
  noticeably earlier, also says when it was typed (``typed_at``).

When it was typed, on the server's clock. The tablet stamps each entry with its own clock when it
is typed, and the batch again when it is sent. A tablet's clock can be minutes or hours wrong (set
by hand, in the wrong zone, never synchronised), but the interval between the two stamps does not
depend on that error; the typing time is taken as the arrival time minus that interval, so a wrong
tablet clock neither hides a delay nor invents one. Rules (``typing_times``):

- typed within ``LIVE_SLACK`` of being sent: typed live, the event's own time says it all;
- stamped more than ``CLOCK_SLACK`` after it was sent, or computed before the test existed: not
  a time of typing (the tablet's clock was stepped meanwhile). The entry is still saved, since a
  value is never lost to a clock; its claimed time is kept in the event (``typed_at_ignored``)
  and no typing time is asserted;
- otherwise the event's ``typed_at`` is the earliest typing time of the entries it stores, and
  ``after["typed_at"]`` gives each field's own.

Without a sending stamp (a client that gives only ``typed_at``), the tablet's clock is taken to
agree with the server's.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from typing import Any

from sqlmodel import Session

from server.db.session import Database
from server.db.tables import AuditEvent, LabTest, User
from server.services import audit
from server.services.errors import Conflict, NotFound, invalid

LIVE_SLACK = timedelta(seconds=5)
"""An entry sent this soon after it was typed counts as typed live (common practice: a few seconds
covers the preview and the save round trip of a live connection)."""

CLOCK_SLACK = timedelta(seconds=5)
"""How far an entry's stamp may fall after the batch's sending stamp before it is taken for a clock
step rather than a time of typing."""

REASON_MAX = 1000  # the audit event's reason column


class OtherTypist(Conflict):
    """Entries typed by another person than the one signed in: nothing of them was saved."""

    def __init__(self, typist: User | None, typed_by: int):
        self.typed_by = typed_by
        who = f"{typist.full_name} ({typist.username})" if typist else f"user {typed_by}, unknown here"
        super().__init__(
            f"these entries were typed by {who}; only they can send them, signed in as themselves. "
            "Nothing was saved"
        )


def check_typist(session: Session, actor: User, typed_by: int | None) -> None:
    """Refuse entries whose typist is not the signed-in person (``None``: typed by the actor now)."""
    if typed_by is None or typed_by == actor.id:
        return
    raise OtherTypist(session.get(User, typed_by), typed_by)


@dataclass(frozen=True)
class TypingTimes:
    """What the audit event of a save says about when its entries were typed."""

    at: datetime | None = None  # the event's typed_at: the earliest, None when typed live
    fields: dict[str, str] = field(default_factory=dict)  # path -> typing time (server clock)
    ignored: dict[str, str] = field(default_factory=dict)  # path -> the tablet's stamp, not credible

    def after(self) -> dict[str, Any]:
        """The keys to add to the event's ``after`` (none for a live save)."""
        out: dict[str, Any] = {}
        if self.fields:
            out["typed_at"] = self.fields
        if self.ignored:
            out["typed_at_ignored"] = self.ignored
        return out


def typing_times(
    stamps: Mapping[str, datetime],
    *,
    sent_at: datetime | None,
    arrival: datetime,
    not_before: datetime,
) -> TypingTimes:
    """When each entry was typed, on the server's clock, by the rules of the module docstring.

    ``stamps`` are the tablet's typing stamps by field path, ``sent_at`` its stamp on the batch,
    ``arrival`` the server's time now, ``not_before`` the test's creation.
    """
    clock = sent_at or arrival
    fields: dict[str, datetime] = {}
    ignored: dict[str, str] = {}
    for path, stamp in stamps.items():
        waited = clock - stamp
        typed = arrival - max(waited, timedelta(0))
        if waited < -CLOCK_SLACK or typed < not_before:
            ignored[path] = stamp.isoformat()
        elif waited > LIVE_SLACK:
            fields[path] = typed
    return TypingTimes(
        min(fields.values()) if fields else None,
        {p: t.isoformat() for p, t in fields.items()},
        ignored,
    )


@dataclass(frozen=True)
class KeptEntry:
    """One value a tablet kept: the field, the text as typed, the tablet's typing stamp."""

    path: str
    value: str
    typed_at: datetime | None = None


def discard(
    db: Database,
    actor: User,
    test_id: int,
    typed_by: int | None,
    entries: Sequence[KeptEntry],
    reason: str,
) -> AuditEvent:
    """Record that ``actor`` discarded entries another person left unsent on a tablet.

    The tablet removes them once this is recorded. Nothing of the test changes: the entries were
    never saved. The event is on the test (its trail shows it) with the discarded values and
    their typist in ``before``: an observation is not dropped without a trace and a reason
    (ISO/IEC 17025:2017 cl. 7.5.2). ``typed_by`` None: the tablet did not record the typist.
    """
    reason = reason.strip()
    if not reason:
        raise invalid("reason", "say why these entries are discarded: the reason is recorded")
    if len(reason) > REASON_MAX:
        raise invalid("reason", f"the reason is limited to {REASON_MAX} characters")
    if not entries:
        raise invalid("entries", "there are no entries to discard")
    with db.transaction() as s:
        if s.get(LabTest, test_id) is None:
            raise NotFound(f"test {test_id} does not exist")
        typist = s.get(User, typed_by) if typed_by is not None else None
        if typed_by is not None and typist is None:
            raise invalid("typed_by", f"user {typed_by} is not a user of this laboratory")
        return audit.record(
            s,
            actor,
            "lab_test",
            test_id,
            "discard_offline",
            before={
                "typed_by": (
                    {"id": typist.id, "username": typist.username, "full_name": typist.full_name}
                    if typist
                    else None
                ),
                "entries": [
                    {
                        "path": e.path,
                        "value": e.value,
                        "typed_at": e.typed_at.isoformat() if e.typed_at else None,
                    }
                    for e in entries
                ],
            },
            after={"discarded": len(entries)},
            reason=reason,
        )
