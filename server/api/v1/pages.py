"""Cursor pagination for every list of the API v1: ``{"items": [...], "next": cursor-or-null}``.

Lists are walked in id order and a cursor is the base64url of the last id a page held: the
next page starts after it, so a walk sees every record exactly once, even while records are
added meanwhile (a new one has a higher id and comes at the end). The cursor is opaque to
clients: its form may change, its meaning will not.
"""

from __future__ import annotations

import base64
import binascii
from collections.abc import Callable, Sequence
from typing import Annotated, TypeVar

from fastapi import Query

from server.api.v1.problems import ApiProblem, field_error

MAX_LIMIT = 200
DEFAULT_LIMIT = 50

Cursor = Annotated[
    str | None,
    Query(description="the `next` of the previous page; absent for the first page", examples=["NDI"]),
]
Limit = Annotated[
    int,
    Query(ge=1, description=f"items per page; more than {MAX_LIMIT} is read as {MAX_LIMIT}", examples=[50]),
]

T = TypeVar("T")


def encode(last_id: int) -> str:
    return base64.urlsafe_b64encode(str(last_id).encode()).decode().rstrip("=")


def decode(cursor: str | None) -> int | None:
    """The id a cursor stands for; a cursor this API did not give is refused (422)."""
    if cursor is None or cursor == "":
        return None
    try:
        text = base64.urlsafe_b64decode(cursor + "=" * (-len(cursor) % 4)).decode("ascii")
    except (binascii.Error, UnicodeDecodeError, ValueError):
        text = ""
    if not text.isdigit() or len(text) > 18:
        raise ApiProblem(
            422,
            "the cursor is not one this API gave: start again without it",
            errors=[field_error(["query", "cursor"], "not a cursor of this list")],
        )
    return int(text)


def capped(limit: int) -> int:
    return min(limit, MAX_LIMIT)


def page(rows: Sequence[T], limit: int, id_of: Callable[[T], int]) -> tuple[list[T], str | None]:
    """The page from ``rows`` fetched with one row more than ``limit``: the items, and the
    cursor of the next page when that extra row showed there is one."""
    items = list(rows[:limit])
    more = len(rows) > limit
    return items, (encode(id_of(items[-1])) if more and items else None)
