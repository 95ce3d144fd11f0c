"""Liquid limit by the cup (multipoint, one-point) and by the fall cone."""

from __future__ import annotations

import math
from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from server.engine import calculate, evaluate
from server.engine.liquid_limit import fit_line, one_point_factor


def det(w: float, dry_soil_g: float = 20.0, tare_g: float = 10.0) -> dict[str, float]:
    """Masses that give water content ``w`` exactly, by the ASTM D2216 formula."""
    return {
        "tare_g": tare_g,
        "dry_tare_g": tare_g + dry_soil_g,
        "wet_tare_g": tare_g + dry_soil_g * (1 + w / 100),
    }


def cup(*pairs: tuple[int, float]) -> dict[str, Any]:
    return {"trials": [{"blows": n, **det(w)} for n, w in pairs]}


# Das, Principles of Geotechnical Engineering (problem set): N 15, 20, 28 with w 42.0, 40.8, 39.1 %.
DAS = cup((15, 42.0), (20, 40.8), (28, 39.1))


def test_multipoint_liquid_limit_of_the_das_example() -> None:
    # Das problem: LL 39.7; least squares of w on log10 N gives 39.67 (REFERENCES.md, computed).
    ev = calculate("ll-cup-multipoint", DAS)
    assert ev.results["liquid_limit"] == pytest.approx(39.67, abs=0.005)
    assert ev.results["liquid_limit_method"] == "ll-cup-multipoint"


def test_flow_index_of_the_das_example_is_the_fall_over_one_log_cycle() -> None:
    # Flow index = fall of w over one log cycle of N (IS 2720-5, confirmed); 10.72 (REFERENCES.md, computed).
    ev = calculate("ll-cup-multipoint", DAS)
    assert ev.results["flow_index"] == pytest.approx(10.72, abs=0.005)
    curve = ev.results["flow_curve"]
    assert curve["x"] == "blows" and curve["log_x"] is True and curve["target_x"] == 25
    assert curve["slope"] == pytest.approx(-10.72, abs=0.005)
    assert 0.99 < curve["r2"] <= 1.0


def test_lists_each_trial_with_its_blows_and_water_content() -> None:
    ev = calculate("ll-cup-multipoint", DAS)
    trials = ev.results["liquid_limit_trials"]
    assert [t["blows"] for t in trials] == [15, 20, 28]
    assert [round(t["water_content"], 1) for t in trials] == [42.0, 40.8, 39.1]  # Das, as typed


def test_refuses_fewer_than_three_trials_for_the_multipoint_method() -> None:
    # ASTM D4318 Method A: three or more trials (DESIGN.md section 3).
    ev = evaluate("ll-cup-multipoint", cup((15, 42.0), (28, 39.1)))
    assert [e.loc for e in ev.errors] == [("readings", "trials")]
    assert "liquid_limit" not in ev.results
    assert len(ev.results["liquid_limit_trials"]) == 2


@pytest.mark.parametrize("blows", [0, 101, 24.5, "many", True])
def test_refuses_a_blow_count_that_is_not_a_whole_number_from_1_to_100(blows: object) -> None:
    readings = cup((15, 42.0), (20, 40.8), (28, 39.1))
    readings["trials"][1]["blows"] = blows
    ev = evaluate("ll-cup-multipoint", readings)
    assert [e.loc for e in ev.errors] == [("readings", "trials", 1, "blows")]
    assert "liquid_limit" not in ev.results


def test_keeps_each_trial_water_content_while_a_blow_count_is_missing() -> None:
    readings = cup((15, 42.0), (20, 40.8), (28, 39.1))
    del readings["trials"][2]["blows"]
    ev = evaluate("ll-cup-multipoint", readings)
    assert ev.results["liquid_limit_trials"][2] == {"blows": None, "water_content": pytest.approx(39.1)}
    assert "liquid_limit" not in ev.results and "flow_index" not in ev.results


def test_refusal_message_names_the_trial_and_both_masses() -> None:
    readings = cup((15, 42.0), (20, 40.8), (28, 39.1))
    readings["trials"][1].update({"wet_tare_g": 37.9, "dry_tare_g": 38.1})
    ev = evaluate("ll-cup-multipoint", readings)
    assert [e.message for e in ev.errors] == [
        "liquid limit, trial 2: dry mass plus tare (38.1 g) is above wet mass plus tare (37.9 g)"
    ]


