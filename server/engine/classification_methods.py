"""Registers the ``classification`` method: USCS group (ASTM D2487-17) and AASHTO group (M 145).

The rules live in ``server.engine.classification``; this module reads the readings field by
field, refuses what cannot be right, and says in flags what it could not classify.

Readings (percentages by dry mass; limits in % water content; every key optional except as
the soil needs it)::

    {"liquid_limit": 41.0, "plastic_limit": 22.0, "nonplastic": false,
     "fines": 86.0, "sand": 12.0, "gravel": 2.0}

    {"liquid_limit": 34.1, "plasticity_index": 17.6,
     "fines": 21.9, "sand": 48.1, "gravel": 30.0, "cu": 48.0, "cc": 1.6,
     "percent_passing_2mm": 62.0, "percent_passing_0_425mm": 40.0}

    {"nonplastic": true, "fines": 3.0, "sand": 91.0, "gravel": 6.0,
     "d10_mm": 0.11, "d30_mm": 0.2, "d60_mm": 0.34,
     "percent_passing_2mm": 90.0, "percent_passing_0_425mm": 71.0}

    {"liquid_limit": 62.0, "plastic_limit": 38.0, "liquid_limit_oven_dried": 41.0,
     "fines": 93.0, "sand": 7.0, "gravel": 0.0}

    {"peat": true}

- ``liquid_limit`` with ``plastic_limit`` or ``plasticity_index`` (both may be given; they must
  agree within 1, the rounding of reported limits, and the PI given is used). A plastic limit
  equal to or above the liquid limit makes the soil nonplastic (ASTM D4318), with a warning.
- ``nonplastic``: true when the limits could not be determined (no limits needed then; a liquid
  limit, if given, still places the soil in AASHTO; without one a granular soil is read as meeting
  M 145's "LL 40 max", the laboratory's reading, and ``aashto_note`` says so).
- ``fines``, ``sand``, ``gravel``: % passing 75 µm, 4.75 mm to 75 µm, 75 mm to 4.75 mm; they
  must add up to 100 within 1. When one of sand and gravel is missing it is the remainder.
  ``percent_passing_0_075mm`` is the same quantity as ``fines`` (either or both, agreeing).
  Without ``fines`` the soil is taken as fine-grained and named from the chart alone.
- ``cu`` and ``cc``, or ``d10_mm``, ``d30_mm``, ``d60_mm`` (Cu = D60/D10, Cc = D30²/(D10 D60)):
  needed for a coarse soil with 12 % fines or less.
- ``liquid_limit_oven_dried``: organic when below 0.75 of ``liquid_limit`` (ASTM D2487).
- ``percent_passing_2mm``, ``percent_passing_0_425mm``: AASHTO's No. 10 and No. 40 sieves, needed
  only while an A-1 or A-3 group is still possible.
- ``peat``: true for a highly organic soil identified by eye (PT; ASTM D2488).

Results: ``uscs_symbol``, ``uscs_name``, ``uscs_borderline`` (``"CL/CH"`` or None, ASTM D2487
Note 1), ``aashto_group``, ``group_index`` (a whole number, as M 145 defines it),
``plasticity_chart`` (``plasticity_chart.chart_position`` plus ``beyond_u_line``, or None when
nonplastic or without limits), ``nonplastic``, ``plasticity_index`` (as used, when plastic),
``organic`` and ``oven_dried_ll_ratio`` (when the oven-dried liquid limit is given), and
``aashto_note`` (text, only when the group rests on a reading the table does not spell out:
``classification.NP_READING`` for a nonplastic granular soil with no liquid limit). Example::

    {"uscs_symbol": "CL", "uscs_name": "Lean clay", "uscs_borderline": null,
     "aashto_group": "A-7-6", "group_index": 17, "nonplastic": false, "plasticity_index": 19.0,
     "plasticity_chart": {"liquid_limit": 41.0, "plasticity_index": 19.0, "a_line_pi": 15.33,
                          "u_line_pi": 29.7, "above_a_line": true, "above_u_line": false,
                          "symbol": "CL", "beyond_u_line": false}}

Flags: ``plastic-limit-not-below-liquid-limit`` (warning), ``above-u-line`` (warning),
``near-classification-boundary`` (warning), ``aashto-not-classified`` (warning: what is missing).
"""

from __future__ import annotations

from dataclasses import dataclass

from server.engine import classification as clf
from server.engine.contract import Outcome, method
from server.engine.plasticity_chart import beyond_u_line, chart_position
from server.engine.readings import Readings, fmt

SUM_TOLERANCE = 1.0  # percentage points: fines + sand + gravel within 100 ± 1 (rounded fractions)
PI_TOLERANCE = 1.0  # PI given vs LL - PL: the rounding of two reported whole-number limits
SAME_QUANTITY = 0.05  # fines vs percent passing 0.075 mm: the same number typed twice
MAX_LIMIT = 1000.0  # % water content; bentonites reach several hundred (common practice)

