"""The one formatting of values for people: rounding by the rule, the sign, U as GUM writes it."""

from __future__ import annotations

from datetime import UTC, date, datetime

import pytest

from server.engine.rounding import reported
from server.reports.formatting import (
    DASH,
    MINUS,
    Measured,
    moment,
    number,
    people,
    show,
    shown,
    signed,
    two_figures,
    typed,
    typeset,
    when,
    with_u,
)


@pytest.mark.parametrize(
    ("u", "text", "decimals"),
    [
        (0.0123, "0.012", 3),  # GUM (JCGM 100:2008) 7.2.6: at most two significant digits
        (28.05, "28", 0),  # GUM 7.2.6: "u(xi) = 28,05 kHz should be rounded down to 28 kHz"
        (0.027, "0.027", 3),  # GUM 7.2.6: uc(y) = 27 mΩ, quoted as is
        (10.47, "10", 0),  # GUM 7.2.6's 10,47 mΩ to the nearest (it allows rounding up to 11)
        (0.0996, "0.10", 2),  # rounding carries into a new digit: still two figures (common practice)
        (123.0, "120", -1),  # two figures of a U above 100 (common practice)
        (0.3, "0.30", 2),  # the trailing zero is a significant figure (common practice)
    ],
)
def test_an_expanded_uncertainty_keeps_two_significant_figures(u: float, text: str, decimals: int) -> None:
    assert two_figures(u) == (text, decimals)


def test_the_value_is_rounded_to_the_last_place_of_its_uncertainty() -> None:
    # GUM 7.2.6: "if y = 10,057 62 Ω with uc(y) = 27 mΩ, y should be rounded to 10,058 Ω";
    # void ratio is reported to 0.001 (server/engine/rounding.py), no coarser than U here
    assert str(with_u("void_ratio", 10.05762, 0.027)) == "10.058 ± 0.027"
    # water content to 0.1 % (ASTM D2216) and U = 1.23: both to 0.1
    assert with_u("water_content", 34.567, 1.23, 2) == Measured("34.6", "1.2", "2")
    # a larger U takes the value to a coarser place than the rule: 35 ± 12 (GUM 7.2.6)
    assert str(with_u("water_content", 34.567, 12.3, 2)) == "35 ± 12 (k = 2)"


def test_a_rule_coarser_than_the_uncertainty_keeps_the_reported_value_and_says_so() -> None:
    # LL is reported as a whole number (ASTM D4318 cl. 1.5): 34, never "34 ± 0"
    shown_u = with_u("liquid_limit", 34.21, 0.34, 2)
    assert shown_u == Measured("34", "0.34", "2", coarser=True)
    assert shown_u.u_text == "± 0.34 (k = 2)"
    assert "± 0 " not in str(shown_u) + " "


@pytest.mark.parametrize("u", [0.0, -1.0, float("nan"), None, "0.3"])
def test_no_uncertainty_is_shown_rather_than_plus_or_minus_zero(u: object) -> None:
    shown_u = with_u("liquid_limit", 34.21, u, 2)
    assert shown_u.u == "" and shown_u.u_text == "" and str(shown_u) == "34"


def test_a_rounded_zero_has_no_sign_and_people_read_a_real_minus() -> None:
    assert reported("sieve_mass_loss_pct", -0.04) == "-0.0"  # the engine's rule alone keeps the sign
    assert number("sieve_mass_loss_pct", -0.04) == "0.0"  # a rounded zero has no sign (common practice)
    assert signed("-0") == "0" and signed("-0.00") == "0.00" and signed("-0.01") == "-0.01"
    # the text keeps the hyphen-minus a spreadsheet reads; what a template prints has the minus
    # sign U+2212 (ISO 80000-2:2019 item 2-9.2, from memory)
    assert number("liquidity_index", -0.12) == "-0.12" and people("-0.12") == f"{MINUS}0.12"
    assert people("A-6 (14)") == "A-6 (14)" and people("ll-cone") == "ll-cone" and people(-3) == -3
    assert str(with_u("liquidity_index", -0.1234, 0.05)) == f"{MINUS}0.12 ± 0.050"


def test_results_and_readings_keep_their_text() -> None:
    assert show("water_content", 34.56) == "34.6"  # ASTM D2216 Method B: to 0.1 %
    assert show("uscs_symbol", "CL") == "CL" and show("x", None) == DASH and show("nonplastic", True) == "yes"
    assert shown("CL", "uscs_symbol") == "CL" and shown(None, "liquid_limit") == DASH
    assert typed(44.2) == "44.2" and typed("44.20") == "44.20" and typed([17.2, 17.5]) == "17.2, 17.5"
    assert typed(-1.5) == "-1.5" and typed(None) == DASH


def test_times_and_dates_read_the_same_on_pages_and_in_the_pdf() -> None:
    assert when(datetime(2026, 12, 4, 22, 41, tzinfo=UTC)) == "2026-12-04 22:41 UTC"
    assert when(date(2026, 12, 4)) == "2026-12-04" and when(None) == DASH
    assert moment("2026-12-04T22:41:07+00:00") == "2026-12-04 22:41 UTC"
    assert moment("2026-12-04T22:41:07-05:30") == f"2026-12-04 22:41 UTC{MINUS}05:30"
    assert moment("not a time") == "not a time"


def test_formula_text_is_typeset_and_escaped() -> None:
    # the correlations' own text (server/engine/interpretation.py)
    assert str(typeset("cu/sigma'v = 0.11 + 0.0037 PI")) == "c<sub>u</sub>/σ′<sub>v</sub> = 0.11 + 0.0037 PI"
    assert str(typeset("S = 2.16e-3 PI^2.44")) == f"S = 2.16 × 10<sup>{MINUS}3</sup> PI<sup>2.44</sup>"
    assert str(typeset("cu = 170 exp(-4.6 LI) kPa")) == f"c<sub>u</sub> = 170 exp({MINUS}4.6 LI) kPa"
    assert str(typeset("Cc = 0.009 (LL - 10)")) == f"C<sub>c</sub> = 0.009 (LL {MINUS} 10)"
    assert str(typeset("<b>ll-cone</b>")) == "&lt;b&gt;ll-cone&lt;/b&gt;"  # typed text stays text
