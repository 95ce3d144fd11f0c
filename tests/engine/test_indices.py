"""Plasticity, liquidity and consistency indices and activity, from the reported limits."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from server.engine.indices import (
    activity,
    consistency_index,
    is_nonplastic,
    liquidity_index,
    plasticity_index,
    reported_limit,
)
from server.engine.rounding import round_half_up


def test_plasticity_index_comes_from_the_reported_whole_number_limits() -> None:
    # REFERENCES.md: PI is computed from the reported (whole-number) LL and PL; Das LL 39.67 -> 40,
    # Liu & Evett PL 21.2 -> 21, PI 19.
    assert plasticity_index(39.67, 21.22) == 19.0


def test_limits_round_half_up() -> None:
    # Round half up, as laboratories round (rounding.py, common practice).
    assert (reported_limit(32.5), reported_limit(33.5), reported_limit(32.49)) == (33.0, 34.0, 32.0)


def test_liquidity_and_consistency_index_use_the_reported_limits() -> None:
    # LI = (w - PL)/PI, CI = (LL - w)/PI (definitions, REFERENCES.md); LL 40, PL 21, w 35.2.
    assert liquidity_index(35.2, 39.67, 21.22) == pytest.approx((35.2 - 21) / 19)
    assert consistency_index(35.2, 39.67, 21.22) == pytest.approx((40 - 35.2) / 19)


def test_activity_is_plasticity_index_over_clay_fraction() -> None:
    # Skempton (1953): A = PI / (% finer than 2 um); PI 28, 31 % clay -> 0.903.
    assert activity(28.0, 31.0) == pytest.approx(0.9032, abs=1e-4)


@pytest.mark.parametrize(
    ("ll", "pl", "np_"), [(30.0, 30.0, True), (30.0, 31.0, True), (30.4, 29.6, True), (30.6, 29.4, False)]
)
def test_soil_is_nonplastic_when_the_plastic_limit_is_not_below_the_liquid_limit(
    ll: float, pl: float, np_: bool
) -> None:
    # ASTM D4318: NP when PL >= LL (confirmed), compared on the reported whole numbers.
    assert is_nonplastic(ll, pl) is np_


@settings(database=None)
@given(w=st.floats(0.0, 300.0), pl=st.floats(5.0, 100.0), pi=st.integers(1, 150))
def test_liquidity_and_consistency_index_add_up_to_one(w: float, pl: float, pi: int) -> None:
    # CI = 1 - LI (definitions, REFERENCES.md: CI = (LL - w)/PI = 1 - LI).
    ll = reported_limit(pl) + pi
    assert liquidity_index(w, ll, pl) + consistency_index(w, ll, pl) == pytest.approx(1.0, abs=1e-9)


@settings(database=None)
@given(value=st.one_of(st.floats(0.0, 500.0), st.integers(0, 1000).map(lambda n: n / 2)))
def test_reported_limit_rounds_exactly_as_round_half_up(value: float) -> None:
    # The short path of reported_limit must agree with rounding.round_half_up (common practice: half up).
    assert reported_limit(value) == round_half_up(value, 0)
