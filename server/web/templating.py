"""The Jinja2 environment of the pages: autoescaped, with the few filters templates need.

Templates never compute: numbers arrive computed by the engine, and the ``shown`` filter only
applies the engine's own reporting rule for a result key.
"""

from __future__ import annotations

from datetime import date, datetime
from typing import Any

from fastapi import Request
from fastapi.templating import Jinja2Templates
from starlette.responses import Response

from server.auth.sessions import csrf_token, signed_in_user
from server.config import ROOT
from server.engine.readings import as_entered
from server.engine.rounding import reported
from server.workflow.states import NEXT_STEP, Status

templates = Jinja2Templates(directory=str(ROOT / "templates"))

STATUS_MARK = {
    "requested": "○",
    "draft": "✎",
    "submitted": "⧗",
    "returned": "↩",
    "approved": "✔",
    "superseded": "⊘",
    "issued": "✔",
}


def _when(value: datetime | date | None) -> str:
    if value is None:
        return "—"
    if isinstance(value, datetime):
        return value.strftime("%Y-%m-%d %H:%M UTC")
    return value.isoformat()


def _shown(value: Any, key: str) -> str:
    if isinstance(value, bool) or (value is not None and not isinstance(value, int | float)):
        return str(value)
    return reported(key, value)


def _entered(value: Any) -> str:
    """A stored reading as it was entered ("44.20" as typed); a placeholder (an absent value of
    a comparison) as its own text."""
    if value is None or isinstance(value, str | int | float | list | tuple):
        return as_entered(value)
    return str(value)


templates.env.filters["shown"] = _shown
templates.env.filters["entered"] = _entered
templates.env.filters["when"] = _when
templates.env.globals["STATUS_MARK"] = STATUS_MARK
templates.env.globals["next_step"] = lambda status: NEXT_STEP[Status(status)]


def is_htmx(request: Request) -> bool:
    return request.headers.get("hx-request") == "true"


def render(request: Request, name: str, status_code: int = 200, **context: Any) -> Response:
    """Render a page or fragment with the signed-in user and CSRF token available."""
    context.setdefault("user", signed_in_user(request))
    context["csrf_token"] = csrf_token(request)
    return templates.TemplateResponse(request, name, context, status_code=status_code)