def test_refuses_trials_that_all_have_the_same_blow_count() -> None:
    ev = evaluate("ll-cup-multipoint", cup((25, 42.0), (25, 40.8), (25, 39.1)))
    assert [e.loc for e in ev.errors] == [("readings", "trials")]


def test_flags_a_trial_outside_the_blow_window() -> None:
    # ASTM D4318 Method A: blows from 15 to 35 (confirmed).
    ev = calculate("ll-cup-multipoint", cup((12, 43.0), (20, 40.8), (28, 39.1)))
    assert "blows-out-of-range" in [f.code for f in ev.flags]


def test_flags_a_flow_curve_that_rises_with_the_blow_count() -> None:
    # Water content falls as the blow count rises (Casagrande cup; common practice).
    ev = calculate("ll-cup-multipoint", cup((15, 39.1), (20, 40.8), (28, 42.0)))
    assert ("curve-wrong-direction", "error") in [(f.code, f.severity) for f in ev.flags]


def test_flags_a_poor_straight_line() -> None:
    # r2 below 0.95 is a poor fit (common practice threshold).
    ev = calculate("ll-cup-multipoint", cup((16, 42.0), (22, 38.0), (26, 41.5), (33, 37.0)))
    assert ev.results["flow_curve"]["r2"] < 0.95
    assert "poor-fit" in [f.code for f in ev.flags]


def test_flags_a_limit_read_outside_the_blows_tested() -> None:
    ev = calculate("ll-cup-multipoint", cup((27, 40.0), (31, 39.2), (35, 38.5)))
    assert "limit-extrapolated" in [f.code for f in ev.flags]


def test_does_not_flag_well_spread_trials_on_a_good_line() -> None:
    ev = calculate("ll-cup-multipoint", cup((17, 42.0), (24, 40.3), (31, 39.0)))
    assert ev.flags == []


def test_fit_line_recovers_an_exact_line() -> None:
    # y = 3 - 2x exactly: least squares returns the line itself with r2 = 1 (Draper & Smith 1998, ch. 1).
    line = fit_line([0.0, 1.0, 2.0], [3.0, 1.0, -1.0])
    assert line.slope == pytest.approx(-2.0) and line.intercept == pytest.approx(3.0)
    assert (line.r2, line.s) == (1.0, 0.0)


def test_one_point_factors_match_the_published_table() -> None:
    # (N/25)^0.121, table of factors in REFERENCES.md (computed; ASTM D4318 Method B).
    table = {
        20: 0.973,
        21: 0.979,
        22: 0.985,
        23: 0.990,
        24: 0.995,
        25: 1.000,
        26: 1.005,
        27: 1.009,
        28: 1.014,
        29: 1.018,
        30: 1.022,
    }
    assert {n: round(one_point_factor(n), 3) for n in table} == table


def test_flow_index_over_a_decade_equals_the_drop_in_water_content() -> None:
    # Definition (IS 2720-5): from 10 to 100 blows w falls by If. Here w = 50 at 10, 38 at 100.
    ev = calculate("ll-cup-multipoint", cup((10, 50.0), (100, 38.0), (int(10**1.5), 44.0)))
    assert ev.results["flow_index"] == pytest.approx(12.0, abs=0.01)
    assert ev.results["liquid_limit"] == pytest.approx(50.0 - 12.0 * math.log10(2.5), abs=0.05)


def test_flow_index_does_not_depend_on_which_way_the_trials_were_typed() -> None:
    forward = calculate("ll-cup-multipoint", DAS).results
    backward = calculate("ll-cup-multipoint", {"trials": list(reversed(DAS["trials"]))}).results
    assert backward["liquid_limit"] == pytest.approx(forward["liquid_limit"])
    assert backward["flow_index"] == pytest.approx(forward["flow_index"])


# -- exact straight lines (hypothesis) ------------------------------------------------------------


@settings(database=None)
@given(
    ll=st.floats(20.0, 150.0),
    flow=st.floats(1.0, 50.0),
    blows=st.lists(st.integers(10, 45), min_size=3, max_size=6, unique=True),
)
def test_recovers_the_limit_and_flow_index_from_trials_on_an_exact_flow_curve(
    ll: float, flow: float, blows: list[int]
) -> None:
    # Readings generated on w = LL - If log10(N/25): least squares returns the line itself
    # (Draper & Smith 1998, ch. 1), so LL and If come back exactly (computed).
    pairs = [(n, ll - flow * math.log10(n / 25)) for n in blows]
    r = calculate("ll-cup-multipoint", cup(*pairs)).results
    assert r["liquid_limit"] == pytest.approx(ll, abs=1e-6)
    assert r["flow_index"] == pytest.approx(flow, abs=1e-6)
    assert r["flow_curve"]["r2"] == pytest.approx(1.0, abs=1e-9)


