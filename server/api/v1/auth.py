"""Who is calling the JSON API v1: a personal token in ``Authorization: Bearer`` (RFC 6750).

Tokens only: the session cookie of the pages is never read here, so a page open in a browser
cannot be made to call a write route from another site (no CSRF token is needed because no
ambient credential is accepted). The token acts as its user with the user's current role,
and the routes call the same services the pages call, with the same role rules:

- ``Reader``: any valid token (read or write scope);
- ``Writer``: a write-scope token (a read-only one is refused 403 with
  ``error="insufficient_scope"``, RFC 6750 section 3.1);
- ``Registrar``, ``Importer``, ``ClientReader``, ``Reviewer``: also a reviewer or admin, where
  the page is for reviewers and admins only (registration, import, the clients list, the review
  desk); elsewhere the service decides (a technician may enter readings and submit; the review
  service refuses what a role or the segregation of duties does not allow).

Unrecognised tokens count against the caller's address (``Settings.token_throttle_address``,
``server.auth.throttle``): past it, 429 before any token is looked up, so tokens cannot be
guessed. Each token has a rate limit (``Settings.api_rate_limit``, counted with the ``limits`` library
in this process's memory): past it, 429 with ``Retry-After``.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from typing import Annotated

from fastapi import Depends, Request
from fastapi.security import HTTPAuthorizationCredentials, HTTPBearer
from limits import RateLimitItem, parse
from limits.storage import MemoryStorage
from limits.strategies import MovingWindowRateLimiter

from server.api.v1.problems import ApiProblem
from server.auth.sessions import database
from server.auth.throttle import client_address, throttles
from server.db.tables import ApiToken, User
from server.services import tokens
from server.workflow.states import CHECKERS, Role

REALM = 'Bearer realm="claybench"'

bearer = HTTPBearer(
    auto_error=False,
    scheme_name="ApiToken",
    description="A personal API token, made on /account/tokens or with `claybench create-token`.",
)


@dataclass(frozen=True)
class Caller:
    user: User
    token: ApiToken


class RateLimit:
    """Requests per token over a moving window, counted in memory (one process)."""

    def __init__(self, rate: str):
        self.item: RateLimitItem = parse(rate)
        self.limiter = MovingWindowRateLimiter(MemoryStorage())

    def retry_after(self, token_id: int) -> int | None:
        """None when this request is within the limit (and counted), else seconds to wait."""
        key = str(token_id)
        if self.limiter.hit(self.item, "api-token", key):
            return None
        stats = self.limiter.get_window_stats(self.item, "api-token", key)
        return max(1, math.ceil(stats.reset_time - time.time()))


def _rate_limit(request: Request) -> RateLimit:
    limit: RateLimit | None = getattr(request.app.state, "api_rate_limit", None)
    if limit is None:
        limit = RateLimit(request.app.state.settings.api_rate_limit)
        request.app.state.api_rate_limit = limit
    return limit


def caller(
    request: Request, credentials: Annotated[HTTPAuthorizationCredentials | None, Depends(bearer)]
) -> Caller:
    """The token's user, or 401 with the RFC 6750 challenge; then the token's rate limit."""
    if credentials is None:
        # RFC 6750 section 3.1: a request with no credentials gets no error code.
        raise ApiProblem(
            401,
            "send a personal API token: Authorization: Bearer <token>",
            headers={"WWW-Authenticate": REALM},
        )
    address, guesses = client_address(request), throttles(request).token_address
    held = guesses.wait(address)
    if held:
        raise ApiProblem(
            429,
            f"too many unrecognised tokens were sent from this address; retry after {held} s",
            headers={"Retry-After": str(held)},
        )
    try:
        user, token = tokens.authenticate(database(request), credentials.credentials)
    except tokens.TokenRefused as exc:
        if exc.token is not None:
            request.state.api_token = exc.token  # a refused use of a known token is logged too
        else:
            guesses.fail(address)  # only a token that names nothing is a guess
        words = str(exc).replace('"', "'")
        raise ApiProblem(
            401,
            str(exc),
            headers={"WWW-Authenticate": f'{REALM}, error="invalid_token", error_description="{words}"'},
        ) from exc
    request.state.api_token = token
    wait = _rate_limit(request).retry_after(token.id or 0)
    if wait is not None:
        item = _rate_limit(request).item
        raise ApiProblem(
            429,
            f"this token made more than {item.amount} requests per {item.multiples} {item.GRANULARITY.name}; "
            f"retry after {wait} s",
            headers={"Retry-After": str(wait)},
        )
    return Caller(user, token)


Reader = Annotated[Caller, Depends(caller)]


def writer(who: Reader) -> Caller:
    if who.token.scope != "write":
        raise ApiProblem(
            403,
            "this token may only read: make a token with the write scope to change records",
            headers={"WWW-Authenticate": f'{REALM}, error="insufficient_scope", scope="write"'},
        )
    return who


Writer = Annotated[Caller, Depends(writer)]


def _checkers_only(who: Caller, what: str) -> Caller:
    """Reviewers and admins only, as the page for ``what`` (``require_roles("reviewer", "admin")``):
    the same rule, the same 403."""
    if Role(who.user.role) not in CHECKERS:
        raise ApiProblem(403, f"{what} is for reviewer or admin users, as on the pages")
    return who


def _registrar(who: Writer) -> Caller:
    return _checkers_only(who, "registering clients, jobs and samples")


def _importer(who: Writer) -> Caller:
    return _checkers_only(who, "importing a sample schedule")


def _client_reader(who: Reader) -> Caller:
    return _checkers_only(who, "the list of clients")


def _reviewer(who: Writer) -> Caller:
    return _checkers_only(who, "approving or returning a test")


Registrar = Annotated[Caller, Depends(_registrar)]
Importer = Annotated[Caller, Depends(_importer)]
ClientReader = Annotated[Caller, Depends(_client_reader)]
Reviewer = Annotated[Caller, Depends(_reviewer)]
