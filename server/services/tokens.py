"""Use-cases for personal API tokens: create, revoke, list, authenticate, log a use.

A token is 256 random bits (``secrets.token_urlsafe(32)``) shown once, when it is made; only
its SHA-256 is stored, so a copy of the database opens nothing. A token is looked up by that
hash (a unique index), so no comparison of secrets happens in Python and timing tells nothing.

A token acts as its user: every request reads the user again, so a role change or a
deactivation takes effect on the next request, and the API calls the same services with the
same user as the pages do. ``scope`` "read" may only read; "write" may also change what the
user's role may change. Creating and revoking are audited; each use (a request, refused or
not) is a row of ``ApiTokenUse`` beside the token, not an audit event: a use changes nothing.

A password change does not end a user's tokens (they are separate credentials, each revocable
on the user's page); deactivating the user refuses all of them.
"""

from __future__ import annotations

import hashlib
import logging
import secrets
from dataclasses import dataclass
from datetime import datetime, timedelta

from sqlmodel import col, func, select

from server.db.session import Database
from server.db.tables import ApiToken, ApiTokenUse, User, utcnow
from server.services import audit
from server.services.errors import Forbidden, NotFound, ServiceError
from server.services.fields import Checks, refuse
from server.workflow.states import Role

SCOPES = {"read": "read", "write": "write"}  # read: GET only; write: also what the role may change
MAX_DAYS = 366  # a token lives at most a year: a forgotten one stops by itself (common practice)
DEFAULT_DAYS = 90
NAME_MAX = 100
TOKEN_BYTES = 32  # 256 bits, as the share links
PREFIX_LENGTH = 8

log = logging.getLogger("claybench.api")


def token_sha256(token: str) -> str:
    return hashlib.sha256(token.encode()).hexdigest()


def token_state(token: ApiToken, now: datetime) -> str:
    """ "revoked", "expired" or "active" at ``now``."""
    if token.revoked_at is not None:
        return "revoked"
    if token.expires_at <= now:
        return "expired"
    return "active"


@dataclass
class NewToken:
    token: ApiToken
    plaintext: str  # shown once; never stored


def create_token(
    db: Database, actor: User | None, user: User, name: str, scope: str = "read", days: int = DEFAULT_DAYS
) -> NewToken:
    """A new token for ``user``, valid for ``days`` days.

    Personal: a person makes tokens for themself only (``actor`` is the user), so nobody holds a
    credential that acts as somebody else; ``actor`` None is the machine's operator (the
    ``create-token`` command), as for ``create-user``.
    """
    if actor is not None and actor.id != user.id:
        raise Forbidden("a token is personal: each person creates their own")
    checks = Checks()
    name = checks.text("name", name, "token name", NAME_MAX, required=True)
    scope = checks.choice("scope", scope, "scope", SCOPES)
    if not 1 <= days <= MAX_DAYS:
        checks.add("days", f"a token is valid for 1 to {MAX_DAYS} days")
    checks.done()
    plaintext = secrets.token_urlsafe(TOKEN_BYTES)
    with db.transaction() as s:
        owner = s.get(User, user.id)
        if owner is None or not owner.active:
            raise Forbidden(f"user {user.username} is not active: no token can be made for them")
        now = utcnow()
        clash = s.exec(
            select(ApiToken.id).where(
                ApiToken.user_id == owner.id,
                func.lower(ApiToken.name) == name.lower(),
                col(ApiToken.revoked_at).is_(None),
                col(ApiToken.expires_at) > now,
            )
        ).first()
        if clash is not None:
            refuse("name", f"you already have an active token named {name!r}: the log tells uses by name")
        token = ApiToken(
            user_id=owner.id or 0,
            name=name,
            token_sha256=token_sha256(plaintext),
            prefix=plaintext[:PREFIX_LENGTH],
            scope=scope,
            created_at=now,
            expires_at=now + timedelta(days=days),
        )
        s.add(token)
        s.flush()
        audit.record(
            s,
            actor,
            "api_token",
            token.id or 0,
            "create",
            after={
                "user_id": owner.id,
                "name": name,
                "prefix": token.prefix,
                "scope": scope,
                "expires_at": token.expires_at.isoformat(),
            },
        )
        return NewToken(token, plaintext)


