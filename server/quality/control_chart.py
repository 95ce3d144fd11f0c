"""Control charts of a reference soil's results: limits from its own history, and run rules.

A chart of individual results with limits from their sample standard deviation (n − 1), as
testing laboratories draw it for a reference material (the Levey–Jennings form, Levey & Jennings
1950, from memory): the centre line is the mean of the soil's earlier results, the warning
limits mean ± 2σ and the action limits mean ± 3σ. ISO 7870-2's individuals chart would estimate
σ from the mean moving range instead (from memory); the sample standard deviation is used here
because reference-soil results arrive irregularly, days or weeks apart, where a moving range
says little about the method's spread.

Decisions, and why:
- **A point is judged against its history.** Each point's limits come from the points before it,
  never from itself or later points: a result is judged the day it is handed in, with what was
  known then, and a judgement once shown does not change when later results arrive.
- **Points beyond the action limits are left out of later histories.** Such a point calls for an
  investigation (ISO/IEC 17025:2017 cl. 7.7.3: data found outside criteria are acted on); letting
  it into the history would widen the limits that should have caught the next one (common
  practice).
- **No limits before MIN_HISTORY points.** With fewer than 10 earlier results, σ is too uncertain
  to draw limits from (common practice for provisional limits; ISO 7870-2 asks for 20 to 25
  subgroups before limits count as established, from memory). Such points are plotted but not
  judged.

Run rules (Western Electric, Statistical Quality Control Handbook, 1956; the same tests are
Nelson's rules 1, 5, 6 and, with nine points, 2 — Nelson, J. Quality Technology 16(4), 1984):
1. one point beyond 3σ (error: the action limit);
2. 2 of 3 consecutive points beyond 2σ on the same side;
3. 4 of 5 consecutive points beyond 1σ on the same side;
4. 8 consecutive points on the same side of the mean (the Western Electric handbook's run of
   eight, as in R's qcc ``qccRules`` rule 4 and MATLAB's ``controlrules`` we4; Nelson uses nine).
A rule fires at the point that completes its pattern, and only when that point is itself one of
the points beyond the line: a point inside the lines does not inherit an earlier pattern. Each
point's z is taken against its own limits. "Beyond" is strict: a point exactly on a line is not.
In the k-of-m rules a point without limits counts as not beyond; a run must be all judged points.
"""

from __future__ import annotations

import math
import statistics
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Literal

MIN_HISTORY = 10
RUN_LENGTH = 8

Zone = Literal["no limits", "in control", "warning", "action"]
Severity = Literal["warning", "error"]


@dataclass(frozen=True)
class Limits:
    """Centre line and spread of a history of results."""

    n: int
    mean: float
    sd: float  # sample standard deviation (n - 1)

    def line(self, k: float) -> float:
        """mean + k σ (k negative for the lower lines)."""
        return self.mean + k * self.sd


def limits_of(values: Sequence[float]) -> Limits:
    """Mean and sample standard deviation of at least two results."""
    if len(values) < 2:
        raise ValueError("limits need at least two results")
    return Limits(len(values), statistics.fmean(values), statistics.stdev(values))


def z_of(value: float, limits: Limits) -> float:
    """How many σ a value lies from the mean; a history with no spread at all puts any other
    value infinitely far (it is beyond every line) and the mean itself at 0."""
    diff = value - limits.mean
    if limits.sd > 0:
        return diff / limits.sd
    return 0.0 if diff == 0 else math.copysign(math.inf, diff)


@dataclass(frozen=True)
class Violation:
    rule: str  # "beyond-3s", "2-of-3-beyond-2s", "4-of-5-beyond-1s", "8-on-one-side"
    severity: Severity
    message: str


@dataclass(frozen=True)
class JudgedPoint:
    index: int
    value: float
    limits: Limits | None
    z: float | None
    zone: Zone
    violations: tuple[Violation, ...] = field(default=())

    @property
    def worst(self) -> Severity | None:
        if any(v.severity == "error" for v in self.violations):
            return "error"
        return "warning" if self.violations else None


def _zone(z: float | None) -> Zone:
    if z is None:
        return "no limits"
    if abs(z) > 3:
        return "action"
    return "warning" if abs(z) > 2 else "in control"


def _side(z: float) -> int:
    return (z > 0) - (z < 0)


def _k_of_m(zs: Sequence[float | None], i: int, k: int, m: int, beyond: float) -> bool:
    """At least k of the m points ending at i beyond ``beyond`` σ on the side of point i (a
    point without limits in the window simply does not count)."""
    window = zs[max(0, i + 1 - m) : i + 1]
    zi = zs[i]
    assert zi is not None
    if abs(zi) <= beyond:
        return False
    side = _side(zi)
    return sum(1 for z in window if z is not None and abs(z) > beyond and _side(z) == side) >= k


def _run(zs: Sequence[float | None], i: int, length: int) -> bool:
    if i + 1 < length:
        return False
    window = zs[i + 1 - length : i + 1]
    if any(z is None for z in window):
        return False
    sides = {_side(z) for z in window if z is not None}
    return sides in ({1}, {-1})


def judge(
    values: Sequence[float], *, min_history: int = MIN_HISTORY, run_length: int = RUN_LENGTH
) -> list[JudgedPoint]:
    """Every point in time order with its limits (from the points before it), z, zone and the
    rules it breaks."""
    if min_history < 2:
        raise ValueError("limits need a history of at least two results")
    history: list[float] = []
    zs: list[float | None] = []
    limits_at: list[Limits | None] = []
    for value in values:
        if not math.isfinite(value):
            raise ValueError("control chart values must be finite numbers")
        limits = limits_of(history) if len(history) >= min_history else None
        z = z_of(value, limits) if limits else None
        limits_at.append(limits)
        zs.append(z)
        if z is None or abs(z) <= 3:
            history.append(value)
    out = []
    for i, value in enumerate(values):
        z = zs[i]
        found: list[Violation] = []
        if z is not None:
            side = "above" if z > 0 else "below"
            if abs(z) > 3:
                found.append(Violation("beyond-3s", "error", f"beyond the action limit (3σ) {side} the mean"))
            if _k_of_m(zs, i, 2, 3, 2.0):
                found.append(
                    Violation(
                        "2-of-3-beyond-2s", "warning", f"2 of the last 3 results beyond 2σ {side} the mean"
                    )
                )
            if _k_of_m(zs, i, 4, 5, 1.0):
                found.append(
                    Violation(
                        "4-of-5-beyond-1s", "warning", f"4 of the last 5 results beyond 1σ {side} the mean"
                    )
                )
            if _run(zs, i, run_length):
                found.append(
                    Violation(
                        f"{run_length}-on-one-side",
                        "warning",
                        f"{run_length} results in a row {side} the mean",
                    )
                )
        out.append(JudgedPoint(i, value, limits_at[i], z, _zone(z), tuple(found)))
    return out