USCS_KEYS = (
    "liquid_limit",
    "plastic_limit",
    "plasticity_index",
    "nonplastic",
    "peat",
    "fines",
    "percent_passing_0_075mm",
    "sand",
    "gravel",
    "cu",
    "cc",
    "d10_mm",
    "d30_mm",
    "d60_mm",
    "liquid_limit_oven_dried",
)
AASHTO_KEYS = (
    "liquid_limit",
    "plastic_limit",
    "plasticity_index",
    "nonplastic",
    "fines",
    "sand",
    "gravel",
    "percent_passing_0_075mm",
    "percent_passing_2mm",
    "percent_passing_0_425mm",
)


@dataclass
class _Limits:
    ll: float | None = None
    pi: float | None = None
    nonplastic: bool = False
    given: bool = False  # any limit (or the nonplastic mark) was given


@dataclass
class _Grading:
    fines: float | None = None
    sand: float | None = None
    gravel: float | None = None
    passing_2mm: float | None = None
    passing_0425mm: float | None = None
    cu: float | None = None
    cc: float | None = None


def _boolean(r: Readings, key: str, *, name: str) -> bool:
    """A true/false mark (JSON boolean); absent is false."""
    if not r.present(key):
        return False
    raw = r.data[key]
    if not isinstance(raw, bool):
        r.refuse(key, f"{name} must be true or false, not {raw!r}")
        return False
    return raw


def _percent(r: Readings, key: str, name: str) -> float | None:
    return r.number(key, name=name, unit="%", required=False, minimum=0.0, maximum=100.0)


def _read_limits(r: Readings, out: Outcome) -> _Limits:
    """Liquid limit, plasticity index (from PL or given) and the nonplastic mark (ASTM D4318)."""
    nonplastic = _boolean(r, "nonplastic", name="nonplastic")
    ll = r.number("liquid_limit", name="liquid limit", unit="%", required=False, above=0.0, maximum=MAX_LIMIT)
    pl = r.number(
        "plastic_limit", name="plastic limit", unit="%", required=False, minimum=0.0, maximum=MAX_LIMIT
    )
    pi = r.number("plasticity_index", name="plasticity index", required=False, minimum=0.0, maximum=MAX_LIMIT)
    given = nonplastic or any(r.present(k) for k in ("liquid_limit", "plastic_limit", "plasticity_index"))
    if nonplastic:
        return _Limits(ll=ll, nonplastic=True, given=True)
    if _errors_in(r, ("liquid_limit", "plastic_limit", "plasticity_index")):
        return _Limits(given=given)
    if ll is None and (pl is not None or pi is not None):
        r.refuse("liquid_limit", "liquid limit is required with a plastic limit or plasticity index")
        return _Limits(given=True)
    if ll is not None and pl is None and pi is None:
        r.refuse(
            "plastic_limit",
            "plastic limit (or plasticity index) is required with a liquid limit, "
            "or mark the soil nonplastic",
        )
        return _Limits(given=True)
    if ll is None:
        return _Limits(given=given)
    if pl is not None:
        if pl >= ll:
            out.flag(
                "plastic-limit-not-below-liquid-limit",
                "warning",
                f"the plastic limit ({fmt(pl)}) is not below the liquid limit ({fmt(ll)}): "
                "the soil is classified as nonplastic (ASTM D4318)",
            )
            return _Limits(ll=ll, nonplastic=True, given=True)
        if pi is not None and abs(pi - (ll - pl)) > PI_TOLERANCE:
            r.refuse(
                "plasticity_index",
                f"plasticity index ({fmt(pi)}) does not match liquid limit minus "
                f"plastic limit ({fmt(ll - pl)})",
            )
            return _Limits(given=True)
        if pi is None:
            pi = ll - pl
    assert pi is not None
    if pi <= 0.0:
        return _Limits(ll=ll, nonplastic=True, given=True)
    return _Limits(ll=ll, pi=pi, given=True)


