"""The plasticity chart of ASTM D2487-17 (Fig. 4): A-line, U-line, chart symbol, drawing outlines.

Line equations from REFERENCES.md "Classification" (A-line PI = 0.73 (LL - 20), horizontal at
PI = 4 to LL = 25.5; U-line PI = 0.9 (LL - 8), vertical at LL = 16 to PI = 7).
"""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from server.engine.plasticity_chart import (
    BS_BASIS,
    a_line,
    a_line_points,
    beyond_u_line,
    bs_a_line,
    bs_chart_symbol,
    bs_plasticity_range,
    bs_plasticity_term,
    chart_position,
    chart_symbol,
    cl_ml_band_points,
    on_or_above_a_line,
    u_line,
    u_line_points,
)


def test_a_line_at_ll_50_is_pi_21_9() -> None:
    # REFERENCES.md: 0.73 (50 - 20) = 21.9.
    assert a_line(50.0) == pytest.approx(21.9)


def test_a_line_is_flat_at_pi_4_below_ll_25_5() -> None:
    # REFERENCES.md: horizontal at PI = 4 to LL = 25.5.
    assert a_line(10.0) == 4.0
    assert a_line(25.0) == 4.0
    assert a_line(26.0) == pytest.approx(0.73 * 6.0)


def test_u_line_at_ll_50_is_pi_37_8() -> None:
    # REFERENCES.md: 0.9 (50 - 8) = 37.8.
    assert u_line(50.0) == pytest.approx(37.8)


@pytest.mark.parametrize(
    ("ll", "pi", "symbol"),
    [
        (30.0, 7.3, "CL"),  # on the A-line is clay: "on or above" (REFERENCES.md)
        (30.0, 7.2, "ML"),  # just below it
        (20.0, 4.0, "CL-ML"),  # the band's floor, PI = 4 (REFERENCES.md: 4 <= PI <= 7)
        (20.0, 7.0, "CL-ML"),  # the band's top
        (20.0, 7.1, "CL"),  # PI > 7 (REFERENCES.md)
        (20.0, 3.9, "ML"),  # below the flat part
        (49.9, 30.0, "CL"),
        (50.0, 30.0, "CH"),  # LL >= 50 is high plasticity (REFERENCES.md)
        (50.0, 21.8, "MH"),
    ],
)
def test_chart_symbol_at_the_boundaries(ll: float, pi: float, symbol: str) -> None:
    assert chart_symbol(ll, pi) == symbol


def _regions(ll: float, pi: float) -> dict[str, bool]:
    """ASTM D2487 Fig. 1a in words (REFERENCES.md), written apart from the code under test."""
    a = max(4.0, 0.73 * (ll - 20.0))
    on_or_above = pi >= a
    low = ll < 50.0
    return {
        "CL": low and pi > 7.0 and on_or_above,
        "CL-ML": low and 4.0 <= pi <= 7.0 and on_or_above,
        "ML": low and (pi < 4.0 or not on_or_above),
        "CH": not low and on_or_above,
        "MH": not low and not on_or_above,
    }


@given(ll=st.floats(0.0, 250.0), pi=st.floats(0.0, 200.0))
def test_every_point_of_the_chart_has_exactly_one_symbol(ll: float, pi: float) -> None:
    regions = _regions(ll, pi)
    holding = [symbol for symbol, holds in regions.items() if holds]
    assert len(holding) == 1
    assert chart_symbol(ll, pi) == holding[0]


@given(ll=st.floats(0.0, 250.0), pi=st.floats(0.0, 200.0))
def test_on_or_above_the_a_line_agrees_with_the_chart_position(ll: float, pi: float) -> None:
    assert on_or_above_a_line(ll, pi) is chart_position(ll, pi)["above_a_line"]


def test_points_left_of_ll_16_are_beyond_the_u_line() -> None:
    # ASTM D2487 Fig. 4 (REFERENCES.md): vertical at LL = 16.
    assert beyond_u_line(15.0, 0.0) is True
    assert beyond_u_line(16.0, 5.0) is False


def test_points_above_the_sloped_u_line_are_beyond_it() -> None:
    # REFERENCES.md: PI = 0.9 (LL - 8) = 37.8 at LL 50.
    assert beyond_u_line(50.0, 38.0) is True
    assert beyond_u_line(50.0, 37.0) is False


def test_a_line_outline_bends_at_pi_4() -> None:
    # REFERENCES.md: flat at PI = 4 to LL = 25.5 (0.73 (LL - 20) = 4 at LL 25.48).
    points = a_line_points(100.0)
    assert points[1] == pytest.approx((25.48, 4.0), abs=0.01)
    assert points[-1] == pytest.approx((100.0, 58.4))


