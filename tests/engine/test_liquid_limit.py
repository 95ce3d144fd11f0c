"""Liquid limit by the cup (multipoint, one-point) and by the fall cone."""

from __future__ import annotations

import math
from typing import Any

import pytest

from server.engine import calculate, evaluate
from server.engine.liquid_limit import fit_line, one_point_factor


def det(w: float, dry_soil_g: float = 20.0, tare_g: float = 10.0) -> dict[str, float]:
    """Masses that give water content ``w`` exactly, by the ASTM D2216 formula."""
    return {"tare_g": tare_g, "dry_tare_g": tare_g + dry_soil_g,
            "wet_tare_g": tare_g + dry_soil_g * (1 + w / 100)}


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
        "liquid limit, trial 2: dry mass plus tare (38.1 g) is above wet mass plus tare (37.9 g)"]


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
    assert (line.slope, line.intercept) == (pytest.approx(-2.0), pytest.approx(3.0))
    assert (line.r2, line.s) == (1.0, 0.0)


def test_one_point_factors_match_the_published_table() -> None:
    # (N/25)^0.121, table of factors in REFERENCES.md (computed; ASTM D4318 Method B).
    table = {20: 0.973, 21: 0.979, 22: 0.985, 23: 0.990, 24: 0.995, 25: 1.000,
             26: 1.005, 27: 1.009, 28: 1.014, 29: 1.018, 30: 1.022}
    assert {n: round(one_point_factor(n), 3) for n in table} == table


def test_flow_index_over_a_decade_equals_the_drop_in_water_content() -> None:
    # Definition (IS 2720-5): from 10 to 100 blows w falls by If. Here w = 50 at 10, 38 at 100.
    ev = calculate("ll-cup-multipoint", cup((10, 50.0), (100, 38.0), (int(10 ** 1.5), 44.0)))
    assert ev.results["flow_index"] == pytest.approx(12.0, abs=0.01)
    assert ev.results["liquid_limit"] == pytest.approx(50.0 - 12.0 * math.log10(2.5), abs=0.05)
