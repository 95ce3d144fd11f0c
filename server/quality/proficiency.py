"""Proficiency testing: the laboratory's result in an interlaboratory round, as a z score.

z = (x − X) / σpt, with x the laboratory's result, X the round's assigned value and σpt the
standard deviation for proficiency assessment the scheme sets (ISO 13528:2015 cl. 9.4; from
memory). The verdict follows ISO 13528:2015 cl. 9.4.1 and ISO/IEC 17043's terms (from memory):
|z| ≤ 2 satisfactory; 2 < |z| < 3 questionable (a warning signal); |z| ≥ 3 unsatisfactory (an
action signal). z is judged at full precision; a result on a boundary takes the kinder side only
at 2 (≤ 2 is satisfactory), as the clause writes it.
"""

from __future__ import annotations

import math
from typing import Literal

Verdict = Literal["satisfactory", "questionable", "unsatisfactory"]


def z_score(result: float, assigned: float, sigma_pt: float) -> float:
    if not all(math.isfinite(v) for v in (result, assigned, sigma_pt)):
        raise ValueError("z needs finite numbers")
    if sigma_pt <= 0:
        raise ValueError("σpt must be more than 0")
    return (result - assigned) / sigma_pt


def verdict(z: float) -> Verdict:
    # Decimal noise (e.g. (23.4 - 21.0) / 1.2) must not push a z of exactly 2 or 3 across.
    size = round(abs(z), 9)
    if size <= 2:
        return "satisfactory"
    return "questionable" if size < 3 else "unsatisfactory"
