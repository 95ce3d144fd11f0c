"""The plasticity chart of ASTM D2487 (Casagrande's chart): A-line, U-line and the chart symbol;
and the plasticity chart of BS 5930 (the British Soil Classification System) for jobs tested to
BS / ISO.

A-line: PI = 0.73 (LL - 20), horizontal at PI = 4 up to LL = 25.5 (ASTM D2487 Fig. 4).
U-line: PI = 0.9 (LL - 8), vertical at LL = 16 up to PI = 7 (ASTM D2487 Fig. 4).

BS 5930 chart (``bs_*`` below): the same sloped A-line, PI = 0.73 (LL - 20), drawn through the
base line at LL 20 with no horizontal part, clay (C) above it and silt or M-soil (M) below, and
five plasticity ranges by liquid limit: low (L) below 35, intermediate (I) 35 to 50, high (H) 50
to 70, very high (V) 70 to 90, extremely high (E) above 90; symbols CL, CI, CH, CV, CE and ML, MI,
MH, MV, ME. Sources: the A-line through LL 20, PI 0 and the letters L below 35, H 50 to 70 and E
above 90 are confirmed in public excerpts of Smith, Smith's Elements of Soil Mechanics (its
BSCS summary, after BS 5930:1981 and :1999); the I (35 to 50) and V (70 to 90) ranges, which
those excerpts print garbled, and their being kept in BS 5930:2015, are from memory. ISO 14688-2
describes plasticity without these liquid-limit ranges (from memory), so the ranges are BS 5930's.
The published ranges share their end points; ours: each range begins at its lower end point
(LL 35 is intermediate, 50 high, 70 very high, 90 extremely high), as D2487 reads LL 50 as high;
a point on the A-line is clay, as D2487 reads "on or above". Both are our reading.
"""

from __future__ import annotations

import math

BS_PLASTICITY_RANGES: tuple[tuple[float, str, str], ...] = (
    (35.0, "L", "low"),
    (50.0, "I", "intermediate"),
    (70.0, "H", "high"),
    (90.0, "V", "very high"),
    (math.inf, "E", "extremely high"),
)
"""(liquid limit the range ends before, letter, term), low to extremely high (BS 5930; see above)."""

BS_BASIS = (
    "BS 5930 plasticity chart: A-line PI = 0.73 (LL - 20), clay (C) on or above, silt (M) below; "
    "plasticity by liquid limit: low (L) below 35, intermediate (I) 35-50, high (H) 50-70, "
    "very high (V) 70-90, extremely high (E) above 90; a liquid limit on a shared end point "
    "takes the higher range"
)


def a_line(ll: float) -> float:
    """PI of the A-line at this liquid limit (ASTM D2487 Fig. 4)."""
    return max(4.0, 0.73 * (ll - 20.0))


def u_line(ll: float) -> float:
    """PI of the U-line at this liquid limit, the upper bound of natural soils (ASTM D2487 Fig. 4)."""
    return 0.9 * (ll - 8.0)


def chart_symbol(ll: float, pi: float) -> str:
    """The fine-grained group symbol read off the chart (inorganic soils).

    "On or above" the A-line is clay (ASTM D2487 cl. 11.1 and Fig. 4): LL < 50 gives CL when
    PI > 7, CL-ML in the hatched band 4 <= PI <= 7, ML below; LL >= 50 gives CH or MH.
    """
    above = pi >= a_line(ll)
    if ll >= 50.0:
        return "CH" if above else "MH"
    if 4.0 <= pi <= 7.0 and above:
        return "CL-ML"
    if above and pi > 7.0:
        return "CL"
    return "ML"


def chart_position(ll: float, pi: float) -> dict[str, float | bool | str]:
    """The point as data a chart can plot, with the line values at its liquid limit."""
    return {
        "liquid_limit": ll,
        "plasticity_index": pi,
        "a_line_pi": a_line(ll),
        "u_line_pi": u_line(ll),
        "above_a_line": pi >= a_line(ll),
        "above_u_line": pi > u_line(ll),
        "symbol": chart_symbol(ll, pi),
    }


def on_or_above_a_line(ll: float, pi: float) -> bool:
    """True when the point is clay-like: on or above the A-line (ASTM D2487 Fig. 4, "on or above")."""
    return pi >= a_line(ll)


def beyond_u_line(ll: float, pi: float) -> bool:
    """True when the point lies beyond the U-line, where natural soils are not expected.

    ASTM D2487 Fig. 4 draws the U-line vertical at LL = 16 (up to where it meets the sloped part,
    PI = 0.9 (16 - 8) = 7.2; the figure labels it "to PI = 7"), then PI = 0.9 (LL - 8). So any
    point left of LL = 16 is beyond it. Such a point still gets its chart symbol; the limits
    deserve a second look (common practice).
    """
    return ll < 16.0 or pi > u_line(ll)


def a_line_points(ll_max: float = 120.0) -> list[tuple[float, float]]:
    """Vertices (LL, PI) of the A-line for drawing: flat at PI = 4 to LL = 25.5, then sloped (Fig. 4)."""
    knee = 20.0 + 4.0 / 0.73
    return [(0.0, 4.0), (knee, 4.0), (ll_max, a_line(ll_max))]


def u_line_points(ll_max: float = 120.0) -> list[tuple[float, float]]:
    """Vertices (LL, PI) of the U-line for drawing: vertical at LL = 16, then sloped (Fig. 4)."""
    return [(16.0, 0.0), (16.0, u_line(16.0)), (ll_max, u_line(ll_max))]


def cl_ml_band_points() -> list[tuple[float, float]]:
    """Outline (LL, PI) of the hatched CL-ML band: 4 <= PI <= 7 on or above the A-line (Fig. 4).

    The band is bounded on the left by the U-line's vertical at LL = 16 as drawn in the figure;
    the classification rule itself (``chart_symbol``) does not need that bound.
    """
    return [(16.0, 4.0), (20.0 + 4.0 / 0.73, 4.0), (20.0 + 7.0 / 0.73, 7.0), (16.0, 7.0)]


def bs_a_line(ll: float) -> float:
    """PI of the BS 5930 A-line at this liquid limit: 0.73 (LL - 20), with no horizontal part."""
    return 0.73 * (ll - 20.0)


def bs_plasticity_range(ll: float) -> tuple[str, str]:
    """The BS 5930 plasticity range of a liquid limit: its letter and term (``("I", "intermediate")``).

    A liquid limit on a shared end point takes the higher range (35 intermediate, 90 extremely high).
    """
    for end, letter, term in BS_PLASTICITY_RANGES:
        if ll < end:
            return letter, term
    raise ValueError(f"liquid limit must be a finite number, not {ll!r}")


def bs_chart_symbol(ll: float, pi: float) -> str:
    """The BS 5930 chart symbol: C on or above the A-line, M below, then the range letter (``CI``)."""
    kind = "C" if pi >= bs_a_line(ll) else "M"
    return kind + bs_plasticity_range(ll)[0]


def bs_plasticity_term(ll: float, pi: float) -> str:
    """The BS 5930 words for the point: ``clay of intermediate plasticity``, ``silt of high plasticity``."""
    noun = "clay" if pi >= bs_a_line(ll) else "silt"
    return f"{noun} of {bs_plasticity_range(ll)[1]} plasticity"
