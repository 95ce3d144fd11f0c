"""The answer to a change that did not get its turn on the database (``DatabaseBusy``): 503.

On SQLite one writer goes at a time; a write that waited its whole budget for its turn is given
up, with nothing stored (``server/db/session.py``). The person is told so, calmly, with
``Retry-After`` (RFC 9110 section 15.6.4: 503 is the server's "temporarily unable, try again"),
in the form the request expects:

- ``/api/...``: a problem (``application/problem+json``, RFC 9457), as every API refusal is;
- a JSON request (the bench page's autosave, which keeps the values and sends them again after
  Retry-After, ``static/bench.js``): ``{"detail", "busy", "retry_after_s"}``;
- an htmx request: a short message fragment;
- any other page: a short page that says nothing was stored and how to send it again.

Nothing here reads the database, which is busy: the page is shown without the signed-in
person's menu rather than risk a second wait (finding the person may write, to note that the
session was seen).
"""

from __future__ import annotations

from http import HTTPStatus

from fastapi import FastAPI, Request
from fastapi.responses import HTMLResponse, JSONResponse
from starlette.responses import Response

from server.auth.sessions import csrf_token
from server.db.session import DatabaseBusy
from server.web.http_errors import wants_json
from server.web.templating import is_htmx, templates

STATUS = HTTPStatus.SERVICE_UNAVAILABLE
PROBLEM = "application/problem+json"

_FRAGMENT = templates.env.from_string(
    '<p class="notice" role="status">⧗ The laboratory\'s database is busy with other changes; '
    "nothing was stored. Try again in {{ wait }} s.</p>"
)
_PAGE = templates.env.from_string(
    """{% extends "base.html" %}
{% block title %}Busy, try again{% endblock %}
{% block main %}
<h1>Busy, try again</h1>
<p class="notice" role="status">⧗ The laboratory's database is busy with other changes, so this
was not stored. Nothing is lost: {% if again %}<a href="{{ again }}">try again</a>{% else %}go
back and send it again{% endif %} in {{ wait }} s.</p>
{% endblock %}"""
)


def busy(request: Request, exc: Exception) -> Response:
    """503 with Retry-After, as a problem, JSON, a fragment or a page (module docstring)."""
    assert isinstance(exc, DatabaseBusy)
    wait = exc.retry_after_s
    headers = {"Retry-After": str(wait)}
    if request.url.path.startswith("/api/"):
        body = {
            "type": "about:blank",
            "title": STATUS.phrase,
            "status": STATUS.value,
            "detail": str(exc),
            "instance": request.url.path,
        }
        return JSONResponse(body, status_code=STATUS, headers=headers, media_type=PROBLEM)
    if wants_json(request):
        body = {"detail": str(exc), "busy": True, "retry_after_s": wait}
        return JSONResponse(body, status_code=STATUS, headers=headers)
    if is_htmx(request):
        return HTMLResponse(_FRAGMENT.render(wait=wait), status_code=STATUS, headers=headers)
    again = str(request.url.path) + (f"?{request.url.query}" if request.url.query else "")
    html = _PAGE.render(
        user=None,
        csrf_token=csrf_token(request),
        wait=wait,
        again=again if request.method in ("GET", "HEAD") else "",
    )
    return HTMLResponse(html, status_code=STATUS, headers=headers)


def install(app: FastAPI) -> None:
    """Answer ``DatabaseBusy`` from any route or dependency with 503 and Retry-After."""
    app.add_exception_handler(DatabaseBusy, busy)
