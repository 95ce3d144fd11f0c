"""Registers the Atterberg methods: water content, the three liquid-limit methods, the plastic
limit, and the full Atterberg set with its indices, chart position and USCS group.

Each single method writes the same result keys as its part of the full set (DESIGN.md
section 3), so the bench page and the report read one shape whichever way a test was run.
"""

from __future__ import annotations

from dataclasses import dataclass

from server.engine import classification as clf
from server.engine import plasticity_chart
from server.engine.contract import Outcome, method
from server.engine.descriptors import describe, plasticity_basis
from server.engine.equipment import check_equipment
from server.engine.indices import (
    activity,
    consistency_index,
    is_nonplastic,
    liquidity_index,
    plasticity_index,
    reported_limit,
)
from server.engine.interpretation import interpret
from server.engine.liquid_limit import CONE, LL_METHODS, MULTIPOINT, ONE_POINT, liquid_limit_part
from server.engine.plastic_limit import plastic_limit_part
from server.engine.readings import Readings
from server.engine.uncertainty import DEFAULT_BALANCE, Balance, expanded, read_balance, u_difference, u_index
from server.engine.water_content import water_content_part

_D4318 = "ASTM D4318-17"

PLASTICITY_TERMS = ("uscs", "bs5930")
"""The Atterberg set's ``plasticity_terms`` reading: ``"uscs"`` (the default: the D2487 chart
only) or ``"bs5930"`` (also the BS 5930 chart's symbol and words, for jobs tested to BS / ISO)."""

SUM_TOLERANCE = 1.0  # percentage points: fines + sand + gravel within 100 ± 1 (rounded fractions)


def _relabel(r: Readings, label: str) -> Readings:
    """The same readings with a human prefix for messages ("liquid limit, trial 2: ...")."""
    return Readings(r.data, r.loc, label, r.errors, r.capacity)


def _not_determinable(r: Readings) -> bool:
    """The optional ``"not_determinable": true`` a technician sets when the soil cannot be tested
    (the thread will not roll, the groove will not close at any water content)."""
    if not r.present("not_determinable"):
        return False
    raw = r.data["not_determinable"]
    if not isinstance(raw, bool):
        r.refuse("not_determinable", f"not determinable must be true or false, not {raw!r}")
        return False
    return raw


def _common(
    r: Readings, out: Outcome, inherited: Balance = DEFAULT_BALANCE, *, part: bool = False
) -> Balance:
    """The balance of this part; a part's own equipment list is checked here (the whole
    set's is checked for every method by ``contract.evaluate``)."""
    if part:
        check_equipment(r, out, out.tested_on)
    return read_balance(r, inherited)


# -- single methods ------------------------------------------------------------------------------


@method("water-content", title="Water content", standard="ASTM D2216-19; ISO 17892-1:2014")
def water_content_method(r: Readings, out: Outcome) -> None:
    balance = _common(r, out)
    water_content_part(_relabel(r, "water content"), out, balance)


@method("ll-cup-multipoint", title="Liquid limit, cup, multipoint", standard=f"{_D4318} Method A")
def ll_multipoint_method(r: Readings, out: Outcome) -> None:
    _liquid_limit_alone(MULTIPOINT, r, out)


@method("ll-cup-one-point", title="Liquid limit, cup, one-point", standard=f"{_D4318} Method B")
def ll_one_point_method(r: Readings, out: Outcome) -> None:
    _liquid_limit_alone(ONE_POINT, r, out)


@method("ll-cone", title="Liquid limit, fall cone", standard="BS 1377-2:1990 cl. 4.3; ISO 17892-12:2018")
def ll_cone_method(r: Readings, out: Outcome) -> None:
    _liquid_limit_alone(CONE, r, out)


def _liquid_limit_alone(method_id: str, r: Readings, out: Outcome) -> None:
    balance = _common(r, out)
    if _not_determinable(r):
        out.results["liquid_limit_method"] = method_id
        out.results["nonplastic"] = True
        return
    liquid_limit_part(method_id, _relabel(r, "liquid limit"), out, balance)


