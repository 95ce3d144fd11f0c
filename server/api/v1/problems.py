"""One error format for the JSON API v1: ``application/problem+json`` (RFC 9457).

Every refusal is a problem object: ``type`` "about:blank" (RFC 9457 section 4.2.1: the status
code says it all, so ``title`` is the status's own phrase), ``status``, ``detail`` in plain
words and ``instance`` the path asked for. A refusal of fields (422) lists them in ``errors``,
each ``{"loc", "msg", "type"}`` as the calculation API and FastAPI name them; an import's
refused cells carry the contract's keys beside those (``row`` and ``column``, or ``group``,
``line`` and ``heading``: DESIGN.md section 7).

The routes of the v1 routers use ``ProblemRoute``, which turns whatever a route or one of its
dependencies raises (a service's refusal, a request that does not validate, an
``HTTPException``) into a problem, and then logs the use of the API token that made the
request with the status it got.
"""

from __future__ import annotations

from collections.abc import Callable, Coroutine
from http import HTTPStatus
from typing import Any

from fastapi import Request
from fastapi.exception_handlers import http_exception_handler
from fastapi.exceptions import RequestValidationError
from fastapi.routing import APIRoute
from pydantic import BaseModel, ConfigDict, Field
from starlette.concurrency import run_in_threadpool
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.responses import JSONResponse, Response
from starlette.routing import Match

from server.auth.sessions import database
from server.services import tokens
from server.services.bench import FieldConflicts
from server.services.errors import Invalid, ServiceError, http_status
from server.services.imports import ImportRefused

MEDIA_TYPE = "application/problem+json"


class ProblemError(BaseModel):
    """One refused field (or, for an import, one refused cell of the file)."""

    model_config = ConfigDict(
        extra="allow",
        json_schema_extra={
            "examples": [
                {"loc": ["body", "depth_from_m"], "msg": "depth top is required", "type": "invalid"},
                {
                    "loc": ["file", 3, "depth_to_m"],
                    "msg": "depth base 1.2 m is above depth top 1.5 m",
                    "type": "invalid",
                    "row": 3,
                    "column": "depth_to_m",
                    "message": "depth base 1.2 m is above depth top 1.5 m",
                },
            ]
        },
    )

    loc: list[str | int] = Field(description="where: a JSON path into the request (or the file)")
    msg: str = Field(description="why, in plain words")
    type: str = Field(description='"invalid" (a wrong value), "missing", or the validator\'s own code')


class Problem(BaseModel):
    """A problem detail (RFC 9457); ``errors`` only for a refusal of fields."""

    model_config = ConfigDict(
        extra="allow",
        json_schema_extra={
            "examples": [
                {
                    "type": "about:blank",
                    "title": "Conflict",
                    "status": 409,
                    "detail": "this test was changed by someone else meanwhile; reload to see their change",
                    "instance": "/api/v1/tests/12/readings",
                }
            ]
        },
    )

    type: str = "about:blank"
    title: str
    status: int
    detail: str
    instance: str | None = None
    errors: list[ProblemError] | None = None


class ApiProblem(Exception):
    """Raised by a route or dependency to answer with a problem."""

    def __init__(
        self,
        status: int,
        detail: str,
        *,
        errors: list[dict[str, Any]] | None = None,
        headers: dict[str, str] | None = None,
        **extra: Any,
    ):
        self.status = status
        self.detail = detail
        self.errors = errors
        self.headers = headers or {}
        self.extra = extra
        super().__init__(detail)

    def response(self, request: Request) -> JSONResponse:
        body: dict[str, Any] = {
            "type": "about:blank",
            "title": HTTPStatus(self.status).phrase,
            "status": self.status,
            "detail": self.detail,
            "instance": request.url.path,
            **self.extra,
        }
        if self.errors is not None:
            body["errors"] = self.errors
        return JSONResponse(body, status_code=self.status, headers=self.headers, media_type=MEDIA_TYPE)


def field_error(loc: list[str | int], msg: str, kind: str = "invalid") -> dict[str, Any]:
    return {"loc": loc, "msg": msg, "type": kind}


def _validation_errors(exc: RequestValidationError) -> list[dict[str, Any]]:
    """FastAPI's errors without the refused input echoed back (it may be a whole upload)."""
    return [
        field_error(list(e.get("loc", ())), str(e.get("msg", "")), str(e.get("type", "")))
        for e in exc.errors()
    ]


def _cell(error: Any) -> dict[str, Any]:
    where = error.origin
    loc: list[str | int] = ["file"]
    if where.group is not None:
        loc += [where.group, *([where.line] if where.line else [])]
    elif where.row is not None:
        loc.append(where.row)
    if error.column:
        loc.append(error.column)
    return {**field_error(loc, error.message), **error.to_dict()}


