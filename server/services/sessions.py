"""Sign-in sessions kept on the server: start one, find the one a cookie names, end them.

The cookie carries a random id (``secrets.token_urlsafe``); the table keeps only its SHA-256,
so a copy of the database opens no session. A session ends for good when its person signs out
(that browser, or every browser), changes their password (every other browser), is deactivated
or has their password reset (every browser), when an admin ends it, after ``idle_s`` without a
request, and ``max_age_s`` after sign-in whatever happens. Ending is audited under the person
who did it; the rows stay, so admins can see who was signed in from where.
"""

from __future__ import annotations

import hashlib
import secrets
from dataclasses import dataclass
from datetime import datetime, timedelta

from sqlmodel import Session, col, select

from server.db.session import Database
from server.db.tables import User, UserSession, utcnow
from server.services import audit
from server.services.errors import Forbidden, NotFound
from server.workflow.states import Role

TOUCH_EVERY = timedelta(seconds=60)
"""``last_seen_at`` is written at most this often per session: idle expiry needs no finer clock,
and a write on every request would double the writes of a bench save."""


def _sha256(token: str) -> str:
    return hashlib.sha256(token.encode()).hexdigest()


@dataclass(frozen=True)
class Lifetime:
    """How long a session lasts: without a request, and in any case after sign-in."""

    idle_s: int
    max_age_s: int

    def alive(self, row: UserSession, now: datetime) -> bool:
        return (
            row.ended_at is None
            and now - row.last_seen_at < timedelta(seconds=self.idle_s)
            and now - row.created_at < timedelta(seconds=self.max_age_s)
        )

    def usual(self, user: User, row: UserSession, now: datetime) -> bool:
        """Whether a session read as stored can be taken as it is, with nothing to write: the live
        session of an active person, touched less than ``TOUCH_EVERY`` ago. Every other case
        (ended, expired, deactivated, due its touch) is ``find``'s, which writes what it must."""
        return user.active and self.alive(row, now) and now - row.last_seen_at < TOUCH_EVERY


@dataclass(frozen=True)
class ByCookie:
    """The person a request's session cookie names, not yet read: a bench save reads them in
    the same statement that locks its test (``bench.save_changes``), and so saves the session's
    round trip to the database on the hottest path. Only the usual case is settled there; any
    other raises ``LookUpFirst`` before anything is stored, and the caller signs the person in
    the ordinary way (``find``) and saves again."""

    token_sha256: str
    lifetime: Lifetime

    @classmethod
    def of(cls, token: str, lifetime: Lifetime) -> ByCookie:
        return cls(_sha256(token), lifetime)

    def person(self, found: tuple[User, UserSession] | None) -> tuple[User, UserSession]:
        """The person and session read with the test, if they are the usual case."""
        if found is None or not self.lifetime.usual(found[0], found[1], utcnow()):
            raise LookUpFirst()
        return found


class LookUpFirst(Exception):
    """The cookie's session is not the usual case (``Lifetime.usual``): look it up with ``find``."""


def start(db: Database, user: User, remote_addr: str, user_agent: str) -> tuple[str, UserSession]:
    """A new session for a person who has just proved who they are; returns the cookie's id.

    A new id at every sign-in, so an id planted in a browser before sign-in is worth nothing."""
    token = secrets.token_urlsafe(32)
    with db.transaction() as s:
        row = UserSession(
            user_id=user.id or 0,
            token_sha256=_sha256(token),
            remote_addr=remote_addr[:64],
            user_agent=user_agent[:300],
        )
        s.add(row)
        s.flush()
        audit.record(
            s,
            user,
            "session",
            row.id or 0,
            "sign-in",
            after={"address": row.remote_addr, "agent": row.user_agent},
        )
        return token, row