@method("plastic-limit", title="Plastic limit", standard=f"{_D4318}; BS 1377-2:1990 cl. 5")
def plastic_limit_method(r: Readings, out: Outcome) -> None:
    balance = _common(r, out)
    if _not_determinable(r):
        out.results["nonplastic"] = True
        return
    plastic_limit_part(_relabel(r, "plastic limit"), out, balance)


# -- the full set --------------------------------------------------------------------------------


@method(
    "atterberg",
    title="Atterberg limits and indices",
    standard=f"{_D4318}; BS 1377-2:1990 cl. 4-5; ISO 17892-12:2018; ASTM D2487-17",
)
def atterberg_method(r: Readings, out: Outcome) -> None:
    """Water content, liquid and plastic limits, the indices, chart position and USCS group.

    Non-plastic (``nonplastic`` true, no PI, LI, CI or activity) when the liquid or plastic
    limit is marked not determinable or the plastic limit is equal to or above the liquid limit
    (ASTM D4318-17). Parts refused or still incomplete leave their derived results out.

    Readings beside the three parts (all optional): ``clay_fraction``, ``fines``, ``sand``,
    ``gravel`` (% by dry mass); ``cu`` and ``cc``, or ``d10_mm``, ``d30_mm``, ``d60_mm``, read and
    checked as the ``classification`` method reads them (needed to name a coarse soil with 12 %
    fines or less); ``plasticity_terms``: ``"uscs"`` (default) or ``"bs5930"``.

    Classification results (ASTM D2487-17 through ``classification.uscs``, one implementation):

    - ``uscs_symbol``: for a fine-grained soil (50 % fines or more, or fines not given) from the
      chart as before; for a coarse soil only with its group name. Nonplastic fines are ML.
    - ``uscs_name``: the group name (``Sandy lean clay with gravel``), given only when every
      input its rule needs is among the readings (fines; sand and gravel unless under 15 % is
      retained on 75 µm; for a coarse soil the split, and Cu and Cc at 12 % fines or less);
    - ``uscs_name_missing``: else, the readings keys still needed, in the rule's order (for
      example ``["sand", "gravel"]``); a ``uscs-name-not-given`` warning says the same when any
      fraction or coefficient was entered (a set without any is not expected to be named), or
      when the fractions do not add up (``fractions-do-not-sum``, no ``uscs_name_missing`` then);
    - ``plasticity_basis``: with the plasticity descriptor, ``{"table": ..., "end_points": ...}``,
      the table it follows and its rule at shared end points (``descriptors.plasticity_basis``),
      plus ``"bs5930"`` (``plasticity_chart.BS_BASIS``: the BS chart's line, ranges and end-point
      rule) when the BS 5930 terms were asked for;
    - with ``plasticity_terms`` ``"bs5930"``: ``bs_plasticity_symbol`` (``CI``, ``MH``; the BS 5930
      chart, ``plasticity_chart.bs_chart_symbol``) and ``bs_plasticity_term`` (``clay of
      intermediate plasticity``; ``non-plastic`` and no symbol for a nonplastic soil). The USCS
      results are given either way.
    """
    balance = _common(r, out)

    w = None
    wr = r.child("water_content", label="water content", required=False)
    if wr is not None:
        b = _common(wr, out, balance, part=True)
        w = water_content_part(wr, out, b)

    ll = None
    ll_np = False
    lr = r.child("liquid_limit", label="liquid limit")
    if lr is not None:
        b = _common(lr, out, balance, part=True)
        ll_method = lr.choice("method", name="liquid limit method", choices=LL_METHODS)
        if _not_determinable(lr):
            ll_np = True
            if ll_method is not None:
                out.results["liquid_limit_method"] = ll_method
        elif ll_method is not None:
            ll = liquid_limit_part(ll_method, lr, out, b)

    pl = None
    pl_np = False
    pr = r.child("plastic_limit", label="plastic limit")
    if pr is not None:
        b = _common(pr, out, balance, part=True)
        if _not_determinable(pr):
            pl_np = True
        else:
            pl = plastic_limit_part(pr, out, b)

    clay = r.number(
        "clay_fraction", name="clay fraction", unit="%", required=False, minimum=0.0, maximum=100.0
    )
    fines = r.number("fines", name="fines", unit="%", required=False, minimum=0.0, maximum=100.0)
    sand = r.number("sand", name="sand", unit="%", required=False, minimum=0.0, maximum=100.0)
    gravel = r.number("gravel", name="gravel", unit="%", required=False, minimum=0.0, maximum=100.0)
    if clay is not None and fines is not None and clay > fines:
        r.refuse("clay_fraction", f"clay fraction ({clay:g} %) is above the fines ({fines:g} %)")
        clay = None
    if clay is not None:
        out.results["clay_fraction"] = clay
    for key, value in (("fines", fines), ("sand", sand), ("gravel", gravel)):
        if value is not None:
            out.results[key] = value
    cu, cc = clf.read_coefficients(r)
    grading = _Grading(fines, sand, gravel, cu, cc, _fractions_add_up(out, fines, sand, gravel))
    terms = (  # refused: recorded at its field, and the set computed as by default meanwhile
        r.choice("plasticity_terms", name="plasticity terms", choices=PLASTICITY_TERMS, default="uscs")
        or "uscs"
    )

    if ll_np or pl_np:
        out.results["nonplastic"] = True
        _classify(out, reported_limit(ll.value) if ll is not None else None, None, grading, terms)
        _finish(out)
        return
    if ll is None or pl is None:
        _finish(out)
        return
    if is_nonplastic(ll.value, pl.value):
        out.results["nonplastic"] = True
        out.flag(
            "plastic-limit-not-below-liquid-limit",
            "warning",
            f"the plastic limit ({reported_limit(pl.value):.0f}) is not below the liquid limit "
            f"({reported_limit(ll.value):.0f}): the soil is reported non-plastic",
        )
        _classify(out, reported_limit(ll.value), None, grading, terms)
        _finish(out)
        return

    out.results["nonplastic"] = False
    llr = reported_limit(ll.value)
    plr = reported_limit(pl.value)
    pi = plasticity_index(llr, plr)
    u = out.results.setdefault("uncertainty", {})
    out.results["plasticity_index"] = pi
    u["plasticity_index"] = expanded(u_difference(ll.u, pl.u))
    if w is not None:
        out.results["liquidity_index"] = liquidity_index(w.value, llr, plr)
        out.results["consistency_index"] = consistency_index(w.value, llr, plr)
        u_li = u_index(w.value, llr, plr, w.u, ll.u, pl.u)
        u["liquidity_index"] = expanded(u_li)
        u["consistency_index"] = expanded(u_li)
        if w.value > ll.value:
            out.flag(
                "water-content-above-liquid-limit",
                "warning",
                f"the natural water content ({w.value:.1f} %) is above the liquid limit ({llr:.0f}): "
                "the soil may be sensitive; check the sample and the strength tests",
            )
    if clay:  # no activity for a clay fraction of zero (A = PI / 0 has no meaning)
        out.results["activity"] = activity(pi, clay)
        u["activity"] = expanded(u_difference(ll.u, pl.u) / clay)
    position = plasticity_chart.chart_position(llr, pi)
    out.results["plasticity_chart"] = position
    _classify(out, llr, pi, grading, terms)
    if plasticity_chart.beyond_u_line(llr, pi):
        out.flag(
            "above-u-line",
            "warning",
            f"the point (LL {llr:.0f}, PI {pi:.0f}) lies beyond the U-line, the upper bound of "
            "natural soils (ASTM D2487 Fig. 4): check the readings",
        )
    _finish(out)


