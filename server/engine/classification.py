"""Soil classification: USCS group symbol and name (ASTM D2487-17), AASHTO group and group index (M 145).

Pure functions that the ``classification`` method, the Atterberg method and the reports share.
Inputs are percentages by dry mass (of the material finer than 75 mm) and water contents in %:

- ``fines``: passing the 75 µm (No. 200) sieve; ``sand``: 4.75 mm to 75 µm; ``gravel``: 75 mm to
  4.75 mm (ASTM D2487 cl. 3 terminology, from memory).
- ``ll``/``pi``: liquid limit and plasticity index as the caller reports them; the functions
  classify the numbers they are given and do not round them (the Atterberg method passes its
  reported whole-number limits, REFERENCES.md "Indices").

USCS, ASTM D2487-17 (REFERENCES.md "Classification"; Table 1, Fig. 1 for fine-grained soils, Fig. 3
for coarse-grained soils and Fig. 4, the plasticity chart; the figure numbers are from memory):

- fine-grained when 50 % or more passes 75 µm, else coarse-grained;
- fine-grained symbol from the plasticity chart (``plasticity_chart.chart_symbol``): on or above
  the A-line CL (PI > 7), CL-ML (4 <= PI <= 7), else ML; LL >= 50 CH or MH. Organic (OL, OH)
  when LL(oven-dried) / LL(not dried) < 0.75, wherever the point plots (Fig. 1 tests it first);
  named "organic clay" on or above the A-line (PI >= 4), "organic silt" below;
- coarse-grained: gravel when gravel > sand (more than half the coarse fraction retained on
  4.75 mm), else sand; fines < 5 % clean (W or P), 5 to 12 % dual symbols, > 12 % M, C, or C-M
  for CL-ML fines; well graded when Cu >= 4 (gravel) or >= 6 (sand) and 1 <= Cc <= 3;
- group names by the % retained on 75 µm (Fig. 1; the conventions of DESIGN.md section 8): < 15
  none; exactly 15 and up to 30 "with sand" or "with gravel"; exactly 30 and above "sandy" or
  "gravelly", plus "with gravel"/"with sand" when the other coarse fraction is 15 % or more
  (exactly 15 included); equal sand and gravel count as sand; coarse soils (Fig. 3) add "with
  sand"/"with gravel" at 15 % or more of the other; organic fines in a coarse soil add "with
  organic fines". "Exactly" is compared with a margin of ``EXACT`` (1e-9 percentage points), so
  a fraction computed as 14.999999999999998 for 15 counts as 15;
- nonplastic fines (no PL, or PL >= LL, ASTM D4318) are ML whatever their liquid limit
  (DESIGN.md section 8), and a coarse soil with nonplastic fines is GM or SM (common practice;
  D2487 Table 1: ML fines make GM, SM);
- peat (PT) is identified by eye (ASTM D2487 cl. 1 and D2488): a flag the caller passes.

AASHTO M 145 (REFERENCES.md "Classification"; Table 2 read left to right, A-3 placed before A-2):
groups from the % passing 2 mm, 425 µm and 75 µm and the limits of the fraction passing 425 µm;
group index GI = (F - 35)[0.2 + 0.005 (LL - 40)] + 0.01 (F - 15)(PI - 10), only the second term
for A-2-6 and A-2-7, zero for A-1-a, A-1-b, A-3, A-2-4 and A-2-5, zero when negative, rounded
half up to a whole number. Table limits such as "40 max"/"41 min" are read as LL <= 40 / LL > 40.
A nonplastic granular soil whose liquid limit could not be determined (NP, no LL) is read as
meeting "LL 40 max", so it is placed (A-1-a, A-1-b, A-3 as the sieves give, else A-2-4, GI 0):
this is the laboratory's reading of the table, which gives no column for "no liquid limit"; the
group carries it in ``Aashto.note`` (``NP_READING``). A nonplastic fine soil (more than 35 %
fines) without a liquid limit stays unclassified: its group index needs the liquid limit.

A function that lacks an input its rule needs raises ``MissingInput`` naming the inputs, so a
method can turn it into a field-level refusal or a flag. ``read_coefficients`` is the one reading
of Cu and Cc (or D10, D30, D60) that both methods share.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from server.engine.plasticity_chart import a_line, chart_symbol, on_or_above_a_line
from server.engine.readings import Readings, fmt
from server.engine.rounding import round_half_up

# --- ASTM D2487 thresholds (REFERENCES.md "Classification") -------------------------------------
FINE_GRAINED_MIN_FINES = 50.0  # % passing 75 µm: fine-grained "50 % or more passes"
CLEAN_MAX_FINES = 5.0  # below 5 % fines: clean gravel or sand
DUAL_MAX_FINES = 12.0  # 5 to 12 % fines: dual symbols; above 12 %: GM, GC, SM, SC
HIGH_LL = 50.0  # LL >= 50: CH, MH, OH
ORGANIC_LL_RATIO = 0.75  # LL(oven-dried) / LL(not dried) below this: organic
MINOR_FRACTION = 15.0  # % at and above which a second coarse fraction is named ("with sand")
MAJOR_COARSE = 30.0  # % retained on 75 µm at and above which a fine soil is "sandy"/"gravelly"
WELL_GRADED_CU = {"G": 4.0, "S": 6.0}
WELL_GRADED_CC = (1.0, 3.0)
COEFFICIENT_TOLERANCE = 0.01  # relative: Cu, Cc given vs computed from D10, D30, D60
EXACT = 1e-9  # percentage points: a fraction this close to a threshold is on it (binary noise)
NONPLASTIC_SYMBOL = "ML"
"""Nonplastic fines are ML whatever their liquid limit (DESIGN.md section 8). The chart alone
would put a nonplastic point (PI 0) with a measured LL of 50 or more below the A-line as MH; the
contract reads "nonplastic" as a silt, which is what such soils are."""

# --- AASHTO M 145 Table 2 -------------------------------------------------------------------------
GRANULAR_MAX_FINES = 35.0
ZERO_GI_GROUPS = frozenset({"A-1-a", "A-1-b", "A-3", "A-2-4", "A-2-5"})
PI_TERM_ONLY_GROUPS = frozenset({"A-2-6", "A-2-7"})
NP_READING = (
    'nonplastic with no liquid limit: NP read as meeting "LL 40 max" (the laboratory\'s reading of '
    "AASHTO M 145 Table 2), group index 0"
)

# --- borderline symbols (ASTM D2487 Note 1) ---------------------------------------------------------
# How close a result must be to another group's boundary for a borderline symbol. Our choice,
# near the single-operator d2s of D4318 for the limits (LL 2.4, PL 2.6, REFERENCES.md, from memory)
# and a sieve-washing repeatability of about 1 % for the fractions (common practice).
BORDERLINE_LIMITS = 2.0
BORDERLINE_FRACTIONS = 1.0

FINE_NAMES = {
    "CL": "lean clay",
    "CL-ML": "silty clay",
    "ML": "silt",
    "CH": "fat clay",
    "MH": "elastic silt",
}


class MissingInput(ValueError):
    """A rule needs an input that was not given; ``fields`` names it (readings keys)."""

    def __init__(self, fields: tuple[str, ...], message: str):
        self.fields = fields
        super().__init__(message)


@dataclass(frozen=True)
class Uscs:
    """A USCS group: symbol (``CL``, ``SW-SM``) and group name (``Sandy lean clay``)."""

    symbol: str
    name: str


@dataclass(frozen=True)
class Aashto:
    """An AASHTO group (``A-7-5``) and its group index, a whole number (M 145); ``note`` says how
    a reading the table does not spell out was read (``NP_READING``), else None."""

    group: str
    group_index: int
    note: str | None = None

    @property
    def label(self) -> str:
        """The group as written on a report, for example ``A-7-5 (10)``."""
        return f"{self.group} ({self.group_index})"


# ==================================================================================================
# USCS
# ==================================================================================================


def _reaches(value: float, threshold: float) -> bool:
    """``value`` >= ``threshold``, a value within ``EXACT`` of it counting as on it."""
    return value >= threshold - EXACT


def is_organic(ll: float | None, ll_oven_dried: float | None) -> bool:
    """Organic when LL after oven-drying is below 0.75 of LL before (ASTM D2487 Fig. 1a)."""
    if ll_oven_dried is None:
        return False
    if ll is None or ll <= 0.0:
        raise MissingInput(("liquid_limit",), "the liquid limit (not dried) must go with the oven-dried one")
    return ll_oven_dried / ll < ORGANIC_LL_RATIO


def fines_symbol(ll: float | None, pi: float | None, *, nonplastic: bool = False) -> str:
    """How the fines classify on the chart (ML, CL, CL-ML, MH, CH); nonplastic fines are ML
    (DESIGN.md section 8).

    Used for coarse soils, whose symbol follows the fines (ASTM D2487 Table 1: GM when the
    fines classify as ML or MH, GC when CL or CH, GC-GM when CL-ML).
    """
    if nonplastic or pi is None or pi <= 0.0:
        if not nonplastic and pi is None:
            raise MissingInput(("liquid_limit", "plastic_limit"), "the limits of the fines are needed")
        return NONPLASTIC_SYMBOL
    if ll is None:
        raise MissingInput(("liquid_limit",), "the liquid limit is needed")
    return chart_symbol(ll, pi)


def _coarse_split(fines: float, sand: float | None, gravel: float | None) -> tuple[float, float]:
    """Sand and gravel, the missing one by difference from 100 % (they add up with the fines)."""
    if sand is None and gravel is None:
        raise MissingInput(("sand", "gravel"), "the sand and gravel percentages are needed")
    if sand is None:
        assert gravel is not None
        sand = max(0.0, 100.0 - fines - gravel)
    if gravel is None:
        gravel = max(0.0, 100.0 - fines - sand)
    return sand, gravel


def _fine_name(base: str, plus_75um: float, sand: float | None, gravel: float | None) -> str:
    """The group name of a fine-grained soil from its coarse part (ASTM D2487 Fig. 1)."""
    if not _reaches(plus_75um, MINOR_FRACTION):
        return base[0].upper() + base[1:]
    if sand is None or gravel is None:
        raise MissingInput(("sand", "gravel"), "the sand and gravel percentages are needed to name it")
    sandy = sand >= gravel  # equal sand and gravel count as sand (DESIGN.md section 8)
    if not _reaches(plus_75um, MAJOR_COARSE):
        name = f"{base} with sand" if sandy else f"{base} with gravel"
    elif sandy:
        name = f"sandy {base}" + (" with gravel" if _reaches(gravel, MINOR_FRACTION) else "")
    else:
        name = f"gravelly {base}" + (" with sand" if _reaches(sand, MINOR_FRACTION) else "")
    return name[0].upper() + name[1:]


def _fine_grained(
    ll: float | None,
    pi: float | None,
    nonplastic: bool,
    organic: bool,
    fines: float | None,
    sand: float | None,
    gravel: float | None,
) -> Uscs:
    """Fine-grained soil (50 % or more fines, or fines not given): symbol from the chart."""
    if nonplastic:
        symbol = NONPLASTIC_SYMBOL
    else:
        if ll is None or pi is None:
            raise MissingInput(("liquid_limit", "plastic_limit"), "the liquid and plastic limits are needed")
        symbol = chart_symbol(ll, pi)
    if organic:
        assert ll is not None
        symbol = "OH" if ll >= HIGH_LL else "OL"
        clay = not nonplastic and pi is not None and on_or_above_a_line(ll, pi)
        base = "organic clay" if clay else "organic silt"
    else:
        base = FINE_NAMES[symbol]
    if fines is None:
        return Uscs(symbol, base[0].upper() + base[1:])
    if sand is not None or gravel is not None:
        sand, gravel = _coarse_split(fines, sand, gravel)
    return Uscs(symbol, _fine_name(base, 100.0 - fines, sand, gravel))


def well_graded(kind: str, cu: float, cc: float) -> bool:
    """Well graded: Cu >= 4 for gravel or >= 6 for sand, and 1 <= Cc <= 3 (ASTM D2487 Table 1)."""
    low, high = WELL_GRADED_CC
    return cu >= WELL_GRADED_CU[kind] and low <= cc <= high


def _coarse_grained(
    ll: float | None,
    pi: float | None,
    nonplastic: bool,
    organic: bool,
    fines: float,
    sand: float | None,
    gravel: float | None,
    cu: float | None,
    cc: float | None,
) -> Uscs:
    """Coarse-grained soil (more than 50 % retained on 75 µm): ASTM D2487 Table 1 and Fig. 3."""
    sand, gravel = _coarse_split(fines, sand, gravel)
    kind = "G" if gravel > sand else "S"
    noun, other_noun, other = ("gravel", "sand", sand) if kind == "G" else ("sand", "gravel", gravel)
    with_other = _reaches(other, MINOR_FRACTION)

    grade = ""
    grade_word = ""
    if fines <= DUAL_MAX_FINES:
        if cu is None or cc is None:
            raise MissingInput(("cu", "cc"), "Cu and Cc are needed to tell a well from a poorly graded soil")
        well = well_graded(kind, cu, cc)
        grade, grade_word = ("W", "Well-graded") if well else ("P", "Poorly graded")

    if fines < CLEAN_MAX_FINES:
        symbol = f"{kind}{grade}"
        name = f"{grade_word} {noun}" + (f" with {other_noun}" if with_other else "")
        return Uscs(symbol, name)

    fines_type = fines_symbol(ll, pi, nonplastic=nonplastic)
    silty = fines_type in ("ML", "MH")
    if fines <= DUAL_MAX_FINES:
        symbol = f"{kind}{grade}-{kind}{'M' if silty else 'C'}"
        fines_word = "silt" if silty else ("silty clay" if fines_type == "CL-ML" else "clay")
        name = f"{grade_word} {noun} with {fines_word}" + (f" and {other_noun}" if with_other else "")
    else:
        if fines_type == "CL-ML":
            symbol, adjective = f"{kind}C-{kind}M", "Silty, clayey"
        elif silty:
            symbol, adjective = f"{kind}M", "Silty"
        else:
            symbol, adjective = f"{kind}C", "Clayey"
        name = f"{adjective} {noun}" + (f" with {other_noun}" if with_other else "")
    if organic:
        name += " with organic fines"
    return Uscs(symbol, name)


def _limits(ll: float | None, pi: float | None, nonplastic: bool) -> tuple[float | None, bool]:
    """PI as used, and whether the soil is nonplastic (PI <= 0 means PL >= LL: ASTM D4318 NP)."""
    if nonplastic:
        return None, True
    if pi is not None and pi <= 0.0:
        return None, True
    return pi, False


def uscs(
    ll: float | None,
    pi: float | None,
    *,
    nonplastic: bool = False,
    fines: float | None = None,
    sand: float | None = None,
    gravel: float | None = None,
    cu: float | None = None,
    cc: float | None = None,
    ll_oven_dried: float | None = None,
    peat: bool = False,
) -> Uscs:
    """The USCS group symbol and name of a soil (ASTM D2487-17).

    With ``fines`` None the soil is taken as fine-grained and classified from the chart alone,
    without the sand or gravel part of the name. ``pi`` <= 0 is nonplastic. Raises
    ``MissingInput`` when the rule that applies needs an input not given (the grading of a
    clean or dual-symbol coarse soil, the sand and gravel split, the limits of the fines).
    """
    if peat:
        return Uscs("PT", "Peat")
    for value, key in ((fines, "fines"), (sand, "sand"), (gravel, "gravel")):
        if value is not None and not 0.0 <= value <= 100.0:
            raise ValueError(f"{key} must be a percentage from 0 to 100, not {value:g}")
    pi, nonplastic = _limits(ll, pi, nonplastic)
    organic = is_organic(ll, ll_oven_dried)
    if fines is None or fines >= FINE_GRAINED_MIN_FINES:
        return _fine_grained(ll, pi, nonplastic, organic, fines, sand, gravel)
    return _coarse_grained(ll, pi, nonplastic, organic, fines, sand, gravel, cu, cc)


def uscs_missing(
    ll: float | None,
    pi: float | None,
    *,
    nonplastic: bool = False,
    fines: float | None = None,
    sand: float | None = None,
    gravel: float | None = None,
    cu: float | None = None,
    cc: float | None = None,
) -> tuple[str, ...]:
    """Every input (readings keys) the full group name still needs, in the order the rule asks
    for them; empty when ``uscs`` can name the soil.

    Without ``fines`` the name cannot be formed (``uscs`` would give the chart's name alone): the
    fines are missing, and the sand and gravel too when neither is given. Otherwise ``uscs`` is
    asked, and each ``MissingInput`` it raises is noted and stood in for (the split as all sand,
    Cu and Cc as 1; never reported), so a coarse soil that lacks both its sand-gravel split and
    its Cu and Cc is told both at once. The rule itself stays in ``uscs`` alone.
    """
    if fines is None:
        return ("fines",) + (("sand", "gravel") if sand is None and gravel is None else ())
    found: list[str] = []
    given: dict[str, float | None] = {"sand": sand, "gravel": gravel, "cu": cu, "cc": cc}
    stand_in = {"sand": 100.0 - fines, "gravel": 0.0, "cu": 1.0, "cc": 1.0}
    while True:
        try:
            g = given
            uscs(
                ll,
                pi,
                nonplastic=nonplastic,
                fines=fines,
                sand=g["sand"],
                gravel=g["gravel"],
                cu=g["cu"],
                cc=g["cc"],
            )
        except MissingInput as missing:
            new = [f for f in missing.fields if f not in found]
            found += new
            if not new or not set(missing.fields) <= set(given):
                return tuple(found)
            given.update({f: stand_in[f] for f in missing.fields})
        else:
            return tuple(found)


def uscs_borderline(
    ll: float | None,
    pi: float | None,
    *,
    nonplastic: bool = False,
    fines: float | None = None,
    sand: float | None = None,
    gravel: float | None = None,
    cu: float | None = None,
    cc: float | None = None,
    ll_oven_dried: float | None = None,
    peat: bool = False,
) -> str | None:
    """A borderline symbol such as ``CL/CH`` when the results sit close to another group, else None.

    ASTM D2487 Note 1: when the test results show the soil is close to another group, two
    symbols separated by a slash may be given, the first being the one the standard assigns (its
    examples: CL/CH, GM/SM, SC/CL). "Close" is our choice: the symbol changes when the liquid
    limit or the plasticity index moves by ``BORDERLINE_LIMITS`` (water content points), or the
    fines or the gravel-sand split by ``BORDERLINE_FRACTIONS`` (percentage points).
    """
    if peat:
        return None

    def classify(
        ll_: float | None, pi_: float | None, fines_: float | None, sand_: float | None, gravel_: float | None
    ) -> str:
        return uscs(
            ll_,
            pi_,
            nonplastic=nonplastic,
            fines=fines_,
            sand=sand_,
            gravel=gravel_,
            cu=cu,
            cc=cc,
            ll_oven_dried=ll_oven_dried,
        ).symbol

    main = classify(ll, pi, fines, sand, gravel)
    t, f = BORDERLINE_LIMITS, BORDERLINE_FRACTIONS
    trials: list[tuple[float | None, float | None, float | None, float | None, float | None]] = []
    # Only a decision within reach of its threshold can change the symbol, so the trials are run
    # only for those (LL 50 and the A-line, whose slope is 0.73; PI 4 and 7; fines 5, 12 and 50;
    # gravel against sand).
    if not nonplastic and ll is not None and pi is not None and pi > 0.0:
        gap = abs(pi - a_line(ll))
        if abs(ll - HIGH_LL) <= t or gap <= 0.73 * t:
            trials += [(max(ll - t, 0.0), pi, fines, sand, gravel), (ll + t, pi, fines, sand, gravel)]
        if gap <= t or abs(pi - 4.0) <= t or abs(pi - 7.0) <= t:
            trials += [(ll, max(pi - t, 0.0), fines, sand, gravel), (ll, pi + t, fines, sand, gravel)]
    if fines is not None:
        split = None if sand is None and gravel is None else _coarse_split(fines, sand, gravel)
        if any(abs(fines - b) <= f for b in (CLEAN_MAX_FINES, DUAL_MAX_FINES, FINE_GRAINED_MIN_FINES)):
            for d in (-f, f):
                moved = min(max(fines + d, 0.0), 100.0)
                if split is None:
                    trials.append((ll, pi, moved, None, None))
                else:
                    s, g = split
                    scale = (100.0 - moved) / (s + g) if s + g > 0.0 else 0.0
                    trials.append((ll, pi, moved, s * scale, g * scale))
        if split is not None and fines < FINE_GRAINED_MIN_FINES + f and abs(split[0] - split[1]) <= 2.0 * f:
            s, g = split
            trials += [(ll, pi, fines, s + d, g - d) for d in (-f, f) if s + d >= 0.0 and g - d >= 0.0]
    others: list[str] = []
    for trial in trials:
        try:
            symbol = classify(*trial)
        except MissingInput:
            continue
        if symbol != main and symbol not in others:
            others.append(symbol)
    return "/".join([main, *others]) if others else None


def read_coefficients(r: Readings) -> tuple[float | None, float | None]:
    """Cu and Cc, given or computed from D10, D30, D60 (Cu = D60/D10, Cc = D30²/(D10·D60), D2487).

    The readings ``cu``, ``cc``, ``d10_mm``, ``d30_mm``, ``d60_mm`` as the ``classification``
    method and the Atterberg set both take them (one reading of them, here beside the rule that
    uses them); (None, None) when not given or refused (the refusal is recorded on ``r``).
    """
    cu = r.number("cu", name="coefficient of uniformity Cu", required=False, minimum=1.0)
    cc = r.number("cc", name="coefficient of curvature Cc", required=False, above=0.0)
    ds = [
        r.number(k, name=n, unit="mm", required=False, above=0.0)
        for k, n in (("d10_mm", "D10"), ("d30_mm", "D30"), ("d60_mm", "D60"))
    ]
    if any(r.has_errors_under(k) for k in ("cu", "cc", "d10_mm", "d30_mm", "d60_mm")):
        return None, None
    if (cu is None) != (cc is None):
        r.refuse("cc" if cc is None else "cu", "Cu and Cc go together: give both")
        return None, None
    given = [d for d in ds if d is not None]
    if given and len(given) < 3:
        missing = [k for k, d in zip(("d10_mm", "d30_mm", "d60_mm"), ds, strict=True) if d is None]
        r.refuse(missing[0], "D10, D30 and D60 go together: give all three")
        return None, None
    if len(given) == 3:
        d10, d30, d60 = given
        if not d10 <= d30 <= d60:
            r.refuse(
                "d30_mm",
                f"D10 ({fmt(d10, 'mm')}), D30 ({fmt(d30, 'mm')}) and D60 ({fmt(d60, 'mm')}) must increase",
            )
            return None, None
        cu_d, cc_d = d60 / d10, d30 * d30 / (d10 * d60)
        if cu is not None and cc is not None:
            for key, v, v_d in (("cu", cu, cu_d), ("cc", cc, cc_d)):
                if abs(v - v_d) > COEFFICIENT_TOLERANCE * v_d:
                    r.refuse(key, f"{key.capitalize()} ({fmt(v)}) does not match D10, D30, D60 ({v_d:.2f})")
                    return None, None
        else:
            cu, cc = cu_d, cc_d
    return cu, cc


# ==================================================================================================
# AASHTO
# ==================================================================================================


def group_index_value(fines: float, ll: float, pi: float, *, group: str | None = None) -> float:
    """The group index before rounding and before negative values are set to zero (M 145).

    GI = (F - 35)[0.2 + 0.005 (LL - 40)] + 0.01 (F - 15)(PI - 10); for A-2-6 and A-2-7 only the
    second (plasticity index) term; for A-1-a, A-1-b, A-3, A-2-4 and A-2-5 zero. With ``group``
    None the whole formula is used. The partial terms are not clipped (REFERENCES.md: the older
    form that caps them is not the current one).
    """
    if group in ZERO_GI_GROUPS:
        return 0.0
    pi_term = 0.01 * (fines - 15.0) * (pi - 10.0)
    if group in PI_TERM_ONLY_GROUPS:
        return pi_term
    return (fines - 35.0) * (0.2 + 0.005 * (ll - 40.0)) + pi_term


def group_index(fines: float, ll: float, pi: float, *, group: str | None = None) -> int:
    """The AASHTO group index: the M 145 formula for the group, zero when negative, half up."""
    value = group_index_value(fines, ll, pi, group=group)
    if value <= 0.0:
        return 0
    whole = math.floor(value)
    if abs(value - whole - 0.5) < 1e-9:  # near a half: decide on the decimal text (rounding.py)
        return int(round_half_up(value, 0))
    return whole + (value - whole > 0.5)


Tri = bool | None  # a criterion that holds, fails, or cannot be judged for want of an input


def _all(*criteria: Tri) -> Tri:
    if any(c is False for c in criteria):
        return False
    if any(c is None for c in criteria):
        return None
    return True


def _at_most(value: float | None, limit: float) -> Tri:
    return None if value is None else value <= limit


def _above(value: float | None, limit: float) -> Tri:
    return None if value is None else value > limit


def aashto(
    fines: float,
    ll: float | None,
    pi: float | None,
    *,
    passing_2mm: float | None = None,
    passing_0425mm: float | None = None,
    nonplastic: bool = False,
) -> Aashto:
    """The AASHTO M 145 group and group index, by left-to-right elimination in Table 2.

    ``fines`` is the % passing 75 µm; ``passing_2mm`` and ``passing_0425mm`` are needed only when
    an A-1 or A-3 group is still possible (PI <= 6, or nonplastic, with 25 % fines or less).
    Nonplastic soils (or PI <= 0) are "NP": they meet the A-1 "PI 6 max" and the A-3 "NP"
    criteria and count as PI 0 elsewhere; their liquid limit, when given, still places them
    (common practice). A nonplastic granular soil with no liquid limit is read as meeting
    "LL 40 max" and so, past A-1 and A-3, is A-2-4 with group index 0; the result's ``note`` says
    so (``NP_READING``: the laboratory's reading of Table 2, which has no column for it). Raises
    ``MissingInput`` when an undecided criterion needs an input (the liquid limit of a nonplastic
    fine soil, whose group index needs it).
    """
    if not 0.0 <= fines <= 100.0:
        raise ValueError(f"fines must be a percentage from 0 to 100, not {fines:g}")
    pi, nonplastic = _limits(ll, pi, nonplastic)
    if not nonplastic and pi is None:
        raise MissingInput(("plastic_limit",), "the plasticity index (or nonplastic) is needed")
    p = 0.0 if nonplastic else pi
    assert p is not None
    p2, p0425 = passing_2mm, passing_0425mm
    granular = fines <= GRANULAR_MAX_FINES
    if granular:
        # A-1-a, A-1-b and A-3 first, left to right; A-2 then takes every other granular soil.
        early: list[tuple[str, Tri]] = []
        if p <= 6.0 and fines <= 25.0:
            early.append(("A-1-a", _all(fines <= 15.0, _at_most(p2, 50.0), _at_most(p0425, 30.0))))
            early.append(("A-1-b", _at_most(p0425, 50.0)))
        if nonplastic and fines <= 10.0:
            early.append(("A-3", _above(p0425, 50.0)))
        for group, holds in early:
            if holds is None:
                raise MissingInput(*_missing_for(group, ll, p2, p0425))
            if holds:
                return Aashto(group, 0)
    if ll is None and nonplastic and granular:
        return Aashto("A-2-4", 0, NP_READING)
    if ll is None:
        raise MissingInput(*_missing_for("A-2-4" if granular else "A-4", ll, p2, p0425))
    high, clayey = ll > 40.0, p > 10.0  # "41 min" / "11 min" read as above 40 / above 10
    if granular:
        group = ("A-2-7" if high else "A-2-6") if clayey else ("A-2-5" if high else "A-2-4")
    elif not clayey:
        group = "A-5" if high else "A-4"
    elif not high:
        group = "A-6"
    else:
        group = "A-7-5" if p <= ll - 30.0 else "A-7-6"
    return Aashto(group, group_index(fines, ll, p, group=group))


def _missing_for(
    group: str, ll: float | None, p2: float | None, p0425: float | None
) -> tuple[tuple[str, ...], str]:
    """Which inputs kept ``group`` undecided, as readings keys and a sentence."""
    fields: list[str] = []
    if group in ("A-1-a", "A-1-b", "A-3"):
        if p2 is None and group == "A-1-a":
            fields.append("percent_passing_2mm")
        if p0425 is None:
            fields.append("percent_passing_0_425mm")
        return tuple(fields), f"the % passing 2 mm and 0.425 mm are needed to tell {group} from A-2"
    return ("liquid_limit",), f"the liquid limit is needed to place the soil in or next to {group}"