def _read_fractions(r: Readings, g: _Grading) -> None:
    """Fines, sand and gravel: each 0-100 %, together 100 % (one of sand/gravel may be left out)."""
    fines = _percent(r, "fines", "fines")
    p0075 = _percent(r, "percent_passing_0_075mm", "percent passing 0.075 mm")
    if fines is not None and p0075 is not None and abs(fines - p0075) > SAME_QUANTITY:
        r.refuse(
            "percent_passing_0_075mm",
            f"percent passing 0.075 mm ({fmt(p0075, '%')}) differs from the "
            f"fines ({fmt(fines, '%')}); they are the same quantity",
        )
        return
    fines = fines if fines is not None else p0075
    sand = _percent(r, "sand", "sand")
    gravel = _percent(r, "gravel", "gravel")
    if fines is None:
        if sand is not None or gravel is not None:
            r.refuse("fines", "fines (percent passing 0.075 mm) are required with sand or gravel")
        return
    if sand is not None and gravel is not None:
        total = fines + sand + gravel
        if abs(total - 100.0) > SUM_TOLERANCE:
            r.refuse(
                "gravel",
                f"fines, sand and gravel add up to {fmt(total, '%')}, not 100 % "
                f"(within {fmt(SUM_TOLERANCE)})",
            )
            return
    elif sand is not None or gravel is not None:
        key, value = ("sand", sand) if sand is not None else ("gravel", gravel)
        assert value is not None
        if fines + value > 100.0 + SUM_TOLERANCE:
            r.refuse(key, f"{key} ({fmt(value, '%')}) and fines ({fmt(fines, '%')}) add up to over 100 %")
            return
        rest = max(0.0, 100.0 - fines - value)
        sand, gravel = (value, rest) if key == "sand" else (rest, value)
    g.fines, g.sand, g.gravel = fines, sand, gravel


def _read_sieves(r: Readings, g: _Grading) -> None:
    """AASHTO's % passing 2 mm and 0.425 mm, in order with the fines and the gravel."""
    p2 = _percent(r, "percent_passing_2mm", "percent passing 2 mm")
    p0425 = _percent(r, "percent_passing_0_425mm", "percent passing 0.425 mm")
    if p2 is not None and p0425 is not None and p0425 > p2:
        r.refuse(
            "percent_passing_0_425mm",
            f"percent passing 0.425 mm ({fmt(p0425, '%')}) is above the percent passing 2 mm "
            f"({fmt(p2, '%')}): a finer sieve passes less",
        )
        return
    if g.fines is not None:
        sieves = (("percent_passing_0_425mm", p0425, "0.425 mm"), ("percent_passing_2mm", p2, "2 mm"))
        for key, value, size in sieves:
            if value is not None and value < g.fines - SAME_QUANTITY:
                r.refuse(
                    key,
                    f"percent passing {size} ({fmt(value, '%')}) is below the fines "
                    f"({fmt(g.fines, '%')}): a finer sieve passes less",
                )
                return
    if p2 is not None and g.gravel is not None and p2 > 100.0 - g.gravel + SUM_TOLERANCE:
        r.refuse(
            "percent_passing_2mm",
            f"percent passing 2 mm ({fmt(p2, '%')}) is above the "
            f"{fmt(100.0 - g.gravel, '%')} finer than 4.75 mm (100 % - gravel)",
        )
        return
    g.passing_2mm, g.passing_0425mm = p2, p0425


def _require(r: Readings, lim: _Limits, g: _Grading, peat: bool) -> None:
    """Refuse what this soil's USCS rule needs and is missing, naming the rule (ASTM D2487).

    A requirement that hangs on a refused field (the fines, say) waits until that one is right.
    """
    fraction_keys = ("fines", "percent_passing_0_075mm", "sand", "gravel")
    if peat or _errors_in(r, fraction_keys):
        return
    fines = g.fines
    coarse = fines is not None and fines < clf.FINE_GRAINED_MIN_FINES
    if (fines is None or fines >= clf.CLEAN_MAX_FINES) and not lim.given:
        where = f"a soil with {fmt(fines, '%')} fines" if fines is not None else "a fine-grained soil"
        r.refuse(
            "liquid_limit",
            f"liquid and plastic limits are required to classify {where} "
            "(ASTM D2487), or mark the soil nonplastic",
        )
    if fines is None:
        return
    if g.sand is None and g.gravel is None:
        if coarse:
            r.refuse(
                "sand",
                f"sand and gravel are required for a coarse-grained soil ({fmt(fines, '%')} "
                "fines): they decide gravel or sand (ASTM D2487)",
            )
        elif 100.0 - fines >= clf.MINOR_FRACTION:
            r.refuse(
                "sand",
                f"sand and gravel are required to name a soil with {fmt(100.0 - fines, '%')} "
                "retained on 0.075 mm (ASTM D2487 group names)",
            )
    coefficient_keys = ("cu", "cc", "d10_mm", "d30_mm", "d60_mm")
    if (
        coarse
        and fines <= clf.DUAL_MAX_FINES
        and (g.cu is None or g.cc is None)
        and not _errors_in(r, coefficient_keys)
    ):
        r.refuse(
            "cu",
            f"Cu and Cc (or D10, D30, D60) are required for a coarse soil with {fmt(fines, '%')} "
            "fines: they decide well or poorly graded (ASTM D2487)",
        )