@dataclass(frozen=True)
class _Grading:
    """The set's fractions (%, by dry mass) and Cu, Cc; ``add_up`` false when they contradict."""

    fines: float | None
    sand: float | None
    gravel: float | None
    cu: float | None
    cc: float | None
    add_up: bool

    @property
    def given(self) -> bool:
        return any(v is not None for v in (self.fines, self.sand, self.gravel, self.cu, self.cc))


def _fractions_add_up(out: Outcome, fines: float | None, sand: float | None, gravel: float | None) -> bool:
    """False, with a ``fractions-do-not-sum`` warning, when the fractions given cannot be one soil's:
    all three away from 100 % by more than ``SUM_TOLERANCE``, or two of them above it."""
    given = [v for v in (fines, sand, gravel) if v is not None]
    total = sum(given)
    if len(given) == 3 and abs(total - 100.0) > SUM_TOLERANCE:
        out.flag(
            "fractions-do-not-sum", "warning", f"fines, sand and gravel add up to {total:g} %, not 100 %"
        )
        return False
    if len(given) == 2 and total > 100.0 + SUM_TOLERANCE:
        out.flag("fractions-do-not-sum", "warning", f"the fractions given add up to {total:g} %, over 100 %")
        return False
    return True


_MISSING_WORDS = {"fines": "fines", "sand": "sand", "gravel": "gravel", "cu": "Cu", "cc": "Cc"}