def problem_of(exc: Exception, *, writing: bool = True) -> ApiProblem | None:
    """The problem that answers this exception, or None for one that is a bug (a 500). A
    refusal of fields says that nothing was stored when the request was ``writing``."""
    if isinstance(exc, ApiProblem):
        return exc
    if isinstance(exc, RequestValidationError):
        return ApiProblem(422, "the request does not validate; see errors", errors=_validation_errors(exc))
    if isinstance(exc, ImportRefused):
        return ApiProblem(422, str(exc), errors=[_cell(e) for e in exc.errors])
    if isinstance(exc, FieldConflicts):
        conflicts = [{"path": c.path, "theirs": c.theirs, "yours": c.yours} for c in exc.conflicts]
        return ApiProblem(409, str(exc), conflicts=conflicts)
    if isinstance(exc, Invalid):
        errors = [e.to_dict() for e in exc.errors]
        lead = "nothing was stored: " if writing else "refused: "
        return ApiProblem(422, lead + "; ".join(e.message for e in exc.errors), errors=errors)
    if isinstance(exc, ServiceError):
        return ApiProblem(http_status(exc), str(exc))
    if isinstance(exc, StarletteHTTPException):
        detail = exc.detail if isinstance(exc.detail, str) else HTTPStatus(exc.status_code).phrase
        return ApiProblem(exc.status_code, detail, headers=dict(exc.headers or {}))
    return None


class ProblemRoute(APIRoute):
    """A route whose every refusal is a problem, and whose every use of a token is logged."""

    def get_route_handler(self) -> Callable[[Request], Coroutine[Any, Any, Response]]:
        handler = super().get_route_handler()

        async def answer(request: Request) -> Response:
            try:
                response = await handler(request)
            except Exception as exc:
                problem = problem_of(exc, writing=request.method not in ("GET", "HEAD"))
                if problem is None:
                    raise
                response = problem.response(request)
            token = getattr(request.state, "api_token", None)
            if token is not None:
                await run_in_threadpool(
                    tokens.record_use,
                    database(request),
                    token,
                    request.method,
                    request.url.path,
                    response.status_code,
                )
            return response

        return answer


def _methods_at(request: Request) -> list[str]:
    """Every method some route serves at this path (RFC 9110 section 15.5.6): Starlette names
    only the methods of the first route that matched the path, and GET and POST of a list are
    two routes, so each method is tried against the whole route table."""
    return [
        method
        for method in ("GET", "POST", "PUT", "PATCH", "DELETE")
        if any(
            route.matches({**request.scope, "method": method})[0] == Match.FULL
            for route in request.app.router.routes
        )
    ]


async def unmatched(request: Request, exc: Exception) -> Response:
    """A path or method under /api/v1 that no route serves (404, 405) as a problem too; any
    other path keeps FastAPI's own answer."""
    assert isinstance(exc, StarletteHTTPException)
    if request.url.path.startswith("/api/v1/"):
        problem = problem_of(exc)
        assert problem is not None
        if exc.status_code == 405:
            problem.headers["Allow"] = ", ".join(_methods_at(request))
        return problem.response(request)
    return await http_exception_handler(request, exc)


_EXAMPLES: dict[int, dict[str, Any]] = {
    400: {"detail": "There was an error parsing the body", "instance": "/api/v1/jobs"},
    401: {
        "detail": "send a personal API token: Authorization: Bearer <token>",
        "instance": "/api/v1/jobs",
    },
    403: {
        "detail": "registering clients, jobs and samples is for reviewer or admin users",
        "instance": "/api/v1/jobs",
    },
    404: {"detail": "job 999 does not exist", "instance": "/api/v1/jobs/999"},
    409: {
        "detail": "this test was changed by someone else meanwhile; reload to see their change",
        "instance": "/api/v1/tests/12/readings",
    },
    422: {
        "detail": "nothing was stored: depth top is required",
        "instance": "/api/v1/jobs/3/samples",
        "errors": [{"loc": ["depth_from_m"], "msg": "depth top is required", "type": "invalid"}],
    },
    429: {
        "detail": "this token made more than 600 requests per 1 minute; retry after 12 s",
        "instance": "/api/v1/jobs",
    },
}
_WHY = {
    400: "the body is not JSON (or, for an upload, not multipart form data) at all",
    401: "no token, or a token unknown, expired or revoked (RFC 6750: WWW-Authenticate says which)",
    403: "a read-only token on a write, or the role (or the service's own rule) refuses it",
    404: "no such record",
    409: "the record changed meanwhile (version guard), or its status does not allow this",
    422: "refused fields, each in errors; nothing was stored",
    429: "too many requests for this token; Retry-After says when to try again",
}
_HEADERS: dict[int, dict[str, Any]] = {
    401: {"WWW-Authenticate": {"schema": {"type": "string"}, "description": "RFC 6750 section 3"}},
    429: {"Retry-After": {"schema": {"type": "integer"}, "description": "seconds (RFC 9110 section 10.2.3)"}},
}


def problems(*statuses: int) -> dict[int | str, dict[str, Any]]:
    """The OpenAPI description of these error answers, each with its example."""
    out: dict[int | str, dict[str, Any]] = {}
    for status in statuses:
        example = {
            "type": "about:blank",
            "title": HTTPStatus(status).phrase,
            "status": status,
            **_EXAMPLES[status],
        }
        entry: dict[str, Any] = {
            "description": _WHY[status],
            "content": {MEDIA_TYPE: {"schema": {"$ref": "#/components/schemas/Problem"}, "example": example}},
        }
        if status in _HEADERS:
            entry["headers"] = _HEADERS[status]
        out[status] = entry
    return out
