"""The signed session cookie, the signed-in user, role checks and CSRF tokens.

Starlette's SessionMiddleware signs the cookie (HttpOnly, SameSite=Lax) but does not encrypt
it, so it holds only a user id, the user's session version and a CSRF token. Bumping a user's
``session_version`` (sign-out everywhere, password change, deactivation) revokes every cookie.
"""

from __future__ import annotations

import hmac
import secrets

from fastapi import Request
from starlette.datastructures import FormData

from server.db.session import Database
from server.db.tables import User

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


def sign_in(request: Request, user: User) -> None:
    request.session.clear()
    request.session.update({"uid": user.id, "sv": user.session_version, "csrf": secrets.token_urlsafe(32)})


def sign_out(request: Request) -> None:
    request.session.clear()


def signed_in_user(request: Request) -> User | None:
    """The active user the session names, or None (also when the session was revoked)."""
    if "user" in request.state._state:
        return request.state.user
    user = None
    uid = request.session.get("uid")
    if isinstance(uid, int):
        with database(request).session() as s:
            found = s.get(User, uid)
        if found and found.active and found.session_version == request.session.get("sv"):
            user = found
    request.state.user = user
    return user


def require_user(request: Request) -> User:
    user = signed_in_user(request)
    if user is None:
        raise SignInRequired()
    return user


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
    if origin and origin not in {str(request.base_url).rstrip("/"), "null"}:
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
