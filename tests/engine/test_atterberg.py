"""The full Atterberg set: limits, indices, chart position, USCS symbol and the NP rule."""

from __future__ import annotations

import json
from typing import Any

import pytest

from server.engine import calculate, evaluate


def det(w: float, dry_soil_g: float = 20.0, tare_g: float = 10.0) -> dict[str, float]:
    """Masses that give water content ``w`` exactly, by the ASTM D2216 formula."""
    return {"tare_g": tare_g, "dry_tare_g": tare_g + dry_soil_g,
            "wet_tare_g": tare_g + dry_soil_g * (1 + w / 100)}


# Das (multipoint problem) for the liquid limit; Liu & Evett (worked example) for the plastic limit.
DAS_LL = {"method": "ll-cup-multipoint",
          "trials": [{"blows": 15, **det(42.0)}, {"blows": 20, **det(40.8)}, {"blows": 28, **det(39.1)}]}
LIU_EVETT_PL = {"determinations": [{"tare_g": 11.56, "wet_tare_g": 20.47, "dry_tare_g": 18.93},
                                   {"tare_g": 11.68, "wet_tare_g": 21.27, "dry_tare_g": 19.57}]}


def full_set(**extra: Any) -> dict[str, Any]:
    return {"water_content": {"determinations": [det(35.0), det(35.4)]},
            "liquid_limit": DAS_LL, "plastic_limit": LIU_EVETT_PL,
            "clay_fraction": 31.0, "fines": 86.0, "sand": 12.0, "gravel": 2.0, **extra}


def test_full_set_gives_limits_and_indices_from_the_published_examples() -> None:
    ev = calculate("atterberg", full_set())
    r = ev.results
    assert r["liquid_limit"] == pytest.approx(39.67, abs=0.005)  # Das; least squares in log10 N
    assert r["flow_index"] == pytest.approx(10.72, abs=0.005)  # Das; REFERENCES.md, computed
    assert round(r["plastic_limit"], 1) == 21.2  # Liu & Evett worked example
    assert r["plasticity_index"] == 19.0  # reported LL 40 - reported PL 21 (REFERENCES.md rule)
    assert r["water_content"] == pytest.approx(35.2)  # mean of 35.0 and 35.4, ASTM D2216 formula
    assert r["liquidity_index"] == pytest.approx((35.2 - 21) / 19)  # LI definition, reported limits
    assert r["consistency_index"] == pytest.approx((40 - 35.2) / 19)  # CI definition, reported limits
    assert r["activity"] == pytest.approx(19 / 31)  # Skempton (1953) A = PI / clay fraction
    assert r["nonplastic"] is False
    assert r["clay_fraction"] == 31.0


def test_full_set_reads_the_uscs_symbol_off_the_plasticity_chart() -> None:
    # ASTM D2487 Fig. 4: LL 40, PI 19 is above the A-line (PI 14.6) and PI > 7 -> CL.
    r = calculate("atterberg", full_set()).results
    assert r["uscs_symbol"] == "CL"
    assert r["plasticity_chart"]["symbol"] == "CL"
    assert r["plasticity_chart"]["liquid_limit"] == 40.0 and r["plasticity_chart"]["plasticity_index"] == 19.0


def test_full_set_keeps_the_agreed_result_keys() -> None:
    r = calculate("atterberg", full_set()).results
    for key in ("water_content", "water_content_determinations", "liquid_limit", "flow_index",
                "liquid_limit_method", "liquid_limit_trials", "flow_curve", "plastic_limit",
                "plastic_limit_determinations", "plasticity_index", "nonplastic", "liquidity_index",
                "consistency_index", "activity", "clay_fraction", "uscs_symbol", "plasticity_chart"):
        assert key in r, key
    assert r["liquid_limit_method"] == "ll-cup-multipoint"
    assert set(r["flow_curve"]) == {"x", "log_x", "slope", "intercept", "r2", "target_x"}


def test_results_are_plain_json() -> None:
    ev = calculate("atterberg", full_set())
    assert json.loads(json.dumps(ev.to_dict())) == ev.to_dict()


def test_leaves_out_the_indices_that_need_a_natural_water_content_when_none_is_given() -> None:
    readings = full_set()
    del readings["water_content"], readings["clay_fraction"]
    r = calculate("atterberg", readings).results
    assert "water_content" not in r and "liquidity_index" not in r and "consistency_index" not in r
    assert "activity" not in r
    assert r["plasticity_index"] == 19.0  # reported LL 40 - reported PL 21


def test_reports_non_plastic_when_the_plastic_limit_is_not_below_the_liquid_limit() -> None:
    # ASTM D4318: NP when PL >= LL (confirmed); no PI, LI or CI then.
    readings = full_set(plastic_limit={"determinations": [det(40.0), det(40.2)]})
    ev = calculate("atterberg", readings)
    r = ev.results
    assert r["nonplastic"] is True
    assert not {"plasticity_index", "liquidity_index", "consistency_index", "activity"} & set(r)
    assert "plastic-limit-not-below-liquid-limit" in [f.code for f in ev.flags]


def test_reports_non_plastic_when_the_plastic_limit_cannot_be_determined() -> None:
    # ASTM D4318: NP when LL or PL cannot be determined (confirmed).
    r = calculate("atterberg", full_set(plastic_limit={"not_determinable": True})).results
    assert r["nonplastic"] is True and "plasticity_index" not in r
    assert r["uscs_symbol"] == "ML"  # ASTM D2487: non-plastic fines below LL 50 plot as ML


def test_requires_both_limits() -> None:
    ev = evaluate("atterberg", {"water_content": {"determinations": [det(35.0)]}})
    assert {e.loc for e in ev.errors} == {("readings", "liquid_limit"), ("readings", "plastic_limit")}
    assert ev.results["water_content"] == pytest.approx(35.0)


def test_computes_the_valid_parts_while_another_part_is_refused() -> None:
    readings = full_set()
    readings["plastic_limit"] = {"determinations": [LIU_EVETT_PL["determinations"][0], {"tare_g": "x"}]}
    ev = evaluate("atterberg", readings)
    assert ev.errors
    assert ev.results["liquid_limit"] == pytest.approx(39.67, abs=0.005)  # Das, least squares
    assert round(ev.results["plastic_limit_determinations"][0], 1) == 20.9  # Liu & Evett
    assert "plastic_limit" not in ev.results and "plasticity_index" not in ev.results


def test_refuses_an_unknown_liquid_limit_method() -> None:
    ev = evaluate("atterberg", full_set(liquid_limit={**DAS_LL, "method": "thumb"}))
    assert [e.loc for e in ev.errors] == [("readings", "liquid_limit", "method")]


def test_leaves_the_uscs_symbol_to_the_classification_of_a_coarse_soil() -> None:
    # ASTM D2487: fine-grained only when 50 % or more passes 75 um.
    r = calculate("atterberg", full_set(fines=40.0, sand=50.0, gravel=10.0)).results
    assert "uscs_symbol" not in r
    assert r["plasticity_chart"]["symbol"] == "CL"