def revoke_token(db: Database, actor: User, token_id: int) -> ApiToken:
    """End a token at once (audited); its owner or an admin may. Revoking it again changes nothing."""
    with db.transaction() as s:
        token = s.get(ApiToken, token_id)
        if token is None or (token.user_id != actor.id and actor.role != Role.admin.value):
            raise NotFound(f"token {token_id} does not exist")  # another's token is not even named
        if token.revoked_at is None:
            token.revoked_at = utcnow()
            s.add(token)
            audit.record(
                s,
                actor,
                "api_token",
                token_id,
                "revoke",
                before={"revoked_at": None},
                after={"revoked_at": token.revoked_at.isoformat(), "name": token.name},
            )
        return token


def live_tokens(db: Database) -> list[tuple[ApiToken, User]]:
    """Every token that still opens the API (not revoked, not expired), with its user, for the
    admins' access page; newest first."""
    now = utcnow()
    with db.session() as s:
        query = (
            select(ApiToken, User)
            .join(User, col(User.id) == col(ApiToken.user_id))
            .where(col(ApiToken.revoked_at).is_(None), col(ApiToken.expires_at) > now)
            .order_by(col(ApiToken.id).desc())
        )
        return [(token, user) for token, user in s.exec(query)]


@dataclass
class TokenRow:
    token: ApiToken
    state: str  # active | expired | revoked
    uses: int


@dataclass
class UserTokens:
    tokens: list[TokenRow]  # newest first
    uses: list[tuple[ApiTokenUse, str]]  # newest first, each with its token's name


def user_tokens(db: Database, user_id: int, *, log_limit: int = 100) -> UserTokens:
    """A user's tokens with their state and number of uses, and the latest uses (fixed queries)."""
    with db.session() as s:
        tokens = list(
            s.exec(
                select(ApiToken)
                .where(ApiToken.user_id == user_id)
                .order_by(col(ApiToken.created_at).desc(), col(ApiToken.id).desc())
            )
        )
        ids = [t.id for t in tokens]
        counts: dict[int, int] = {}
        uses: list[ApiTokenUse] = []
        if ids:
            counts = {
                tid: int(n)
                for tid, n in s.exec(
                    select(ApiTokenUse.token_id, func.count(col(ApiTokenUse.id)))
                    .where(col(ApiTokenUse.token_id).in_(ids))
                    .group_by(col(ApiTokenUse.token_id))
                ).all()
            }
            uses = list(
                s.exec(
                    select(ApiTokenUse)
                    .where(col(ApiTokenUse.token_id).in_(ids))
                    .order_by(col(ApiTokenUse.id).desc())
                    .limit(log_limit)
                )
            )
    now = utcnow()
    names = {t.id: t.name for t in tokens}
    return UserTokens(
        [TokenRow(t, token_state(t, now), counts.get(t.id or 0, 0)) for t in tokens],
        [(u, names.get(u.token_id, "")) for u in uses],
    )


class TokenRefused(ServiceError):
    """The bearer token opens nothing; ``token`` is the stored token when one matched (so that
    the refused use can be logged beside it), None when none did."""

    def __init__(self, message: str, token: ApiToken | None = None):
        self.token = token
        super().__init__(message)


def authenticate(db: Database, plaintext: str) -> tuple[User, ApiToken]:
    """The active user a token acts as, and the token; ``TokenRefused`` for an unknown, revoked
    or expired token or an inactive user."""
    if not plaintext or len(plaintext) > 200:
        raise TokenRefused("the token is not valid")
    with db.session() as s:
        token = s.exec(select(ApiToken).where(ApiToken.token_sha256 == token_sha256(plaintext))).first()
        if token is None:
            raise TokenRefused("the token is not valid")
        user = s.get(User, token.user_id)
    state = token_state(token, utcnow())
    if state != "active":
        raise TokenRefused(f"the token was {state}", token)
    if user is None or not user.active:
        raise TokenRefused("the token's user is not active", token)
    return user, token


def record_use(db: Database, token: ApiToken, method: str, path: str, status: int) -> None:
    """Log one request made with the token (the table for its owner, the app log for the operator)."""
    now = utcnow()
    with db.transaction() as s:
        s.add(ApiTokenUse(token_id=token.id or 0, at=now, method=method[:8], path=path[:300], status=status))
        stored = s.get(ApiToken, token.id)
        if stored is not None:
            stored.last_used_at = now
            s.add(stored)
    log.info(
        "api token %r (id %s, user %s) %s %s -> %s", token.name, token.id, token.user_id, method, path, status
    )
