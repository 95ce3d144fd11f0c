"""Duplicate results against the precision statements of server/quality/precision.py."""

from __future__ import annotations

import pytest

from server.quality import precision


def test_two_liquid_limits_differing_by_exactly_d2s_are_acceptable() -> None:
    # ASTM D4318 single-operator d2s for LL = 2.4 points (from memory); 42.4 - 40.0 = 2.4
    check = precision.check_pair("liquid_limit", 40.0, 42.4, precision.LIQUID_LIMIT)
    assert check.difference == pytest.approx(2.4)
    assert check.acceptable_range == 2.4
    assert check.verdict == "acceptable"


def test_two_liquid_limits_differing_by_more_than_d2s_are_outside() -> None:
    # 42.5 - 40.0 = 2.5 > 2.4 (ASTM D4318 single-operator d2s, from memory)
    assert precision.check_pair("liquid_limit", 42.5, 40.0, precision.LIQUID_LIMIT).verdict == "outside"


@pytest.mark.parametrize(
    ("second", "verdict"),
    [(23.8, "acceptable"), (23.9, "outside")],  # 23.8 - 21.2 = 2.6 = d2s; 2.7 > 2.6
)
def test_plastic_limits_are_judged_against_their_own_d2s(second: float, verdict: str) -> None:
    # ASTM D4318 single-operator d2s for PL = 2.6 points (from memory); PL 21.2 from Liu & Evett
    assert precision.check_pair("plastic_limit", 21.2, second, precision.PLASTIC_LIMIT).verdict == verdict


def test_water_contents_are_judged_against_a_range_relative_to_their_mean() -> None:
    # ASTM D2216 single-operator acceptable range 7.8 % of the mean (from memory):
    # 30.0 and 32.0 -> mean 31.0, range 0.078 x 31.0 = 2.418 >= 2.0 (hand-worked)
    near = precision.check_results("water-content", {"water_content": 30.0}, {"water_content": 32.0})
    assert [(c.key, c.verdict) for c in near] == [("water_content", "acceptable")]
    assert near[0].acceptable_range == pytest.approx(2.418)
    # 30.0 and 33.0 -> mean 31.5, range 2.457 < 3.0 (hand-worked)
    far = precision.check_results("water-content", {"water_content": 30.0}, {"water_content": 33.0})
    assert far[0].verdict == "outside"
    assert far[0].acceptable_range == pytest.approx(2.457)


def test_a_fall_cone_liquid_limit_has_no_statement_here() -> None:
    # ASTM D4318 covers the cup; the cone is BS 1377-2 / ISO 17892-12 (REFERENCES.md)
    (check,) = precision.check_results("ll-cone", {"liquid_limit": 40.0}, {"liquid_limit": 45.0})
    assert check.verdict == "no statement"
    assert check.acceptable_range is None
    assert check.difference == pytest.approx(5.0)


def test_an_atterberg_test_checks_each_limit_by_the_procedure_that_produced_it() -> None:
    cup = {"liquid_limit": {"method": "ll-cup-multipoint", "trials": []}}
    first = {"liquid_limit": 40.0, "plastic_limit": 21.2, "water_content": 30.0, "plasticity_index": 19}
    second = {"liquid_limit": 43.0, "plastic_limit": 22.0, "water_content": 30.5, "plasticity_index": 21}
    checks = {c.key: c for c in precision.check_results("atterberg", first, second, (cup, cup))}
    # The plasticity index is derived, not a determination: not checked (no statement of its own here).
    assert set(checks) == {"liquid_limit", "plastic_limit", "water_content"}
    assert checks["liquid_limit"].verdict == "outside"  # 3.0 > 2.4 (D4318, from memory)
    assert checks["plastic_limit"].verdict == "acceptable"  # 0.8 <= 2.6 (D4318, from memory)
    assert checks["water_content"].verdict == "acceptable"  # 0.5 <= 0.078 x 30.25 = 2.36 (D2216)


def test_liquid_limits_found_by_different_procedures_are_not_judged() -> None:
    cup = {"liquid_limit": {"method": "ll-cup-multipoint"}}
    cone = {"liquid_limit": {"method": "ll-cone"}}
    (check,) = precision.check_results(
        "atterberg", {"liquid_limit": 40.0}, {"liquid_limit": 41.0}, (cup, cone)
    )
    assert check.verdict == "no statement"


def test_a_nonplastic_result_leaves_its_limits_unchecked() -> None:
    # NP is reported when the limits cannot be determined (ASTM D4318, REFERENCES.md): no numbers
    first = {"nonplastic": True, "water_content": 12.0}
    second = {"nonplastic": True, "water_content": 12.2}
    checks = precision.check_results("atterberg", first, second)
    assert [c.key for c in checks] == ["water_content"]


def test_a_result_that_is_not_finite_is_refused() -> None:
    with pytest.raises(ValueError):
        precision.check_pair("liquid_limit", float("nan"), 40.0, precision.LIQUID_LIMIT)
