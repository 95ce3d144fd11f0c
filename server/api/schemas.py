"""Request and response bodies of the JSON API (apart from the database tables)."""

from __future__ import annotations

from typing import Any, Literal, Union

from pydantic import BaseModel, ConfigDict, Field, TypeAdapter

from server.services import readings_shape

REF = "#/components/schemas/"


def _one_shape_per_method(schema: dict[str, Any]) -> None:
    schema.clear()
    schema.update(calculation_body())


class CalculationRequest(BaseModel):
    """A method id and its readings, exactly as DESIGN.md section 3 defines them.

    The request is read as any method id and any JSON object (the engine and ``readings_shape``
    refuse what is wrong, field by field); its OpenAPI schema is the exact one, a shape a method.
    """

    model_config = ConfigDict(extra="forbid", json_schema_extra=_one_shape_per_method)

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


def readings_components() -> dict[str, Any]:
    """The OpenAPI component schemas of every method's readings (``readings_shape``), by name."""
    every: Any = Union[tuple(readings_shape.MODELS.values())]  # noqa: UP007
    found = TypeAdapter(every).json_schema(ref_template=REF + "{model}")
    return dict(found["$defs"])


def _ref(model: type[BaseModel]) -> dict[str, str]:
    return {"$ref": REF + model.__name__}


def calculation_body() -> dict[str, Any]:
    """The calculation request's schema: one shape per method, told apart by ``method``, so the
    readings a request may carry are exactly the method's (DESIGN.md section 3)."""
    shapes = {
        method: {
            "type": "object",
            "required": ["method", "readings"],
            "properties": {"method": {"type": "string", "const": method}, "readings": _ref(model)},
            "additionalProperties": False,
        }
        for method, model in readings_shape.MODELS.items()
    }
    return {
        "oneOf": list(shapes.values()),
        "description": "a method id and its readings (DESIGN.md section 3)",
    }


READINGS_OF_ANY_METHOD: dict[str, Any] = {
    "anyOf": [_ref(model) for model in dict.fromkeys(readings_shape.MODELS.values())],
    "description": "the readings of the test's method (each method's shape is one of these)",
}