def test_u_line_outline_rises_at_ll_16() -> None:
    # REFERENCES.md: vertical at LL = 16, then 0.9 (LL - 8).
    assert u_line_points(100.0) == pytest.approx([(16.0, 0.0), (16.0, 7.2), (100.0, 82.8)])


def test_cl_ml_band_outline_lies_between_pi_4_and_7_on_or_above_the_a_line() -> None:
    # REFERENCES.md: CL-ML for 4 <= PI <= 7 on or above the A-line.
    for ll, pi in cl_ml_band_points():
        assert 4.0 <= pi <= 7.0
        assert pi >= a_line(ll) - 1e-9


# ==================================================================================================
# The BS 5930 chart (British Soil Classification System), for jobs tested to BS / ISO
# ==================================================================================================
# Sources: the A-line PI = 0.73 (LL - 20) through LL 20, PI 0, and the ranges L below 35, H 50 to
# 70, E above 90 -- Smith, Smith's Elements of Soil Mechanics, BSCS summary after BS 5930:1981 and
# :1999 (public excerpts; confirmed). I 35 to 50 and V 70 to 90 -- from memory (the excerpt prints
# them garbled). Which range a shared end point takes is our reading (server/engine/plasticity_chart.py).


def test_bs_a_line_is_0_73_ll_minus_20_with_no_flat_part() -> None:
    # Smith, Elements of Soil Mechanics (BS 5930 BSCS): "goes through the base line at IP = 0, wL = 20".
    assert bs_a_line(20.0) == 0.0
    assert bs_a_line(70.0) == pytest.approx(36.5)
    # ASTM D2487 Fig. 4 holds the A-line at PI 4 below LL 25.5; the BS chart does not, so the same
    # low point is a silt by D2487 and a clay on the BS chart.
    assert chart_symbol(22.0, 2.0) == "ML"
    assert bs_chart_symbol(22.0, 2.0) == "CL"


@pytest.mark.parametrize(
    ("ll", "letter", "term"),
    [
        (20.0, "L", "low"),  # Smith (BS 5930): L below 35 (confirmed)
        (34.9, "L", "low"),
        (35.0, "I", "intermediate"),  # end point 35: the higher range (our reading)
        (49.9, "I", "intermediate"),  # I 35-50 (from memory)
        (50.0, "H", "high"),  # end point 50: high, as D2487 reads LL 50 (our reading)
        (69.9, "H", "high"),  # Smith (BS 5930): H 50-70 (confirmed)
        (70.0, "V", "very high"),  # end point 70 (our reading); V 70-90 from memory
        (89.9, "V", "very high"),
        (90.0, "E", "extremely high"),  # end point 90 (our reading); E above 90 confirmed
        (250.0, "E", "extremely high"),
    ],
)
def test_bs_plasticity_ranges_by_liquid_limit(ll: float, letter: str, term: str) -> None:
    assert bs_plasticity_range(ll) == (letter, term)


@pytest.mark.parametrize(
    ("ll", "pi", "symbol", "term"),
    [
        (30.0, 12.0, "CL", "clay of low plasticity"),  # A-line 7.3 at LL 30
        (40.0, 14.6, "CI", "clay of intermediate plasticity"),  # on the line (0.73 x 20): clay (our reading)
        (40.0, 14.5, "MI", "silt of intermediate plasticity"),  # below the line
        (60.0, 35.0, "CH", "clay of high plasticity"),  # A-line 29.2
        (60.0, 20.0, "MH", "silt of high plasticity"),
        (80.0, 50.0, "CV", "clay of very high plasticity"),  # A-line 43.8
        (80.0, 30.0, "MV", "silt of very high plasticity"),
        (110.0, 70.0, "CE", "clay of extremely high plasticity"),  # A-line 65.7
        (110.0, 40.0, "ME", "silt of extremely high plasticity"),
    ],
)
def test_bs_chart_symbols_and_terms(ll: float, pi: float, symbol: str, term: str) -> None:
    # Symbols C/M + L, I, H, V, E: BS 5930 BSCS (Smith, Elements of Soil Mechanics; I and V from memory).
    assert bs_chart_symbol(ll, pi) == symbol
    assert bs_plasticity_term(ll, pi) == term


def test_bs_chart_basis_names_the_line_the_ranges_and_the_end_point_rule() -> None:
    for part in ("0.73 (LL - 20)", "below 35", "35-50", "50-70", "70-90", "above 90", "higher range"):
        assert part in BS_BASIS