def find(db: Database, token: str, lifetime: Lifetime) -> tuple[User, UserSession] | None:
    """The active user and live session this cookie id names, or None.

    One read per request; a session seen more than ``TOUCH_EVERY`` ago is touched in a short
    write, and one past its lifetime is marked ended (with why) the first time it is refused."""
    now = utcnow()
    with db.session() as s:
        found = s.exec(
            select(User, UserSession)
            .join(UserSession, col(UserSession.user_id) == col(User.id))
            .where(UserSession.token_sha256 == _sha256(token))
        ).first()
    if found is None:
        return None
    user, row = found
    if row.ended_at is not None:
        return None
    if not user.active or not lifetime.alive(row, now):
        _end_rows(db, [row.id or 0], "inactive" if not user.active else "expired", now)
        return None
    if now - row.last_seen_at >= TOUCH_EVERY:
        with db.transaction() as s:
            stored = s.get(UserSession, row.id)
            if stored is not None and stored.ended_at is None:
                stored.last_seen_at = now
                s.add(stored)
        row.last_seen_at = now
    return user, row


def _end_rows(db: Database, ids: list[int], reason: str, now: datetime) -> None:
    """Expiry is not a person's act: it is noted on the row, not in the audit trail."""
    with db.transaction() as s:
        for row in s.exec(select(UserSession).where(col(UserSession.id).in_(ids))):
            if row.ended_at is None:
                row.ended_at, row.end_reason = now, reason
                s.add(row)


def end_all(s: Session, user_id: int, reason: str, keep: int | None = None) -> int:
    """End every live session of a person (but ``keep``), inside the caller's transaction;
    the caller's own audit event says why. Returns how many ended."""
    query = select(UserSession).where(UserSession.user_id == user_id, col(UserSession.ended_at).is_(None))
    now, ended = utcnow(), 0
    for row in s.exec(query):
        if row.id == keep:
            continue
        row.ended_at, row.end_reason = now, reason
        s.add(row)
        ended += 1
    return ended


def sign_out(db: Database, user: User, session_id: int) -> None:
    """The person ends the session of this browser."""
    with db.transaction() as s:
        row = s.get(UserSession, session_id)
        if row is None or row.user_id != user.id or row.ended_at is not None:
            return
        row.ended_at, row.end_reason = utcnow(), "signed out"
        s.add(row)
        audit.record(s, user, "session", session_id, "sign-out")


def sign_out_everywhere(db: Database, user: User) -> int:
    """The person ends every session of theirs, this browser's included."""
    with db.transaction() as s:
        ended = end_all(s, user.id or 0, "signed out everywhere")
        audit.record(s, user, "user", user.id or 0, "sign-out-everywhere", after={"sessions_ended": ended})
        return ended


def end_by_admin(db: Database, actor: User, session_id: int) -> UserSession:
    """An admin ends someone's session (a lost tablet, a person who left the bench signed in)."""
    if actor.role != Role.admin.value or not actor.active:
        raise Forbidden("only an admin ends other people's sessions")
    with db.transaction() as s:
        row = s.get(UserSession, session_id)
        if row is None:
            raise NotFound(f"session {session_id} does not exist")
        if row.ended_at is None:
            row.ended_at, row.end_reason = utcnow(), "ended by an admin"
            s.add(row)
            audit.record(s, actor, "session", session_id, "end", after={"user_id": row.user_id})
        return row


def live(db: Database, lifetime: Lifetime, user_id: int | None = None) -> list[tuple[UserSession, User]]:
    """Sessions not ended and within their lifetime, newest first (of one person, or of all)."""
    now = utcnow()
    query = (
        select(UserSession, User)
        .join(User, col(User.id) == col(UserSession.user_id))
        .where(col(UserSession.ended_at).is_(None))
        .where(col(UserSession.created_at) > now - timedelta(seconds=lifetime.max_age_s))
        .where(col(UserSession.last_seen_at) > now - timedelta(seconds=lifetime.idle_s))
        .order_by(col(UserSession.last_seen_at).desc())
    )
    if user_id is not None:
        query = query.where(UserSession.user_id == user_id)
    with db.session() as s:
        return [(row, user) for row, user in s.exec(query)]
