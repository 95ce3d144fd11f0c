"""Signing in and out."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, Form, Request
from fastapi.responses import RedirectResponse
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, sign_in, sign_out, signed_in_user
from server.auth.throttle import client_address, throttles
from server.services.users import USERNAME_MAX, authenticate, record_refused_sign_in
from server.web.params import PageRoute
from server.web.templating import render

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)


def _safe_next(target: str | None) -> str:
    """Only a path on this site: never an open redirect to another host (no "//", no backslash,
    no control character, which some browsers read as a host separator)."""
    if (
        target
        and target.startswith("/")
        and not target.startswith("//")
        and "\\" not in target
        and all(ch.isprintable() and not ch.isspace() for ch in target)
    ):
        return target
    return "/"


@router.get("/signin")
def signin_page(request: Request, next: str | None = None) -> Response:
    if signed_in_user(request):
        return RedirectResponse(_safe_next(next), status_code=303)
    return render(request, "pages/signin.html", next=_safe_next(next), error=None)


@router.post("/signin")
def signin(
    request: Request,
    username: Annotated[str, Form()],
    password: Annotated[str, Form()],
    next: Annotated[str, Form()] = "/",
) -> Response:
    """Check the password unless the account or the address is waiting out its failures.

    The throttle keys on the name as typed, whether or not such a user exists, and a refusal
    reads the same for every cause, so neither the answer nor its timing tells which names
    exist. Every refusal is written to the audit trail for the admins."""
    db, address = database(request), client_address(request)
    account = username.strip().lower()[: USERNAME_MAX + 1]
    found = throttles(request)
    wait = max(found.signin_account.wait(account), found.signin_address.wait(address))
    if wait:
        record_refused_sign_in(db, username, address, "throttled")
        response = render(
            request,
            "pages/signin.html",
            status_code=429,
            next=_safe_next(next),
            error=f"Too many failed sign-ins: try again in {_duration(wait)}.",
        )
        response.headers["Retry-After"] = str(wait)
        return response
    user = authenticate(db, username, password)
    if user is None:
        found.signin_account.fail(account)
        found.signin_address.fail(address)
        record_refused_sign_in(db, username, address, "refused")
        return render(
            request,
            "pages/signin.html",
            status_code=400,
            next=_safe_next(next),
            error="Username or password not recognised, or the account is not active.",
        )
    sign_in(request, user)
    return RedirectResponse(_safe_next(next), status_code=303)


def _duration(seconds: int) -> str:
    return f"{seconds} seconds" if seconds < 120 else f"{-(-seconds // 60)} minutes"


@router.post("/signout")
def signout(request: Request) -> Response:
    sign_out(request)
    return RedirectResponse("/signin", status_code=303)
