"""The Jinja2 environment of the pages: autoescaped, with the few filters templates need.

Templates never compute: numbers arrive computed by the engine, and the filters only format
them (``shown`` applies the engine's own reporting rule for a result key, ``with_u`` adds the
expanded uncertainty) or name an id (``method_name``, ``flag_name``, ``state_name``,
``event_name``), through the modules the PDF uses too.
"""

from __future__ import annotations

from typing import Any

from fastapi import Request
from fastapi.templating import Jinja2Templates
from starlette.responses import Response

from server.auth.sessions import csrf_token, signed_in_user
from server.config import ROOT
from server.reports import formatting, names
from server.workflow.states import NEXT_STEP, Status

templates = Jinja2Templates(directory=str(ROOT / "templates"))
# Set before any template compiles: a negative number printed with a real minus sign, as in the PDF.
templates.env.finalize = formatting.people

STATUS_MARK = names.STATE_MARK  # the symbol drawn beside each state's name


def _with_u(value: Any, key: str, u: Any, k: Any = None) -> str:
    """``{{ value|with_u("water_content", U, k) }}``: "34.6 ± 1.2 (k = 2)" (GUM 7.2.6)."""
    return str(formatting.with_u(key, value, u, k))


def _plural(n: int, singular: str, plural_form: str | None = None) -> str:
    """``{{ n|plural("day") }}``: "1 day", "4 days"."""
    return names.plural(n, singular, plural_form)


# Every value a page shows for people is formatted in server/reports/formatting.py and named
# in server/reports/names.py, the same as in the PDF.
templates.env.filters |= {
    "shown": formatting.shown,
    "entered": formatting.entered,
    "when": formatting.when,
    "with_u": _with_u,
    "plural": _plural,
    "method_name": names.method_name,
    "flag_name": names.flag_name,
    "state_name": names.state_name,
    "state_mark": names.state_mark,
    "severity_name": names.severity_name,
    "severity_mark": names.severity_mark,
    "event_name": names.event_name,
    "role_name": names.role_name,
    "with_article": names.with_article,
    "typeset": formatting.typeset,
}
templates.env.globals["STATUS_MARK"] = STATUS_MARK
templates.env.globals["next_step"] = lambda status: NEXT_STEP[Status(status)]


def is_htmx(request: Request) -> bool:
    return request.headers.get("hx-request") == "true"


def render(request: Request, name: str, status_code: int = 200, **context: Any) -> Response:
    """Render a page or fragment with the signed-in user and CSRF token available."""
    context.setdefault("user", signed_in_user(request))
    context["csrf_token"] = csrf_token(request)
    return templates.TemplateResponse(request, name, context, status_code=status_code)
