"""Duplicate checks: two results of the same sample by the same method, against the precision
statement of the method's standard.

A precision statement gives, for results obtained by one operator, the standard deviation (1s)
and the acceptable range of two results (d2s, about 2.8 × 1s): two results that differ by more
are suspect at the 95 % level (ASTM C670, "acceptable range of two results"; from memory).

The values kept here (none found in a public copy at hand, so all marked as recalled):
- ASTM D4318 (the older single-operator precision table, e.g. D4318-00 Table 1), in percentage
  points of water content: liquid limit 1s 0.8, d2s 2.4; plastic limit 1s 0.9, d2s 2.6 (from
  memory; the multilaboratory rows 3.5 / 9.9 and 3.7 / 10.6 of the same table are confirmed in
  Liu & Evett, Soil Properties: Testing, Measurement and Evaluation, Table 8-1). D4318 covers the
  cup, so a fall-cone liquid limit (BS 1377-2 / ISO 17892-12) has no statement here.
- ASTM D2216 (D2216-98 cl. 12), relative to the mean of the two results: single-operator
  coefficient of variation 2.7 %, acceptable range of two results 7.8 % of the mean (from memory).

Results are compared at full precision, as they are stored (DESIGN.md section 3), not as rounded
for the report: rounding two results first can add up to one rounding step to their difference.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal

Verdict = Literal["acceptable", "outside", "no statement"]

CUP_METHODS = ("ll-cup-multipoint", "ll-cup-one-point")


@dataclass(frozen=True)
class PrecisionStatement:
    """What a standard says about the spread of two single-operator results of one result key."""

    standard: str  # where the figures come from, as printed beside a verdict
    one_s: float  # single-operator standard deviation (or coefficient of variation, %)
    d2s: float  # acceptable range of two results (points of water content, or % of their mean)
    relative: bool = False  # True: the figures are % of the mean of the two results


LIQUID_LIMIT = PrecisionStatement("ASTM D4318 single-operator precision (from memory)", 0.8, 2.4)
PLASTIC_LIMIT = PrecisionStatement("ASTM D4318 single-operator precision (from memory)", 0.9, 2.6)
WATER_CONTENT = PrecisionStatement(
    "ASTM D2216 single-operator precision, % of the mean (from memory)", 2.7, 7.8, relative=True
)

STATEMENTS: dict[tuple[str, str], PrecisionStatement] = {
    **{(m, "liquid_limit"): LIQUID_LIMIT for m in CUP_METHODS},
    ("plastic-limit", "plastic_limit"): PLASTIC_LIMIT,
    ("water-content", "water_content"): WATER_CONTENT,
}
"""(method that produced the result, result key) -> its precision statement."""

CHECKED_KEYS = ("liquid_limit", "plastic_limit", "water_content")
"""The result keys a duplicate is checked on, where the method gives them."""


def producing_method(method: str, key: str, readings: Mapping[str, Any] | None) -> str:
    """The method whose procedure produced a result key: a composite Atterberg test determines
    its liquid limit by the method its readings name, its plastic limit and natural water content
    by the plastic-limit and water-content procedures."""
    if method != "atterberg":
        return method
    if key == "liquid_limit":
        inner = (readings or {}).get("liquid_limit")
        return str(inner.get("method", "")) if isinstance(inner, Mapping) else ""
    return {"plastic_limit": "plastic-limit", "water_content": "water-content"}.get(key, "")


def statement_for(
    method: str, key: str, readings: Mapping[str, Any] | None = None
) -> PrecisionStatement | None:
    return STATEMENTS.get((producing_method(method, key, readings), key))


@dataclass(frozen=True)
class DuplicateCheck:
    """Two results of one key, their difference and the range they may differ by."""

    key: str
    first: float
    second: float
    difference: float  # |first - second|
    acceptable_range: float | None  # in the result's own unit; None without a statement
    verdict: Verdict
    standard: str


def check_pair(key: str, first: float, second: float, statement: PrecisionStatement | None) -> DuplicateCheck:
    """Judge two results against a precision statement (a difference equal to d2s is acceptable:
    the statement names the range "not to be exceeded")."""
    if not (math.isfinite(first) and math.isfinite(second)):
        raise ValueError("duplicate results must be finite numbers")
    difference = abs(first - second)
    if statement is None:
        return DuplicateCheck(key, first, second, difference, None, "no statement", "")
    allowed = statement.d2s * (abs(first + second) / 2) / 100 if statement.relative else statement.d2s
    # Decimal noise of the subtraction must not turn an exact boundary into a failure.
    verdict: Verdict = "acceptable" if difference <= allowed + 1e-9 else "outside"
    return DuplicateCheck(key, first, second, difference, allowed, verdict, statement.standard)


def _number(value: object) -> float | None:
    if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
        return None
    return float(value)


def check_results(
    method: str,
    first: Mapping[str, Any],
    second: Mapping[str, Any],
    readings: tuple[Mapping[str, Any] | None, Mapping[str, Any] | None] = (None, None),
) -> list[DuplicateCheck]:
    """Every checked key both results hold as a number (a nonplastic result has no limits).

    ``readings`` are the two tests' readings, which name the procedure of a composite test's
    liquid limit: two liquid limits found by different procedures are not duplicates of one
    procedure, so no statement applies to them."""
    out = []
    for key in CHECKED_KEYS:
        a, b = _number(first.get(key)), _number(second.get(key))
        if a is None or b is None:
            continue
        same = producing_method(method, key, readings[0]) == producing_method(method, key, readings[1])
        out.append(check_pair(key, a, b, statement_for(method, key, readings[0]) if same else None))
    return out
