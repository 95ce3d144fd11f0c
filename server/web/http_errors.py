"""A page's refusal (404, 403, 409, 405 ...) as a page, not as FastAPI's raw JSON.

Routes raise ``HTTPException`` for "no such job" and the like; FastAPI answers that with a JSON
body, which a person at a browser sees as raw text. Here:

- ``/api/...`` keeps the API's answer (a problem under /api/v1, ``server/api/v1/problems.py``);
- a JSON request (the bench's autosave, its look-ups: ``static/bench.js``) keeps the JSON
  ``{"detail": ...}`` those scripts read;
- an htmx request gets the message as a short fragment;
- any other request gets a page with the status, the message and a way back.
"""

from __future__ import annotations

from http import HTTPStatus

from fastapi import FastAPI, Request
from fastapi.exception_handlers import http_exception_handler
from fastapi.responses import HTMLResponse
from markupsafe import escape
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.responses import Response

from server.api.v1.problems import unmatched
from server.web.templating import is_htmx, render

TITLES = {404: "Not found", 403: "Not allowed", 405: "Not here", 409: "Changed meanwhile", 410: "Gone"}


def wants_json(request: Request) -> bool:
    """The request sends or asks for JSON: a script of ours, which reads a JSON answer."""
    sent = request.headers.get("content-type", "").split(";")[0].strip()
    return sent == "application/json" or request.headers.get("accept", "").startswith("application/json")


async def http_error(request: Request, exc: Exception) -> Response:
    """The answer to an ``HTTPException`` in the form the request expects (module docstring)."""
    assert isinstance(exc, StarletteHTTPException)
    if request.url.path.startswith("/api/"):
        return await unmatched(request, exc)
    if wants_json(request) or exc.status_code < 400:
        return await http_exception_handler(request, exc)
    detail = str(exc.detail) if exc.detail else HTTPStatus(exc.status_code).phrase
    headers = dict(exc.headers or {})
    if is_htmx(request):
        fragment = f'<p class="problem" role="alert">{escape(detail)}</p>'
        return HTMLResponse(fragment, status_code=exc.status_code, headers=headers)
    page = render(
        request,
        "pages/invalid.html",
        status_code=exc.status_code,
        title=TITLES.get(exc.status_code, HTTPStatus(exc.status_code).phrase),
        reason=detail[:1].upper() + detail[1:] + ("" if detail.endswith(".") else "."),
        errors={},
    )
    page.headers.update(headers)
    return page


def install(app: FastAPI) -> None:
    """Answer every ``HTTPException`` through ``http_error`` (after the API's own install, which
    it keeps for /api paths)."""
    app.add_exception_handler(StarletteHTTPException, http_error)
