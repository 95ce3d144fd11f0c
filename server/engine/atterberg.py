"""Registers the Atterberg methods: water content, the three liquid-limit methods, the plastic
limit, and the full Atterberg set with its indices, chart position and classification symbol.

Each single method writes the same result keys as its part of the full set (DESIGN.md
section 3), so the bench page and the report read one shape whichever way a test was run.
"""

from __future__ import annotations

from server.engine import plasticity_chart
from server.engine.contract import Outcome, method
from server.engine.descriptors import describe
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

@method("atterberg", title="Atterberg limits and indices",
        standard=f"{_D4318}; BS 1377-2:1990 cl. 4-5; ISO 17892-12:2018; ASTM D2487-17")
def atterberg_method(r: Readings, out: Outcome) -> None:
    """Water content, liquid and plastic limits, the indices, chart position and USCS symbol.

    Non-plastic (``nonplastic`` true, no PI, LI, CI or activity) when the liquid or plastic
    limit is marked not determinable or the plastic limit is equal to or above the liquid limit
    (ASTM D4318-17). Parts refused or still incomplete leave their derived results out.
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

    clay = r.number("clay_fraction", name="clay fraction", unit="%", required=False,
                    minimum=0.0, maximum=100.0)
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
    if fines is not None and sand is not None and gravel is not None:
        total = fines + sand + gravel
        if abs(total - 100.0) > 1.0:
            out.flag("fractions-do-not-sum", "warning",
                     f"fines, sand and gravel add up to {total:g} %, not 100 %")

    fine_soil = fines is None or fines >= 50.0
    if ll_np or pl_np:
        out.results["nonplastic"] = True
        if fine_soil:
            out.results["uscs_symbol"] = plasticity_chart.chart_symbol(
                reported_limit(ll.value) if ll is not None else 0.0, 0.0)
        _finish(out)
        return
    if ll is None or pl is None:
        _finish(out)
        return
    if is_nonplastic(ll.value, pl.value):
        out.results["nonplastic"] = True
        out.flag("plastic-limit-not-below-liquid-limit", "warning",
                 f"the plastic limit ({reported_limit(pl.value):.0f}) is not below the liquid limit "
                 f"({reported_limit(ll.value):.0f}): the soil is reported non-plastic")
        if fine_soil:
            out.results["uscs_symbol"] = plasticity_chart.chart_symbol(reported_limit(ll.value), 0.0)
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
            out.flag("water-content-above-liquid-limit", "warning",
                     f"the natural water content ({w.value:.1f} %) is above the liquid limit ({llr:.0f}): "
                     "the soil may be sensitive; check the sample and the strength tests")
    if clay:  # no activity for a clay fraction of zero (A = PI / 0 has no meaning)
        out.results["activity"] = activity(pi, clay)
        u["activity"] = expanded(u_difference(ll.u, pl.u) / clay)
    position = plasticity_chart.chart_position(llr, pi)
    out.results["plasticity_chart"] = position
    if fine_soil:
        out.results["uscs_symbol"] = plasticity_chart.chart_symbol(llr, pi)
    if plasticity_chart.beyond_u_line(llr, pi):
        out.flag("above-u-line", "warning",
                 f"the point (LL {llr:.0f}, PI {pi:.0f}) lies beyond the U-line, the upper bound of "
                 "natural soils (ASTM D2487 Fig. 4): check the readings")
    _finish(out)


def _finish(out: Outcome) -> None:
    """Descriptors and the indicative interpretation, from what the set produced."""
    descriptors = describe(out.results)
    if descriptors:
        out.results["descriptors"] = descriptors
    notes = interpret(out.results)
    if notes:
        out.results["interpretation"] = notes
