"""The stateless calculation contract (API and CLI): readings in, results or refusals out."""

from __future__ import annotations

from typing import Any

from server.engine import METHODS, InputError
from server.engine import calculate as engine_calculate
from server.services import readings_shape
from server.services.errors import Invalid


def calculate(method: str, readings: Any) -> dict[str, Any]:
    """The response body of the contract, or ``Invalid`` with every field-level refusal: the
    engine's, and every key that is not a reading of the method (``readings_shape``)."""
    shape = readings_shape.refusals(method, readings)
    try:
        out = engine_calculate(method, readings).to_dict()
    except InputError as exc:
        raise Invalid(readings_shape.together(exc.errors, shape)) from exc
    if shape:
        raise Invalid(shape)
    return out


def methods() -> list[dict[str, str]]:
    return [
        {"id": m.id, "title": m.title, "standard": m.standard}
        for m in sorted(METHODS.values(), key=lambda m: m.id)
    ]
