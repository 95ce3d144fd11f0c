"""Indices formed from the limits: PI, LI, CI and activity.

The limits are reported to the nearest whole number (ASTM D4318-17; BS 1377-2:1990
cl. 4.3 and 5; from memory), and the indices are formed from those reported limits, so that the report
reads consistently: PI = LL - PL of the printed numbers (ASTM D4318-17; REFERENCES.md).
"""

from __future__ import annotations

import math

from server.engine.rounding import round_half_up


def reported_limit(value: float) -> float:
    """A limit as reported: the nearest whole number, half up (ASTM D4318; rounding.py).

    Same result as ``round_half_up(value, 0)``; the decimal route is taken only near a half,
    where binary floating point could tip the result, so the common case stays cheap.
    """
    whole = math.floor(value)
    frac = value - whole
    if abs(frac - 0.5) < 1e-6:
        return round_half_up(value, 0)
    return float(whole + 1) if frac > 0.5 else float(whole)


def is_nonplastic(ll: float, pl: float) -> bool:
    """Non-plastic when the plastic limit is equal to or above the liquid limit (ASTM D4318-17).

    Compared on the reported whole-number limits, so that a soil reported NP never shows a
    plasticity index of zero or below.
    """
    return reported_limit(pl) >= reported_limit(ll)


def plasticity_index(ll: float, pl: float) -> float:
    """PI = LL - PL, from the reported whole-number limits (ASTM D4318-17; REFERENCES.md)."""
    return reported_limit(ll) - reported_limit(pl)


def liquidity_index(w: float, ll: float, pl: float) -> float:
    """LI = (w - PL) / PI, with the reported whole-number LL and PL (definition; REFERENCES.md).

    Using the reported limits keeps LI + CI = 1 with the PI printed on the report.
    """
    lr, pr = reported_limit(ll), reported_limit(pl)
    return (w - pr) / (lr - pr)


def consistency_index(w: float, ll: float, pl: float) -> float:
    """CI = (LL - w) / PI, with the reported whole-number LL and PL (definition, ISO 14688-2).

    Using the reported limits keeps LI + CI = 1 with the PI printed on the report.
    """
    lr, pr = reported_limit(ll), reported_limit(pl)
    return (lr - w) / (lr - pr)


def activity(pi: float, clay_fraction: float) -> float:
    """A = PI / (% by dry mass finer than 2 micrometres) (Skempton 1953)."""
    return pi / clay_fraction
