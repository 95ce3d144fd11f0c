"""Bounded values of the API v1's paths, queries and bodies, refused at parse time (422).

An id beyond what the database's integer column holds (2^31 - 1 on PostgreSQL) would reach the
database and fail there as a server error; a date sent as a number would be read by pydantic as
seconds since 1970. Every id and version is therefore bounded here, and every date or time must
be written as ISO 8601 text, as the OpenAPI document says.
"""

from __future__ import annotations

import re
from datetime import date, datetime
from typing import Annotated, Any

from fastapi import Path
from pydantic import AfterValidator, BeforeValidator, Field, Strict

MAX_ID = 2**31 - 1
"""The largest value of an integer column on PostgreSQL (and so of any id or version here)."""

PathId = Annotated[int, Path(ge=1, le=MAX_ID, description="an id this API gave", examples=[1])]
BodyId = Annotated[int, Field(ge=1, le=MAX_ID)]
Version = Annotated[int, Field(ge=1, le=MAX_ID, description="the version guard, as last read")]

_ISO_DATE = re.compile(r"^\d{4}-\d{2}-\d{2}$")
_ISO_TIME = re.compile(r"^\d{4}-\d{2}-\d{2}([T ]\d{2}:\d{2}(:\d{2}(\.\d{1,6})?)?(Z|[+-]\d{2}:?\d{2})?)?$")


def _text_like(pattern: re.Pattern[str], what: str) -> Any:
    def check(value: Any) -> Any:
        if isinstance(value, date):
            return value
        if not isinstance(value, str) or not pattern.match(value):
            raise ValueError(f"{what} is needed, written as ISO 8601 text")
        return value

    return BeforeValidator(check)


def _year_in_range(value: date) -> date:
    if not 1900 <= value.year <= 2200:
        raise ValueError("a date between the years 1900 and 2200 is needed")
    return value


IsoDate = Annotated[date, _text_like(_ISO_DATE, "a date such as 2026-11-28"), AfterValidator(_year_in_range)]
IsoDateTime = Annotated[
    datetime, _text_like(_ISO_TIME, "a time such as 2026-11-30T00:00:00Z"), AfterValidator(_year_in_range)
]

Measure = Annotated[float, Strict(), Field(allow_inf_nan=False)]
"""A JSON number (not true or false, not text, not NaN or Infinity, which Python's JSON reader
lets through); the service bounds its size with the field's own limits."""
