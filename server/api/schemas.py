"""Request and response bodies of the JSON API (apart from the database tables)."""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field


class CalculationRequest(BaseModel):
    """A method id and its readings, exactly as DESIGN.md section 3 defines them."""

    model_config = ConfigDict(
        json_schema_extra={
            "examples": [
                {
                    "method": "plastic-limit",
                    "readings": {
                        "determinations": [
                            {"container": "T-3", "tare_g": 11.56, "wet_tare_g": 20.47, "dry_tare_g": 18.93},
                            {"container": "T-4", "tare_g": 11.68, "wet_tare_g": 21.27, "dry_tare_g": 19.57},
                        ]
                    },
                }
            ]
        }
    )

    method: str = Field(description="method id, for example water-content, ll-cup-multipoint, atterberg")
    readings: dict[str, Any] = Field(description="raw readings: masses g, lengths mm, depths m")


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
