"""The bad inputs every front door must refuse field by field (and store nothing for).

Each case names the readings, the JSON path of the field that must be refused, and a word the
message must contain. The rules are those of ASTM D2216 / D4318 masses (common practice:
a mass is not negative, dry soil weighs less than wet soil and more than its empty tin) and
D4318 cl. 11 (multipoint liquid limit: three or more trials; blow counts 1 to 100 are the
bounds we accept, common practice, with 15-35 the standard's window flagged separately).
"""

from __future__ import annotations

import copy
from typing import Any

from tests.support.scenario import ATTERBERG


def _with(path: list[str | int], value: Any) -> dict[str, Any]:
    readings = copy.deepcopy(ATTERBERG)
    node: Any = readings
    for part in path[:-1]:
        node = node[part]
    if value is _DROP:
        del node[path[-1]]
    else:
        node[path[-1]] = value
    return readings


_DROP = object()
LL = ["liquid_limit", "trials"]

BAD_ATTERBERG: dict[str, tuple[dict[str, Any], list[str | int], str]] = {
    "negative mass": (_with([*LL, 0, "tare_g"], -1.0), [*LL, 0, "tare_g"], "below"),
    "dry mass above wet mass": (_with([*LL, 1, "dry_tare_g"], 38.5), [*LL, 1, "dry_tare_g"], "above"),
    "tare above dry mass": (_with([*LL, 2, "tare_g"], 31.0), [*LL, 2, "tare_g"], "above"),
    "blow count below 1": (_with([*LL, 0, "blows"], 0), [*LL, 0, "blows"], "below"),
    "blow count above 100": (_with([*LL, 0, "blows"], 101), [*LL, 0, "blows"], "above"),
    "text where a number belongs": (_with([*LL, 1, "wet_tare_g"], "forty"), [*LL, 1, "wet_tare_g"], "number"),
    "fewer than three multipoint trials": (
        _with([*LL], ATTERBERG["liquid_limit"]["trials"][:2]),
        LL,
        "at least 3",
    ),
}
