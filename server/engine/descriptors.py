"""Words for the numbers: plasticity, state, consistency, activity and sensitivity classes.

Each class function states which side its boundary values fall on, since the published
tables give ranges that share their end points.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

PLASTICITY_TABLE = (
    "Burmister (1949), plasticity by PI: 0 non-plastic, 1-5 slight, 5-10 low, 10-20 medium, "
    "20-40 high, over 40 very high"
)
"""The table ``plasticity_class`` follows (REFERENCES.md "Indices": commonly credited to Burmister,
1949), as the results and the report name it."""

PLASTICITY_END_POINTS = (
    "a PI on a shared end point (5, 10, 20, 40) takes the lower class: 5 slight, 10 low, 20 medium, 40 high"
)
"""The rule for the end points the table's ranges share, as the results and the report state it."""


def plasticity_basis() -> dict[str, str]:
    """The table and the end-point rule of ``plasticity_class``, for the ``plasticity_basis`` result."""
    return {"table": PLASTICITY_TABLE, "end_points": PLASTICITY_END_POINTS}


def plasticity_class(pi: float) -> str:
    """Plasticity by PI (``PLASTICITY_TABLE``, Burmister 1949): 0 non-plastic, 1-5 slight, 5-10 low,
    10-20 medium, 20-40 high, above 40 very high.

    The table's "above 40" puts 40 itself in "high", so every shared end point is read the same
    way (``PLASTICITY_END_POINTS``): it belongs to the lower class (5 slight, 10 low, 20 medium,
    40 high). A PI above 0 and up to 5 is slight.
    """
    if pi <= 0:
        return "non-plastic"
    if pi <= 5:
        return "slight"
    if pi <= 10:
        return "low"
    if pi <= 20:
        return "medium"
    if pi <= 40:
        return "high"
    return "very high"


def state_class(li: float) -> str:
    """State by the liquidity index: below 0 drier than the plastic limit (semi-solid or solid),
    0 to 1 plastic, above 1 liquid (definition of the index; common practice).

    LI = 0 (at the plastic limit) and LI = 1 (at the liquid limit) are read as plastic.
    """
    if li < 0:
        return "semi-solid or solid"
    if li <= 1:
        return "plastic"
    return "liquid"


def consistency_class(ci: float) -> str:
    """Consistency of a fine soil by CI (ISO 14688-2, bands confirmed, wording from memory):
    very soft below 0.25, soft 0.25-0.50, firm 0.50-0.75, stiff 0.75-1.00, very stiff above 1.00.

    The standard's "below 0.25" and "above 1.00" fix the two outer boundaries (0.25 soft, 1.00
    stiff); the inner ones are read as the start of the stiffer band (0.50 firm, 0.75 stiff).
    """
    if ci < 0.25:
        return "very soft"
    if ci < 0.50:
        return "soft"
    if ci < 0.75:
        return "firm"
    if ci <= 1.00:
        return "stiff"
    return "very stiff"


def activity_class(a: float) -> str:
    """Activity class (Skempton 1953): inactive below 0.75, normal 0.75-1.25, active above 1.25.

    Both boundaries belong to "normal" (the table's "below" and "above" are strict).
    """
    if a < 0.75:
        return "inactive"
    if a <= 1.25:
        return "normal"
    return "active"


def sensitivity_class(st: float) -> str:
    """Sensitivity class of a clay (Skempton & Northey 1952), St = cu undisturbed / cu remoulded:
    about 1 insensitive, 1-2 low, 2-4 medium, 4-8 sensitive, 8-16 extra-sensitive, above 16 quick.

    St up to 1 is insensitive; a shared boundary belongs to the lower class (2 low, 4 medium,
    8 sensitive, 16 extra-sensitive), matching the table's strict "above 16" for quick clays.
    ValueError for a ratio that is not a positive finite number.
    """
    if isinstance(st, bool) or not isinstance(st, int | float) or not math.isfinite(st) or st <= 0:
        raise ValueError(f"sensitivity must be a positive number, not {st!r}")
    if st <= 1:
        return "insensitive"
    if st <= 2:
        return "low sensitivity"
    if st <= 4:
        return "medium sensitivity"
    if st <= 8:
        return "sensitive"
    if st <= 16:
        return "extra-sensitive"
    return "quick"


def describe(results: Mapping[str, Any]) -> dict[str, str]:
    """The classes that apply to an Atterberg set's results (only those that can be formed)."""
    out: dict[str, str] = {}
    if results.get("nonplastic") is True:
        out["plasticity"] = "non-plastic"
        return out
    pi = results.get("plasticity_index")
    if pi is not None:
        out["plasticity"] = plasticity_class(pi)
    li = results.get("liquidity_index")
    if li is not None:
        out["state"] = state_class(li)
    ci = results.get("consistency_index")
    if ci is not None:
        out["consistency"] = consistency_class(ci)
    a = results.get("activity")
    if a is not None:
        out["activity"] = activity_class(a)
    return out