def _classify(out: Outcome, ll: float | None, pi: float | None, g: _Grading, terms: str) -> None:
    """The USCS symbol and group name (``classification.uscs``, ASTM D2487-17) and, when asked,
    the BS 5930 chart terms. ``pi`` None is nonplastic (ML fines, DESIGN.md section 8).

    The symbol of a fine-grained soil (50 % fines or more, or fines not given) comes from the
    chart alone, as before; a coarse soil's needs its fractions. The group name is given only
    when every input its rule needs is there; else ``uscs_name_missing`` lists the readings keys
    still needed, and a ``uscs-name-not-given`` warning says so when any fraction was entered.
    """
    nonplastic = pi is None
    if g.fines is None or g.fines >= clf.FINE_GRAINED_MIN_FINES:
        out.results["uscs_symbol"] = clf.uscs(ll, pi, nonplastic=nonplastic).symbol
    if terms == "bs5930":
        _bs_terms(out, ll, pi)
    if not g.add_up:
        out.flag(
            "uscs-name-not-given",
            "warning",
            "USCS group name not given: the fines, sand and gravel do not add up (ASTM D2487 names "
            "the soil from them)",
        )
        return
    missing = clf.uscs_missing(
        ll, pi, nonplastic=nonplastic, fines=g.fines, sand=g.sand, gravel=g.gravel, cu=g.cu, cc=g.cc
    )
    if missing:
        out.results["uscs_name_missing"] = list(missing)
        if g.given:
            words = ", ".join(_MISSING_WORDS.get(k, k) for k in missing)
            out.flag(
                "uscs-name-not-given",
                "warning",
                f"USCS group name not given: {words} needed (ASTM D2487 Fig. 1, fine-grained, or "
                "Fig. 3, coarse-grained); Cu and Cc may be given as D10, D30 and D60",
            )
        return
    group = clf.uscs(
        ll, pi, nonplastic=nonplastic, fines=g.fines, sand=g.sand, gravel=g.gravel, cu=g.cu, cc=g.cc
    )
    out.results["uscs_symbol"] = group.symbol
    out.results["uscs_name"] = group.name


def _bs_terms(out: Outcome, ll: float | None, pi: float | None) -> None:
    """BS 5930 chart symbol (``CI``) and words (``clay of intermediate plasticity``); a nonplastic
    soil has no point on the chart and is described as non-plastic (BS 5930, from memory)."""
    if pi is None or ll is None:
        out.results["bs_plasticity_term"] = "non-plastic"
        return
    out.results["bs_plasticity_symbol"] = plasticity_chart.bs_chart_symbol(ll, pi)
    out.results["bs_plasticity_term"] = plasticity_chart.bs_plasticity_term(ll, pi)


def _finish(out: Outcome) -> None:
    """Descriptors (with the plasticity table and its end-point rule) and the indicative
    interpretation, from what the set produced."""
    descriptors = describe(out.results)
    if descriptors:
        out.results["descriptors"] = descriptors
    if "plasticity" in descriptors:
        basis = plasticity_basis()
        if "bs_plasticity_term" in out.results:
            basis["bs5930"] = plasticity_chart.BS_BASIS
        out.results["plasticity_basis"] = basis
    notes = interpret(out.results)
    if notes:
        out.results["interpretation"] = notes
