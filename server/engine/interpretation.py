"""Indicative correlations from the index results, kept apart from measured results.

These are published empirical correlations, reported in the report's opinion and
interpretation section only (DESIGN.md section 5). Every entry carries its value, unit, source
and the word "indicative"; none is a measured property of the sample.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from server.engine.indices import reported_limit

INDICATIVE = "indicative only: an empirical correlation, not a measurement of this sample"


def cc_terzaghi_peck(ll: float) -> float:
    """Compression index Cc = 0.009 (LL - 10), undisturbed clay of low to medium sensitivity
    (Terzaghi & Peck 1967)."""
    return 0.009 * (ll - 10.0)


def cc_skempton(ll: float) -> float:
    """Compression index Cc = 0.007 (LL - 10), remoulded clay (Skempton 1944)."""
    return 0.007 * (ll - 10.0)


def remoulded_cu_kpa(li: float) -> float:
    """Remoulded undrained strength cu = 170 exp(-4.6 LI) kPa (Wroth & Wood 1978; from memory).

    About 1.7 kPa at the liquid limit (LI = 1) and a hundred times that, 170 kPa, at the plastic
    limit (LI = 0). Vardanega & Haigh (2014) find a factor nearer 35 between the two limits.
    """
    return 170.0 * math.exp(-4.6 * li)


def cu_ratio_nc(pi: float) -> float:
    """cu / sigma'v = 0.11 + 0.0037 PI for normally consolidated clay (Skempton 1957)."""
    return 0.11 + 0.0037 * pi


def swell_potential(pi: float) -> float:
    """Swell potential S = 2.16e-3 PI^2.44 %, compacted clay (Seed, Woodward & Lundgren 1962)."""
    return 2.16e-3 * math.pow(pi, 2.44)


def swell_class(s: float) -> str:
    """Swell class (Seed, Woodward & Lundgren 1962; from memory): low 0-1.5 %, medium 1.5-5 %,
    high 5-25 %, very high above 25 %; a boundary belongs to the lower class."""
    if s <= 1.5:
        return "low"
    if s <= 5.0:
        return "medium"
    if s <= 25.0:
        return "high"
    return "very high"


def _entry(value: float, unit: str, label: str, source: str, **extra: Any) -> dict[str, Any]:
    return {"value": value, "unit": unit, "label": label, "source": source, "basis": INDICATIVE, **extra}


def interpret(results: Mapping[str, Any]) -> dict[str, dict[str, Any]]:
    """The correlations that the results allow, each entry labelled indicative.

    Uses the reported whole-number liquid limit, as a report reader would recompute it.
    """
    out: dict[str, dict[str, Any]] = {}
    if results.get("nonplastic") is not False:
        return out
    ll = results.get("liquid_limit")
    pi = results.get("plasticity_index")
    li = results.get("liquidity_index")
    if ll is not None and ll > 10.0:
        llr = reported_limit(ll)
        out["compression_index_undisturbed"] = _entry(
            cc_terzaghi_peck(llr), "", "compression index Cc, undisturbed clay of low sensitivity",
            "Terzaghi & Peck (1967): Cc = 0.009 (LL - 10)")
        out["compression_index_remoulded"] = _entry(
            cc_skempton(llr), "", "compression index Cc, remoulded clay",
            "Skempton (1944): Cc = 0.007 (LL - 10)")
    if li is not None:
        extra: dict[str, Any] = {}
        if not 0.0 <= li <= 1.0:
            extra["note"] = "liquidity index outside 0 to 1: extrapolated beyond the correlation's range"
        out["remoulded_undrained_strength_kpa"] = _entry(
            remoulded_cu_kpa(li), "kPa", "remoulded undrained shear strength",
            "Wroth & Wood (1978): cu = 170 exp(-4.6 LI) kPa", **extra)
    if pi is not None:
        out["undrained_strength_ratio_nc"] = _entry(
            cu_ratio_nc(pi), "", "undrained strength ratio cu/sigma'v, normally consolidated",
            "Skempton (1957): cu/sigma'v = 0.11 + 0.0037 PI")
        s = swell_potential(pi)
        out["swell_potential"] = _entry(
            s, "%", "swell potential", "Seed, Woodward & Lundgren (1962): S = 2.16e-3 PI^2.44",
            swell_class=swell_class(s))
    return out
