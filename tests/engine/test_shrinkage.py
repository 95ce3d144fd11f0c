"""Linear shrinkage (BS 1377-2:1990 cl. 6.5): the formula, the bar's condition, refusals."""

from __future__ import annotations

import math
from typing import Any

import pytest
from hypothesis import given
from hypothesis import strategies as st

from server.engine import calculate, evaluate
from server.engine.shrinkage import linear_shrinkage

BAR = {"mould_length_mm": 140.0, "oven_dry_length_mm": 128.6, "condition": "intact"}


def test_linear_shrinkage_is_the_loss_of_length_over_the_mould_length() -> None:
    # hand-worked from BS 1377-2:1990 cl. 6.5, LS = (1 - L_D/L_0) x 100: (1 - 128.6/140) x 100 = 8.142857 %
    ev = calculate("linear-shrinkage", BAR)
    assert ev.results["linear_shrinkage"] == pytest.approx(8.142857, abs=1e-6)  # full precision, not 8
    assert ev.flags == []


def test_a_bar_that_did_not_shrink_has_no_shrinkage() -> None:
    assert (
        calculate("linear-shrinkage", {**BAR, "oven_dry_length_mm": 140.0}).results["linear_shrinkage"] == 0.0
    )


@pytest.mark.parametrize(
    ("condition", "code"), [("cracked", "shrinkage-bar-cracked"), ("curled", "shrinkage-bar-curled")]
)
def test_a_cracked_or_curled_bar_is_flagged_and_the_formula_is_unchanged(condition: str, code: str) -> None:
    ev = calculate("linear-shrinkage", {**BAR, "condition": condition})
    assert [(f.code, f.severity) for f in ev.flags] == [(code, "warning")]
    assert ev.results["linear_shrinkage"] == pytest.approx(
        8.142857, abs=1e-6
    )  # as above (DESIGN.md section 8)


def test_uncertainty_of_two_length_readings() -> None:
    # JCGM 100:2008 cl. F.2.2.1: u = 0.1 mm / sqrt(12) per length;
    # dLS/dL_D = -100/140, dLS/dL_0 = 100 x 128.6/140^2
    u_len = 0.1 / math.sqrt(12)
    expected = u_len * math.hypot(100 / 140, 100 * 128.6 / 140**2)
    unc = calculate("linear-shrinkage", BAR).results["uncertainty"]["linear_shrinkage"]
    assert unc == {"u": pytest.approx(expected), "U": pytest.approx(2 * expected), "k": 2.0}
    finer = calculate("linear-shrinkage", {**BAR, "length_resolution_mm": 0.01}).results["uncertainty"]
    assert finer["linear_shrinkage"]["u"] == pytest.approx(expected / 10)


@pytest.mark.parametrize(
    ("change", "field", "kind", "words"),
    [
        ({"oven_dry_length_mm": 141.2}, "oven_dry_length_mm", "invalid", "does not grow"),
        ({"mould_length_mm": 0}, "mould_length_mm", "invalid", "must be above 0"),
        ({"oven_dry_length_mm": -3.0}, "oven_dry_length_mm", "invalid", "must be above 0"),
        ({"condition": "broken"}, "condition", "invalid", "intact, cracked, curled"),
        ({"condition": None}, "condition", "missing", "is required"),
        ({"mould_length_mm": ""}, "mould_length_mm", "missing", "is required"),
    ],
)
def test_impossible_lengths_and_unknown_conditions_are_refused(
    change: dict[str, Any], field: str, kind: str, words: str
) -> None:
    ev = evaluate("linear-shrinkage", {**BAR, **change})
    (error,) = ev.errors
    assert (error.loc, error.kind) == (("readings", field), kind) and words in error.message
    assert "linear_shrinkage" not in ev.results or field == "condition"


@given(st.floats(1.0, 500.0), st.floats(0.0, 1.0))
def test_shrinkage_lies_between_0_and_100_percent(mould: float, share: float) -> None:
    value = linear_shrinkage(mould, mould * share)  # the formula's range (computed property)
    assert -1e-9 <= value <= 100.0 + 1e-9
