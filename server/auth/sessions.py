"""The session cookie, the signed-in user, role checks and CSRF tokens.

Starlette's SessionMiddleware signs the cookie (HttpOnly, SameSite=Lax) but does not encrypt
it, so it holds only the random id of a session kept on the server (``services.sessions``) and
a CSRF token. Whether the session is alive is decided by its row, never by the cookie: signing
out, a password change or an admin ends it for every copy of the cookie.
"""

from __future__ import annotations

import hmac
import secrets

from fastapi import Request
from starlette.datastructures import FormData

from server.auth.throttle import client_address
from server.db.queries import session_with_user
from server.db.session import Database
from server.db.tables import User, UserSession, utcnow
from server.services import sessions

SAFE_METHODS = {"GET", "HEAD", "OPTIONS"}


class SignInRequired(Exception):
    """No valid session: pages redirect to the sign-in page, the API answers 401."""


class RoleRequired(Exception):
    """Signed in, but the role may not use this route (403)."""


class CsrfRefused(Exception):
    """A state-changing request without the session's CSRF token (403)."""


def database(request: Request) -> Database:
    db: Database = request.app.state.db
    return db


def lifetime(request: Request) -> sessions.Lifetime:
    settings = request.app.state.settings
    return sessions.Lifetime(idle_s=settings.session_idle_s, max_age_s=settings.session_max_age_s)


def sign_in(request: Request, user: User) -> None:
    """Start a new session (a new id and a new CSRF token: nothing of the cookie before
    sign-in carries over)."""
    token, _ = sessions.start(
        database(request), user, client_address(request), request.headers.get("user-agent", "")
    )
    request.session.clear()
    request.session.update({"sid": token, "csrf": secrets.token_urlsafe(32)})


def sign_out(request: Request) -> None:
    """End this browser's session on the server, then forget the cookie."""
    found = _session(request)
    if found is not None:
        sessions.sign_out(database(request), found[0], found[1].id or 0)
    request.session.clear()


def _session(request: Request) -> tuple[User, UserSession] | None:
    if "signed_in" not in request.state._state:
        sid = request.session.get("sid")
        found = _find(database(request), sid, lifetime(request)) if isinstance(sid, str) else None
        request.state.signed_in = found
    result: tuple[User, UserSession] | None = request.state.signed_in
    return result


def _find(db: Database, token: str, life: sessions.Lifetime) -> tuple[User, UserSession] | None:
    """``sessions.find``, its usual answer given by one Core read: a live session of an active
    person, touched less than ``TOUCH_EVERY`` ago, needs no write. Every other case (unknown,
    ended, expired, deactivated, due its touch: once a minute a session) goes to ``sessions.find``,
    which reads the row again and writes what it must. Every request pays this read, so it is
    the cheapest there is: no ORM session, and on PostgreSQL no transaction (``Database.read``)."""
    digest = sessions._sha256(token)
    found = db.read(lambda conn: session_with_user(conn, digest))
    if found is not None and life.usual(found[0], found[1], utcnow()):
        return found
    return sessions.find(db, token, life)


def by_cookie(request: Request) -> sessions.ByCookie:
    """The person this request's cookie names, to be read by a bench save with its test's lock
    (``bench.save_changes``); ``remember_signed_in`` then keeps what it read for the request."""
    sid = request.session.get("sid")
    if not isinstance(sid, str):
        raise SignInRequired()
    return sessions.ByCookie.of(sid, lifetime(request))


def remember_signed_in(request: Request, found: tuple[User, UserSession] | None) -> None:
    request.state.signed_in = found


def signed_in_user(request: Request) -> User | None:
    """The active user whose live session the cookie names, or None (also when it was ended)."""
    found = _session(request)
    return found[0] if found else None


def current_session(request: Request) -> UserSession | None:
    """This browser's live session, or None."""
    found = _session(request)
    return found[1] if found else None


def require_user(request: Request) -> User:
    user = signed_in_user(request)
    if user is None:
        raise SignInRequired()
    return user


async def session_cookie(request: Request) -> None:
    """Refuse at once a request whose cookie names no session, reading nothing: for a route that
    looks the session up itself (``require_user``) in the worker thread it runs in anyway."""
    if not isinstance(request.session.get("sid"), str):
        raise SignInRequired()


def require_roles(*roles: str):  # type: ignore[no-untyped-def]
    """A dependency that lets only these roles through."""

    def check(request: Request) -> User:
        user = require_user(request)
        if user.role not in roles:
            raise RoleRequired(f"this page is for {' or '.join(roles)} users")
        return user

    return check


def csrf_token(request: Request) -> str:
    """The session's CSRF token, created on first use (also for the sign-in form)."""
    token = request.session.get("csrf")
    if not token:
        token = secrets.token_urlsafe(32)
        request.session["csrf"] = token
    return str(token)


async def csrf_protect(request: Request) -> None:
    """Refuse a state-changing request that lacks the session's token or comes cross-site.

    htmx sends the token in the ``X-CSRF-Token`` header (set once in ``hx-headers``); plain
    forms send it in a hidden ``csrf_token`` field.
    """
    if request.method in SAFE_METHODS:
        return
    if request.headers.get("sec-fetch-site") == "cross-site":
        raise CsrfRefused("cross-site request refused")
    origin = request.headers.get("origin")
    # "null" is what a sandboxed frame, a data: page or a file sends: never this site.
    if origin and origin != str(request.base_url).rstrip("/"):
        raise CsrfRefused("request from another origin refused")
    expected = request.session.get("csrf")
    sent = request.headers.get("x-csrf-token")
    if sent is None and request.headers.get("content-type", "").startswith(
        ("application/x-www-form-urlencoded", "multipart/form-data")
    ):
        form: FormData = await request.form()
        value = form.get("csrf_token")
        sent = value if isinstance(value, str) else None
    if not expected or not sent or not hmac.compare_digest(str(expected), sent):
        raise CsrfRefused(
            "the form has expired or did not come from this site; reload the page and try again"
        )