@settings(database=None)
@given(
    ll=st.floats(25.0, 150.0),
    slope=st.floats(0.5, 2.0),
    pens=st.lists(st.floats(14.0, 26.0), min_size=3, max_size=6, unique=True).filter(
        lambda ps: max(ps) - min(ps) > 1.0
    ),
)
def test_recovers_the_cone_liquid_limit_from_points_on_an_exact_line(
    ll: float, slope: float, pens: list[float]
) -> None:
    # Readings generated on w = LL + slope (p - 20) for the 80 g cone (BS 1377-2:1990 cl. 4.3: LL at
    # 20 mm on a straight line of w against penetration), recovered by least squares (computed).
    trials = [{"penetration_mm": [p], **det(ll + slope * (p - 20.0))} for p in pens]
    r = calculate("ll-cone", {"cone": "80g-30deg", "trials": trials}).results
    assert r["liquid_limit"] == pytest.approx(ll, abs=1e-6)


def test_recovers_the_60g_cone_limit_at_10_mm_on_a_line_in_log_penetration() -> None:
    # ISO 17892-12:2018: the 60 g / 60 deg cone reads LL at 10 mm; its fit in log10 penetration is
    # the cone type's property here (from memory, REFERENCES.md). w = 50 + 40 log10(p/10) exactly.
    trials = [
        {"penetration_mm": [p, p], **det(50.0 + 40.0 * math.log10(p / 10.0))} for p in (7.0, 9.0, 12.0, 14.5)
    ]
    r = calculate("ll-cone", {"cone": "60g-60deg", "trials": trials}).results
    assert r["liquid_limit"] == pytest.approx(50.0, abs=1e-9)
    assert r["flow_curve"]["log_x"] is True and r["flow_curve"]["target_x"] == 10.0


# -- one-point ------------------------------------------------------------------------------------


def test_one_point_liquid_limit_corrects_each_trial_and_averages_them() -> None:
    # ASTM D4318 Method B: LL = w (N/25)^0.121 (confirmed); 40.0 % at 23 blows -> 40.0 x 0.98996,
    # 38.0 % at 27 blows -> 38.0 x 1.00936 (factors computed); mean 38.977.
    ev = calculate("ll-cup-one-point", cup((23, 40.0), (27, 38.0)))
    trials = ev.results["liquid_limit_trials"]
    assert trials[0]["liquid_limit"] == pytest.approx(40.0 * (23 / 25) ** 0.121)
    assert trials[1]["liquid_limit"] == pytest.approx(38.0 * (27 / 25) ** 0.121)
    assert ev.results["liquid_limit"] == pytest.approx(38.977, abs=0.001)
    assert ev.results["liquid_limit_method"] == "ll-cup-one-point"
    assert "flow_index" not in ev.results
    assert ev.flags == []


def test_one_point_flags_a_single_trial() -> None:
    # ASTM D4318 Method B asks for two trials (REFERENCES.md, from memory).
    ev = calculate("ll-cup-one-point", cup((25, 40.0)))
    assert ev.results["liquid_limit"] == pytest.approx(40.0)
    assert [f.code for f in ev.flags] == ["too-few-trials"]


def test_one_point_flags_trials_that_disagree() -> None:
    # Acceptable range of two results, single operator, d2s 2.4 (older D4318 table, from memory).
    ev = calculate("ll-cup-one-point", cup((25, 40.0), (25, 43.0)))
    assert [f.code for f in ev.flags] == ["one-point-trials-apart"]


def test_one_point_flags_blows_outside_20_to_30() -> None:
    # ASTM D4318 Method B: N from 20 to 30 (confirmed).
    ev = calculate("ll-cup-one-point", cup((18, 41.0), (22, 40.0)))
    assert [f.code for f in ev.flags] == ["blows-out-of-range"]


def test_one_point_refuses_three_trials() -> None:
    ev = evaluate("ll-cup-one-point", cup((22, 40.0), (24, 39.8), (26, 39.5)))
    assert [e.loc for e in ev.errors] == [("readings", "trials")]
    assert "liquid_limit" not in ev.results


# -- fall cone ------------------------------------------------------------------------------------


def cone(kind: str, *pairs: tuple[list[Any], float]) -> dict[str, Any]:
    return {"cone": kind, "trials": [{"penetration_mm": p, **det(w)} for p, w in pairs]}


