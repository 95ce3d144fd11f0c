"""The stateless calculation contract (API and CLI): readings in, results or refusals out."""

from __future__ import annotations

from typing import Any

from server.engine import METHODS, InputError
from server.engine import calculate as engine_calculate
from server.services.errors import Invalid


def calculate(method: str, readings: Any) -> dict[str, Any]:
    """The response body of the contract, or ``Invalid`` with every field-level refusal."""
    try:
        return engine_calculate(method, readings).to_dict()
    except InputError as exc:
        raise Invalid(exc.errors) from exc


def methods() -> list[dict[str, str]]:
    return [
        {"id": m.id, "title": m.title, "standard": m.standard}
        for m in sorted(METHODS.values(), key=lambda m: m.id)
    ]
