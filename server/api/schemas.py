"""Request and response bodies of the JSON API (apart from the database tables)."""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, Field


class CalculationRequest(BaseModel):
    """A method id and its readings, exactly as DESIGN.md section 3 defines them."""

    method: str = Field(description="method id, for example water-content, ll-cup-multipoint, atterberg")
    readings: dict[str, Any] = Field(
        description=(
            "raw readings: masses g, lengths mm, depths m; each number a JSON number or a decimal "
            'string ("44.20": a string keeps its trailing zeros in the record)'
        )
    )


class FlagOut(BaseModel):
    code: str
    severity: Literal["warning", "error"]
    message: str


class CalculationResponse(BaseModel):
    method: str
    results: dict[str, Any] = Field(description="full-precision results by the agreed result keys")
    flags: list[FlagOut]


class FieldErrorOut(BaseModel):
    loc: list[str | int]
    msg: str
    type: str


class ErrorResponse(BaseModel):
    detail: list[FieldErrorOut]


class MethodOut(BaseModel):
    id: str
    title: str
    standard: str
