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

import math
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
    if drop_non_finite(out.results):
        r.refuse(
            None,
            "these readings give a result too large to compute: check the masses, their units "
            "and the decimal points",
        )
    flag_implausible(out)
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


# -- what no result may be -----------------------------------------------------------------------

IMPLAUSIBLE_PERCENT = 1000.0
"""A water content or a limit above 1000 % is beyond what soils hold (common practice: even
peats and bentonites seldom pass it); such a result is flagged as an error for the reviewer."""

_IMPLAUSIBLE: tuple[tuple[str, str, str], ...] = (
    ("implausible-water-content", "water content", "water_content"),
    ("implausible-liquid-limit", "liquid limit", "liquid_limit"),
    ("implausible-plastic-limit", "plastic limit", "plastic_limit"),
)


def drop_non_finite(node: Any) -> bool:
    """Replace every non-finite number in results by None, in place; True when one was found.

    Readings are bounded (``readings.MAX_MAGNITUDE``, balance capacities) and divisions guarded,
    so this should never find one; it is the last guard that no result is ever Infinity or NaN
    (which JSON cannot carry and no report can print)."""
    found = False
    items: Any = node.items() if isinstance(node, dict) else enumerate(node) if isinstance(node, list) else ()
    for key, value in list(items):
        if isinstance(value, float) and not math.isfinite(value):
            node[key] = None
            found = True
        elif isinstance(value, dict | list):
            found = drop_non_finite(value) or found
    return found


def _percent(value: Any) -> float | None:
    return float(value) if isinstance(value, int | float) and not isinstance(value, bool) else None


def _row_values(results: Mapping[str, Any], key: str) -> list[float]:
    """A result and the same quantity of every row it came from (each determination, each trial)."""
    values = [_percent(results.get(key))]
    rows = results.get(f"{key}_determinations")
    if isinstance(rows, list):
        values += [_percent(v) for v in rows]
    trials = results.get("liquid_limit_trials")
    if key != "plastic_limit" and isinstance(trials, list):
        values += [_percent(t.get(key)) for t in trials if isinstance(t, Mapping)]
    return [v for v in values if v is not None]


def flag_implausible(out: Outcome) -> None:
    """Flag (severity error) a water content or limit above ``IMPLAUSIBLE_PERCENT``, of the test or
    of any of its rows: the reviewer must see it, and it is handed in only with a recorded reason."""
    for code, what, key in _IMPLAUSIBLE:
        values = _row_values(out.results, key)
        worst = max(values, default=0.0)
        if worst > IMPLAUSIBLE_PERCENT:
            out.flag(
                code,
                "error",
                f"a {what} of {worst:.0f} % is above {IMPLAUSIBLE_PERCENT:.0f} %, more than soils hold: "
                "check the masses and the tin, or say at hand-in why the result stands",
            )