def _errors_in(r: Readings, keys: tuple[str, ...]) -> bool:
    """True when a refusal was recorded at or below one of these fields."""
    return bool(r.errors) and any(r.has_errors_under(k) for k in keys)


@method(
    "classification", title="Soil classification (USCS and AASHTO)", standard="ASTM D2487-17; AASHTO M 145-91"
)
def classification_method(r: Readings, out: Outcome) -> None:
    """USCS symbol and group name, AASHTO group and group index, and the chart position.

    Refused readings leave the classification out; AASHTO is left out with a warning when the
    readings lack what it needs (the sieve data of a granular soil, say) but USCS can be given.
    """
    peat = _boolean(r, "peat", name="peat")
    lim = _read_limits(r, out)
    g = _Grading()
    _read_fractions(r, g)
    _read_sieves(r, g)
    g.cu, g.cc = clf.read_coefficients(r)
    ll_od = r.number(
        "liquid_limit_oven_dried",
        name="oven-dried liquid limit",
        unit="%",
        required=False,
        above=0.0,
        maximum=MAX_LIMIT,
    )
    if ll_od is not None and lim.ll is None and not _errors_in(r, ("liquid_limit",)):
        r.refuse("liquid_limit", "liquid limit (not dried) is required with the oven-dried liquid limit")
        ll_od = None
    _require(r, lim, g, peat)

    if lim.given and not _errors_in(r, ("liquid_limit", "plastic_limit", "plasticity_index", "nonplastic")):
        out.results["nonplastic"] = lim.nonplastic
        if lim.pi is not None and lim.ll is not None:
            out.results["plasticity_index"] = lim.pi
            position = chart_position(lim.ll, lim.pi)
            position["beyond_u_line"] = beyond_u_line(lim.ll, lim.pi)
            out.results["plasticity_chart"] = position
            if position["beyond_u_line"]:
                out.flag(
                    "above-u-line",
                    "warning",
                    f"the point (LL {fmt(lim.ll)}, PI {fmt(lim.pi)}) lies beyond the U-line, the "
                    "upper bound of natural soils (ASTM D2487 Fig. 4): check the limits",
                )
        else:
            out.results["plasticity_chart"] = None
    if ll_od is not None and lim.ll is not None:
        out.results["oven_dried_ll_ratio"] = ll_od / lim.ll
        out.results["organic"] = clf.is_organic(lim.ll, ll_od)

    if not _errors_in(r, USCS_KEYS):
        _classify_uscs(r, out, lim, g, ll_od, peat)
    if not _errors_in(r, AASHTO_KEYS):
        _classify_aashto(out, lim, g)


def _classify_uscs(
    r: Readings, out: Outcome, lim: _Limits, g: _Grading, ll_od: float | None, peat: bool
) -> None:
    try:
        group = clf.uscs(
            lim.ll,
            lim.pi,
            nonplastic=lim.nonplastic,
            fines=g.fines,
            sand=g.sand,
            gravel=g.gravel,
            cu=g.cu,
            cc=g.cc,
            ll_oven_dried=ll_od,
            peat=peat,
        )
        borderline = clf.uscs_borderline(
            lim.ll,
            lim.pi,
            nonplastic=lim.nonplastic,
            fines=g.fines,
            sand=g.sand,
            gravel=g.gravel,
            cu=g.cu,
            cc=g.cc,
            ll_oven_dried=ll_od,
            peat=peat,
        )
    except clf.MissingInput as missing:  # _require names these first; kept as a safety net
        r.refuse(missing.fields[0], str(missing))
        return
    out.results["uscs_symbol"] = group.symbol
    out.results["uscs_name"] = group.name
    out.results["uscs_borderline"] = borderline
    if borderline is not None:
        out.flag(
            "near-classification-boundary",
            "warning",
            f"the results sit close to another group: borderline {borderline} (ASTM D2487 Note 1)",
        )


def _classify_aashto(out: Outcome, lim: _Limits, g: _Grading) -> None:
    if g.fines is None:
        out.flag(
            "aashto-not-classified",
            "warning",
            "AASHTO group not given: the fines (percent passing 0.075 mm) are needed",
        )
        return
    if not lim.given:
        out.flag(
            "aashto-not-classified",
            "warning",
            "AASHTO group not given: the liquid and plastic limits (or nonplastic) are needed",
        )
        return
    try:
        group = clf.aashto(
            g.fines,
            lim.ll,
            lim.pi,
            passing_2mm=g.passing_2mm,
            passing_0425mm=g.passing_0425mm,
            nonplastic=lim.nonplastic,
        )
    except clf.MissingInput as missing:
        out.flag("aashto-not-classified", "warning", f"AASHTO group not given: {missing}")
        return
    out.results["aashto_group"] = group.group
    out.results["group_index"] = group.group_index
    if group.note is not None:
        out.results["aashto_note"] = group.note
