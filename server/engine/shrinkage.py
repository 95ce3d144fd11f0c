"""The ``linear-shrinkage`` method: shrinkage of a bar of soil dried from the liquid limit.

Readings (lengths mm)::

    {"mould_length_mm": 140.0, "oven_dry_length_mm": 128.6, "condition": "intact",
     "length_resolution_mm": 0.1}

``condition`` is one of "intact", "cracked" or "curled"; ``length_resolution_mm`` (optional,
default 0.1 mm: vernier callipers read to 0.1 mm, common practice) gives the uncertainty.

Formula: LS = (1 - L_D / L_0) x 100, in per cent of the mould length, L_0 the inside length of
the mould and L_D the length of the oven-dried bar (BS 1377-2:1990 cl. 6.5). The result is kept at
full precision and rounded only when shown (BS 1377-2 reports it to the nearest whole number,
from memory). A cracked bar is measured with its pieces fitted together and a curled one along
its top and bottom faces, averaged (BS 1377-2 cl. 6.5, from memory): the condition is recorded
and flagged for the reviewer, it never changes the formula.

Results: ``linear_shrinkage`` (%) and ``uncertainty`` of it as {"u", "U", "k": 2}, each length
with u = resolution / sqrt(12) (JCGM 100:2008 cl. F.2.2.1), propagated to first order.

Refused: a length not above zero, and a dried bar longer than its mould (a soil does not swell in
the oven).

Flags (warnings): ``shrinkage-bar-cracked``, ``shrinkage-bar-curled``.
"""

from __future__ import annotations

import math

from server.engine.contract import Outcome, method
from server.engine.readings import Readings, fmt
from server.engine.uncertainty import expanded

CONDITIONS = ("intact", "cracked", "curled")
DEFAULT_LENGTH_RESOLUTION_MM = 0.1  # vernier callipers read to 0.1 mm (common practice)
MAX_MOULD_LENGTH_MM = 1000.0  # far above the 140 mm mould of BS 1377-2 cl. 6.5


def linear_shrinkage(mould_length_mm: float, dry_length_mm: float) -> float:
    """LS = (1 - L_D / L_0) x 100 % (BS 1377-2:1990 cl. 6.5)."""
    return (1.0 - dry_length_mm / mould_length_mm) * 100.0


def u_linear_shrinkage(mould_length_mm: float, dry_length_mm: float, u_length_mm: float) -> float:
    """u(LS) with dLS/dL_D = -100/L_0 and dLS/dL_0 = 100 L_D / L_0^2, lengths independent."""
    c_dry = 100.0 / mould_length_mm
    c_mould = 100.0 * dry_length_mm / (mould_length_mm * mould_length_mm)
    return u_length_mm * math.hypot(c_dry, c_mould)


@method("linear-shrinkage", title="Linear shrinkage", standard="BS 1377-2:1990 cl. 6.5")
def linear_shrinkage_method(r: Readings, out: Outcome) -> None:
    """LS from the mould and oven-dry lengths; the bar's condition recorded and flagged."""
    mould = r.number(
        "mould_length_mm", name="mould length", unit="mm", above=0.0, maximum=MAX_MOULD_LENGTH_MM
    )
    dry = r.number(
        "oven_dry_length_mm", name="oven-dry length", unit="mm", above=0.0, maximum=MAX_MOULD_LENGTH_MM
    )
    condition = r.choice("condition", name="condition of the bar", choices=CONDITIONS)
    res = r.number(
        "length_resolution_mm", name="length resolution", unit="mm", required=False, above=0.0, maximum=10.0
    )
    if condition == "cracked":
        out.flag(
            "shrinkage-bar-cracked",
            "warning",
            "the bar cracked while drying: its length was measured with the pieces fitted together",
        )
    elif condition == "curled":
        out.flag(
            "shrinkage-bar-curled",
            "warning",
            "the bar curled while drying: its length is the mean of the top and bottom faces",
        )
    if mould is None or dry is None:
        return
    if dry > mould:
        r.refuse(
            "oven_dry_length_mm",
            f"oven-dry length ({fmt(dry, 'mm')}) is above the mould length "
            f"({fmt(mould, 'mm')}): a bar does not grow in the oven",
        )
        return
    out.results["linear_shrinkage"] = linear_shrinkage(mould, dry)
    if not r.has_errors_under("length_resolution_mm"):
        u_len = (DEFAULT_LENGTH_RESOLUTION_MM if res is None else res) / math.sqrt(12.0)
        out.results.setdefault("uncertainty", {})["linear_shrinkage"] = expanded(
            u_linear_shrinkage(mould, dry, u_len)
        )
