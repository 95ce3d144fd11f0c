"""The signed-in person's own API tokens: list them with their last uses, make one (shown
once), revoke one. Everyone signed in has this page; each person sees only their own tokens.
Every change goes through ``server.services.tokens`` and is audited there."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Depends, Form, HTTPException, Request
from fastapi.responses import RedirectResponse
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_user
from server.db.tables import User
from server.services import tokens
from server.services.errors import Invalid, ServiceError, http_status
from server.web.templating import render

router = APIRouter(dependencies=[Depends(csrf_protect)], include_in_schema=False)
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
    try:
        tokens.revoke_token(database(request), user, token_id)
    except ServiceError as exc:
        raise HTTPException(http_status(exc), str(exc)) from exc
    return RedirectResponse("/account/tokens?done=revoked", status_code=303)
