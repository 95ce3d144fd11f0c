"""Bounded integers of the pages' paths and queries, and the page that refuses the others.

An id beyond what the database's integer column holds (2^31 - 1 on PostgreSQL, 2^63 - 1 on
SQLite) would reach the database and fail there as a server error, so every id and count a
page reads is bounded at parse time, as the API v1 bounds its own (server/api/v1/params.py).
A page route of a router built with ``route_class=PageRoute`` answers a path that does not
validate with a 404 page, and a query or form value that does not validate with a 422 page,
each refused value named at its field; a JSON body (the bench's own scripts) keeps FastAPI's
JSON answer, which those scripts read.
"""

from __future__ import annotations

from collections.abc import Callable, Coroutine
from typing import Annotated, Any, NoReturn

from fastapi import Form, Path, Query, Request
from fastapi.exceptions import RequestValidationError
from fastapi.routing import APIRoute
from pydantic import Field
from starlette.responses import Response

from server.web.templating import render

MAX_ID = 2**31 - 1
"""The largest value of an integer column on PostgreSQL (and so of any id or count here)."""

IdPath = Annotated[int, Path(ge=1, le=MAX_ID)]
"""A record's id in a page's path."""
IdQuery = Annotated[int, Query(ge=1, le=MAX_ID)]
"""A record's id in a page's query (a plain form's select, ``?job_id=3``)."""
OptionalIdQuery = Annotated[int | None, Query(ge=1, le=MAX_ID)]
IdsQuery = Annotated[list[Annotated[int, Field(ge=1, le=MAX_ID)]] | None, Query()]
"""Ids repeated in a page's query (``?sample=4&sample=9``)."""
FormVersion = Annotated[int, Form(ge=1, le=MAX_ID)]
"""A record's version as a form sends it back (the version guard)."""
Count = Annotated[int, Query(ge=0, le=MAX_ID)]
"""A count or a flag in a page's query (``?saved=1``, ``?offset=50``)."""


def refuse_query(name: str, message: str) -> NoReturn:
    """Refuse one query value as parsing would, so that the page answers 422 at that field."""
    raise RequestValidationError([{"loc": ("query", name), "msg": message, "type": "value_error"}])


def lenient_number(
    name: str, raw: str | None, high: int = MAX_ID, *, low: int = 1, what: str = "an id"
) -> int | None:
    """A number of a filter that reads leniently (a word narrows nothing: None), but refuses
    plain digits out of bounds, which are a mistake worth saying rather than a silent "all"."""
    text = (raw or "").strip()
    if not text.lstrip("-").isdigit():
        return None
    if len(text) > len(str(high)) + 1 or not low <= int(text) <= high:
        refuse_query(name, f"{name} must be {what} from {low} to {high}, not {text[:20]}")
    return int(text)


def _field(loc: tuple[Any, ...]) -> tuple[str, str]:
    """Where an error is (path, query, body) and the name of the field it concerns."""
    where = str(loc[0]) if loc else ""
    rest = [str(p) for p in loc[1:]]
    if where == "query":
        rest = rest[:1]  # a repeated parameter (?sample=1&sample=2) is one field
    return where, ".".join(rest) or where


def invalid_page(request: Request, exc: RequestValidationError) -> Response:
    """The page for a request whose path (404) or query or form (422) did not validate."""
    errors: dict[str, str] = {}
    wheres: set[str] = set()
    for error in exc.errors():
        where, name = _field(tuple(error.get("loc", ())))
        wheres.add(where)
        errors.setdefault(name, str(error.get("msg", "")))
    if "path" in wheres:
        return render(
            request,
            "pages/invalid.html",
            status_code=404,
            title="Not found",
            reason=f"There is no such page: an id is a whole number from 1 to {MAX_ID}.",
            errors=errors,
        )
    return render(
        request,
        "pages/invalid.html",
        status_code=422,
        title="Refused",
        reason="Nothing was done: a value sent is not one this page takes.",
        errors=errors,
    )


class PageRoute(APIRoute):
    """A page route whose refused path, query or form values answer an HTML page."""

    def get_route_handler(self) -> Callable[[Request], Coroutine[Any, Any, Response]]:
        handler = super().get_route_handler()

        async def answer(request: Request) -> Response:
            try:
                return await handler(request)
            except RequestValidationError as exc:
                if request.headers.get("content-type", "").startswith("application/json"):
                    raise
                return invalid_page(request, exc)

        return answer
