"""The calculation contract: what goes into the engine and what comes out.

Every method takes plain JSON readings (DESIGN.md section 3) and gives back results (full
precision, by the agreed result keys), quality flags and field-level refusals. The same
contract serves the bench pages, the JSON API, the CLI, CSV import and reports, so a method is
written once and registered here by name.

Refusals are collected rather than raised one at a time: a technician typing at the bench
needs every bad field named at once, and the parts of a test that are valid (each water
content, say) are still computed while another part is incomplete.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from datetime import date
from typing import Any, Literal

from server.engine.equipment import check_equipment
from server.engine.readings import FieldError, Readings

Severity = Literal["warning", "error"]


@dataclass(frozen=True)
class Flag:
    """A quality remark a reviewer must see; computed, never typed in."""

    code: str
    severity: Severity
    message: str

    def to_dict(self) -> dict[str, str]:
        return {"code": self.code, "severity": self.severity, "message": self.message}


@dataclass
class Evaluation:
    """What a method made of some readings: results, flags, and refusals (if any).

    ``results`` holds only what could be computed; when ``errors`` is not empty the
    results are partial and must not be stored as the outcome of the test.
    """

    method: str
    results: dict[str, Any] = field(default_factory=dict)
    flags: list[Flag] = field(default_factory=list)
    errors: list[FieldError] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.errors

    def to_dict(self) -> dict[str, Any]:
        """The response body of the calculation contract."""
        return {
            "method": self.method,
            "results": self.results,
            "flags": [f.to_dict() for f in self.flags],
        }


class InputError(ValueError):
    """Readings refused: carries every field-level error found."""

    def __init__(self, errors: list[FieldError]):
        self.errors = errors
        super().__init__("; ".join(e.message for e in errors))

    def to_list(self) -> list[dict[str, Any]]:
        return [e.to_dict() for e in self.errors]


@dataclass
class Outcome:
    """What a method function hands back: results and flags it found."""

    results: dict[str, Any] = field(default_factory=dict)
    flags: list[Flag] = field(default_factory=list)
    tested_on: date | None = None  # the test date of the whole set, for parts to inherit

    def flag(self, code: str, severity: Severity, message: str) -> None:
        self.flags.append(Flag(code, severity, message))


MethodFn = Callable[[Readings, Outcome], None]


@dataclass(frozen=True)
class Method:
    """A registered test method: its id, a human title, and the function that computes it."""

    id: str
    title: str
    standard: str
    fn: MethodFn


METHODS: dict[str, Method] = {}


def method(method_id: str, *, title: str, standard: str) -> Callable[[MethodFn], MethodFn]:
    """Register a method function under its contract id (for example ``water-content``)."""

    def register(fn: MethodFn) -> MethodFn:
        if method_id in METHODS:
            raise RuntimeError(f"method {method_id!r} registered twice")
        METHODS[method_id] = Method(method_id, title, standard, fn)
        return fn

    return register


def evaluate(method_id: str, readings: Mapping[str, Any] | Any) -> Evaluation:
    """Compute what can be computed from readings; never raises for bad input."""
    ev = Evaluation(method=method_id)
    found = METHODS.get(method_id)
    if found is None:
        known = ", ".join(sorted(METHODS))
        ev.errors.append(FieldError(("method",), f"unknown method {method_id!r}; known: {known}"))
        return ev
    if not isinstance(readings, Mapping):
        ev.errors.append(FieldError(("readings",), "readings must be a JSON object"))
        return ev
    r = Readings(readings, loc=("readings",))
    out = Outcome()
    out.tested_on = check_equipment(r, out)
    found.fn(r, out)
    ev.results = out.results
    ev.flags = out.flags
    ev.errors = r.errors
    return ev


def calculate(method_id: str, readings: Mapping[str, Any] | Any) -> Evaluation:
    """Compute a method's results, refusing the readings if any field is bad."""
    ev = evaluate(method_id, readings)
    if ev.errors:
        raise InputError(ev.errors)
    return ev
