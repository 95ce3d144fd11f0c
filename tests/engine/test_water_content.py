"""Water content of a determination and the refusal of impossible masses."""

from __future__ import annotations

import pytest

from server.engine import InputError, calculate, evaluate
from server.engine.water_content import water_content

# The DESIGN.md example determination: tare 15.20 g, wet+tare 45.62 g, dry+tare 38.11 g.
T17 = {"container": "T-17", "tare_g": 15.20, "wet_tare_g": 45.62, "dry_tare_g": 38.11}


def test_water_content_follows_the_astm_d2216_formula() -> None:
    # ASTM D2216-19 formula w = (Mwet+tare - Mdry+tare)/(Mdry+tare - Mtare) x 100, worked by hand:
    # 7.51 g of water over 22.91 g of dry soil = 32.7804 %.
    assert water_content(15.20, 45.62, 38.11) == pytest.approx(32.7804, abs=1e-4)


def test_water_content_method_averages_the_determinations() -> None:
    # Liu & Evett, Soil Properties (worked example, masses 20.47/18.93/11.56 and
    # 21.27/19.57/11.68 g) give 20.9 % and 21.5 %; mean 21.2 % (unrounded 20.8955 and 21.5463 -> 21.2209).
    ev = calculate(
        "water-content",
        {
            "determinations": [
                {"tare_g": 11.56, "wet_tare_g": 20.47, "dry_tare_g": 18.93},
                {"tare_g": 11.68, "wet_tare_g": 21.27, "dry_tare_g": 19.57},
            ]
        },
    )
    assert [round(w, 1) for w in ev.results["water_content_determinations"]] == [20.9, 21.5]
    assert ev.results["water_content"] == pytest.approx(21.2209, abs=1e-4)


def test_one_determination_is_enough_for_a_water_content() -> None:
    ev = calculate("water-content", {"determinations": [T17]})
    assert ev.results["water_content"] == pytest.approx(32.7804, abs=1e-4)  # ASTM D2216-19 formula, by hand


def test_refuses_a_negative_mass() -> None:
    ev = evaluate("water-content", {"determinations": [{**T17, "tare_g": -1.0}]})
    assert [e.loc for e in ev.errors] == [("readings", "determinations", 0, "tare_g")]
    assert "water_content" not in ev.results


def test_refuses_dry_mass_above_wet_mass() -> None:
    ev = evaluate("water-content", {"determinations": [{**T17, "dry_tare_g": 46.0}]})
    assert [e.loc for e in ev.errors] == [("readings", "determinations", 0, "dry_tare_g")]
    assert "dry mass plus tare (46 g) is above wet mass plus tare (45.62 g)" in ev.errors[0].message


def test_refuses_tare_above_dry_mass() -> None:
    ev = evaluate("water-content", {"determinations": [{**T17, "tare_g": 40.0}]})
    assert [e.loc for e in ev.errors] == [("readings", "determinations", 0, "tare_g")]


def test_refuses_a_dry_mass_equal_to_the_tare_as_no_dry_soil() -> None:
    ev = evaluate("water-content", {"determinations": [{**T17, "dry_tare_g": 15.20, "wet_tare_g": 15.20}]})
    assert len(ev.errors) == 1
    assert "no dry soil" in ev.errors[0].message


def test_refuses_text_where_a_mass_belongs() -> None:
    ev = evaluate("water-content", {"determinations": [{**T17, "wet_tare_g": "forty"}]})
    assert [e.loc for e in ev.errors] == [("readings", "determinations", 0, "wet_tare_g")]


def test_refuses_readings_without_determinations() -> None:
    with pytest.raises(InputError):
        calculate("water-content", {"determinations": []})


def test_keeps_each_good_row_while_another_row_is_incomplete() -> None:
    ev = evaluate("water-content", {"determinations": [T17, {"tare_g": 15.0}]})
    assert ev.results["water_content_determinations"][0] == pytest.approx(32.7804, abs=1e-4)
    assert ev.results["water_content_determinations"][1] is None
    assert "water_content" not in ev.results


def test_names_the_part_in_the_refusal_message() -> None:
    ev = evaluate("water-content", {"determinations": [T17, {**T17, "dry_tare_g": 46.0}]})
    assert ev.errors[0].message.startswith("water content, determination 2: ")