# Points on w = 30 + 1.5 (p - 20) (constructed; an exact line gives LL 30 at 20 mm, BS 1377-2:1990 cl. 4.3).
GOOD_CONE = cone(
    "80g-30deg", ([15.5, 15.7], 23.4), ([18.0, 18.2], 27.15), ([21.2, 21.4], 31.95), ([24.0, 24.2], 36.15)
)


def test_cone_liquid_limit_is_read_at_20_mm_for_the_80g_cone() -> None:
    ev = calculate("ll-cone", GOOD_CONE)
    assert ev.results["liquid_limit"] == pytest.approx(30.0, abs=1e-9)  # exact line, computed
    assert ev.results["flow_curve"]["x"] == "penetration_mm" and ev.results["flow_curve"]["log_x"] is False
    assert ev.results["liquid_limit_trials"][0]["penetration_mm"] == pytest.approx(15.6)  # mean of two drops
    assert ev.results["cone"] == "80g-30deg"
    assert ev.flags == []


def test_cone_asks_for_a_third_drop_when_two_differ_by_more_than_half_a_millimetre() -> None:
    # BS 1377-2:1990 cl. 4.3: 0.5-1 mm apart -> third drop (confirmed).
    readings = cone(
        "80g-30deg", ([15.5, 16.2], 23.4), ([18.0, 18.2], 27.15), ([21.2, 21.4], 31.95), ([24.0, 24.2], 36.15)
    )
    assert [f.code for f in calculate("ll-cone", readings).flags] == ["cone-third-drop-needed"]


def test_cone_accepts_two_drops_exactly_half_a_millimetre_apart() -> None:
    # BS 1377-2:1990 cl. 4.3: within 0.5 mm the two are averaged (confirmed); 17.2/17.7 differ by 0.5.
    readings = cone(
        "80g-30deg", ([17.2, 17.7], 25.0), ([18.0, 18.2], 27.15), ([21.2, 21.4], 31.95), ([24.0, 24.2], 36.15)
    )
    assert "cone-third-drop-needed" not in [f.code for f in calculate("ll-cone", readings).flags]


def test_cone_asks_for_a_remix_when_the_drops_range_over_more_than_a_millimetre() -> None:
    # BS 1377-2:1990 cl. 4.3: range above 1 mm -> remix and repeat (confirmed).
    readings = cone(
        "80g-30deg",
        ([15.5, 16.2, 16.7], 23.4),
        ([18.0, 18.2], 27.15),
        ([21.2, 21.4], 31.95),
        ([24.0, 24.2], 36.15),
    )
    flags = [(f.code, f.severity) for f in calculate("ll-cone", readings).flags]
    assert flags == [("cone-remix-needed", "error")]


def test_cone_flags_a_penetration_outside_15_to_25_mm() -> None:
    # BS 1377-2:1990 cl. 4.3: penetrations 15-25 mm for the 80 g cone (confirmed).
    readings = cone(
        "80g-30deg", ([13.0, 13.2], 20.0), ([18.0, 18.2], 27.15), ([21.2, 21.4], 31.95), ([24.0, 24.2], 36.15)
    )
    assert "penetration-out-of-range" in [f.code for f in calculate("ll-cone", readings).flags]


def test_cone_flags_fewer_than_four_points() -> None:
    # BS 1377-2:1990 cl. 4.3 asks for four or more points (from memory).
    readings = cone("80g-30deg", ([15.5, 15.7], 23.4), ([18.0, 18.2], 27.15), ([24.0, 24.2], 36.15))
    assert [f.code for f in calculate("ll-cone", readings).flags] == ["too-few-trials"]


def test_cone_refuses_an_unknown_cone_type_and_four_drops() -> None:
    readings = cone(
        "100g-30deg", ([15.5, 15.7, 15.6, 15.5], 23.4), ([18.0, 18.2], 27.15), ([21.2, 21.4], 31.95)
    )
    ev = evaluate("ll-cone", readings)
    assert {e.loc for e in ev.errors} == {("readings", "cone"), ("readings", "trials", 0, "penetration_mm")}
    assert "liquid_limit" not in ev.results


def test_cone_refuses_a_penetration_that_is_not_a_positive_number() -> None:
    readings = cone("80g-30deg", ([15.5, "deep"], 23.4), ([18.0, 18.2], 27.15), ([21.2, 21.4], 31.95))
    ev = evaluate("ll-cone", readings)
    assert [e.loc for e in ev.errors] == [("readings", "trials", 0, "penetration_mm", 1)]
