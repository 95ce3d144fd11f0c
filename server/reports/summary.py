"""One sample's results gathered from all its tests, and its line in the summary of results (pure).

Where two tests of one sample give the same key, the test that measures it wins (``_PREFERRED``).
A limit of a non-plastic soil is "NP" (ASTM D4318: report NP when LL or PL cannot be determined
or PL >= LL). Exports take the same text (server/exchange/results_sheet.py), so they never
disagree with the report.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from server.engine.indices import activity as activity_of
from server.reports.data import TestEntry
from server.reports.formatting import DASH, NP, depth, finite, number, show


@dataclass(frozen=True)
class SummaryRow:
    location: str
    sample: str
    depth_from: str
    depth_to: str
    sample_type: str
    water_content: str
    liquid_limit: str
    plastic_limit: str
    plasticity_index: str
    liquidity_index: str
    consistency_index: str
    activity: str
    clay_fraction: str
    sensitivity: str
    uscs_symbol: str
    uscs_name: str
    aashto: str


def sample_key(t: TestEntry) -> tuple[str, str, float | None, float | None]:
    return (t.location_code, t.sample_code, t.depth_from_m, t.depth_to_m)


NP_KEYS = ("liquid_limit", "plastic_limit", "plasticity_index")  # "NP" for a non-plastic soil


# Where two tests of one sample give the same key, the test that measures it wins: the
# classification test's USCS and AASHTO over the Atterberg set's chart symbol, a grading or
# hydrometer test's clay fraction over a value typed into the Atterberg set.
_PREFERRED: dict[str, tuple[str, ...]] = {
    "uscs_symbol": ("classification", "atterberg"),
    "uscs_name": ("classification", "atterberg"),
    "aashto_group": ("classification",),
    "group_index": ("classification",),
    "clay_fraction": ("grading", "hydrometer", "atterberg", "classification"),
}


def rank(key: str, method: str) -> int:
    order = _PREFERRED.get(key, ())
    return order.index(method) if method in order else len(order)


def merge(tests: Sequence[TestEntry]) -> dict[str, Any]:
    """One sample's results from all its tests: for each key, the preferred test that gives it
    (else the first). Activity is formed again from the PI and clay fraction shown (by the
    engine's formula), so that it agrees with them when they come from two different tests."""
    merged: dict[str, Any] = {}
    ranks: dict[str, int] = {}
    for t in tests:
        for key, value in t.results.items():
            if value is None:
                continue
            r = rank(key, t.method)
            if key not in merged or r < ranks[key]:
                merged[key] = value
                ranks[key] = r
    pi, clay = finite(merged.get("plasticity_index")), finite(merged.get("clay_fraction"))
    if not nonplastic(merged) and pi is not None and clay:
        merged["activity"] = activity_of(pi, clay)
    return merged


def nonplastic(results: Mapping[str, Any]) -> bool:
    return results.get("nonplastic") is True


def limit(key: str, results: Mapping[str, Any]) -> str:
    """LL, PL or PI as printed: NP where the soil is non-plastic (ASTM D4318)."""
    np = nonplastic(results)
    if np and key != "liquid_limit":
        return NP
    value = results.get(key)
    if value is None:
        return NP if np else DASH
    return show(key, value)


def aashto(results: Mapping[str, Any]) -> str:
    group = results.get("aashto_group")
    if not group:
        return DASH
    gi = finite(results.get("group_index"))
    return f"{group} ({number('group_index', gi)})" if gi is not None else str(group)


def summary_row(tests: Sequence[TestEntry]) -> SummaryRow:
    """The summary line of one sample, from all the tests on it."""
    first = tests[0]
    r = merge(tests)
    return SummaryRow(
        location=first.location_code,
        sample=first.sample_code,
        depth_from=DASH if first.depth_from_m is None else depth(first.depth_from_m),
        depth_to=DASH if first.depth_to_m is None else depth(first.depth_to_m),
        sample_type=first.sample_type or DASH,
        water_content=show("water_content", r.get("water_content")),
        liquid_limit=limit("liquid_limit", r),
        plastic_limit=limit("plastic_limit", r),
        plasticity_index=limit("plasticity_index", r),
        liquidity_index=show("liquidity_index", r.get("liquidity_index")),
        consistency_index=show("consistency_index", r.get("consistency_index")),
        activity=show("activity", r.get("activity")),
        clay_fraction=show("clay_fraction", r.get("clay_fraction")),
        sensitivity=show("sensitivity", r.get("sensitivity")),
        uscs_symbol=show("uscs_symbol", r.get("uscs_symbol")),
        uscs_name=show("uscs_name", r.get("uscs_name")),
        aashto=aashto(r),
    )


def sample_results(tests: Sequence[TestEntry]) -> dict[str, Any]:
    """One sample's results at full precision, taken from its tests as its summary row takes
    them: what an export prints beside the summary's rounded text, so the two never disagree."""
    return merge(tests)


def shown_result(key: str, results: Mapping[str, Any]) -> str:
    """A result of one test as the report prints it: "NP" for a limit of a non-plastic soil
    (ASTM D4318), else rounded by the key's rule; for exports that print it beside the value."""
    return limit(key, results) if key in NP_KEYS else show(key, results.get(key))


def by_sample(tests: Sequence[TestEntry]) -> list[list[TestEntry]]:
    groups: dict[tuple[str, str, float | None, float | None], list[TestEntry]] = {}
    for t in tests:
        groups.setdefault(sample_key(t), []).append(t)
    return list(groups.values())
