"""The signed-in person's own account: API tokens (list them with their last uses, make one,
shown once, revoke one), the browsers signed in as them (sign one out, or all), and their
password. Everyone signed in has these pages; each person sees only their own. Every change
goes through ``server.services`` (tokens, sessions, users) and is audited there."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Depends, Form, Request
from fastapi.responses import RedirectResponse
from starlette.responses import Response

from server.auth.sessions import csrf_protect, current_session, database, lifetime, require_user
from server.db.tables import User
from server.services import sessions, tokens, users
from server.services.errors import Invalid, ServiceError, http_status
from server.web.params import IdPath, PageRoute
from server.web.refusals import refusals_as_http
from server.web.templating import render

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]


DAY_CHOICES = {"7": "7 days", "30": "30 days", "90": "90 days", "366": "a year"}


def _page(request: Request, user: User, *, status_code: int = 200, **extra: Any) -> Response:
    found = tokens.user_tokens(database(request), user.id or 0)
    response = render(
        request,
        "pages/account_tokens.html",
        status_code=status_code,
        found=found,
        scopes=tokens.SCOPES,
        day_choices=DAY_CHOICES,
        form=extra.get("form", {"name": "", "scope": "read", "days": str(tokens.DEFAULT_DAYS)}),
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
        message=extra.get("message"),
        new_token=extra.get("new_token"),
    )
    response.headers["Cache-Control"] = "private, no-store"  # a new token is on it once
    return response


@router.get("/account/tokens")
def tokens_page(request: Request, user: Staff, done: str = "") -> Response:
    message = {"revoked": "Revoked: the token opens nothing from now on."}.get(done)
    return _page(request, user, message=message)


@router.post("/account/tokens")
def create_token(
    request: Request,
    user: Staff,
    name: Annotated[str, Form()] = "",
    scope: Annotated[str, Form()] = "read",
    days: Annotated[str, Form()] = "",
) -> Response:
    """Make a token and show it once, on the page that answers this form (never stored)."""
    form = {"name": name, "scope": scope, "days": days}
    try:
        count = int(days.strip()) if days.strip().isdigit() else 0
        made = tokens.create_token(database(request), user, user, name, scope, count)
    except ServiceError as exc:
        if isinstance(exc, Invalid):
            errors = {str(e.loc[0]): e.message for e in exc.errors if e.loc}
        else:
            errors = {}
        return _page(
            request,
            user,
            status_code=http_status(exc),
            form=form,
            errors=errors,
            problem=f"No token was made: {exc}.",
        )
    return _page(request, user, new_token=made, message=f"Token {made.token.name!r} made.")


@router.post("/account/tokens/{token_id}/revoke")
def revoke_token(request: Request, token_id: int, user: Staff) -> Response:
    with refusals_as_http():
        tokens.revoke_token(database(request), user, token_id)
    return RedirectResponse("/account/tokens?done=revoked", status_code=303)


# -- the person's own sessions and password -------------------------------------------------------


def _span(seconds: int) -> str:
    """A lifetime in the largest whole unit: "8 hours", "7 days"."""
    for unit, size in (("day", 86400), ("hour", 3600), ("minute", 60)):
        if seconds % size == 0:
            count = seconds // size
            return f"{count} {unit}{'s' if count != 1 else ''}"
    return f"{seconds} seconds"


def _sessions_page(request: Request, user: User, *, status_code: int = 200, **extra: Any) -> Response:
    span = lifetime(request)
    return render(
        request,
        "pages/account_sessions.html",
        status_code=status_code,
        found=sessions.live(database(request), lifetime(request), user.id),
        this=current_session(request),
        idle_hours=_span(span.idle_s),
        max_days=_span(span.max_age_s),
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
        message=extra.get("message"),
    )


@router.get("/account/sessions")
def sessions_page(request: Request, user: Staff, done: str = "") -> Response:
    messages = {
        "password": "Password changed: every other browser signed in as you has been signed out.",
        "ended": "That browser is signed out.",
    }
    return _sessions_page(request, user, message=messages.get(done))


@router.post("/account/sessions/{session_id}/end")
def end_session(request: Request, session_id: IdPath, user: Staff) -> Response:
    """Sign out another browser of one's own (a tablet left at the bench)."""
    sessions.sign_out(database(request), user, session_id)
    return RedirectResponse("/account/sessions?done=ended", status_code=303)


@router.post("/account/sign-out-everywhere")
def sign_out_everywhere(request: Request, user: Staff) -> Response:
    sessions.sign_out_everywhere(database(request), user)
    request.session.clear()
    return RedirectResponse("/signin", status_code=303)


@router.post("/account/password")
def change_password(
    request: Request,
    user: Staff,
    current_password: Annotated[str, Form()] = "",
    new_password: Annotated[str, Form()] = "",
    repeat_password: Annotated[str, Form()] = "",
) -> Response:
    """The person's own new password; the current one is required, the other sessions end."""
    if new_password != repeat_password:
        errors = {"repeat_password": "the two new passwords differ"}
        return _sessions_page(
            request, user, status_code=422, errors=errors, problem="The password is unchanged."
        )
    this = current_session(request)
    try:
        users.change_own_password(
            database(request), user, current_password, new_password, this.id if this else None
        )
    except ServiceError as exc:
        errors = {str(e.loc[0]): e.message for e in exc.errors if e.loc} if isinstance(exc, Invalid) else {}
        return _sessions_page(
            request,
            user,
            status_code=http_status(exc),
            errors=errors,
            problem=f"The password is unchanged: {exc}.",
        )
    return RedirectResponse("/account/sessions?done=password", status_code=303)
