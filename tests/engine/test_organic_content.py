"""Organic content by loss on ignition (ASTM D2974-14; BS 1377-3:1990 cl. 4)."""

from __future__ import annotations

import math
from typing import Any

import pytest

from server.engine import calculate, evaluate

DET = {"crucible_g": 21.402, "crucible_dry_g": 31.455, "crucible_ignited_g": 30.871}


def _codes(ev: Any) -> dict[str, str]:
    return {f.code: f.severity for f in ev.flags}


def test_organic_content_is_the_mass_lost_over_the_dry_mass() -> None:
    # hand-worked from BS 1377-3:1990 cl. 4 (= 100 - ash content, ASTM D2974-14 section 4.4):
    # (31.455 - 30.871) / (31.455 - 21.402) x 100 = 0.584 / 10.053 x 100 = 5.809211 %
    ev = calculate("loss-on-ignition", {"determinations": [DET], "furnace_c": 440})
    assert ev.results["organic_content"] == pytest.approx(5.809211, abs=1e-6)
    assert ev.results["organic_content_determinations"] == [pytest.approx(5.809211, abs=1e-6)]
    assert ev.flags == []


def test_the_determinations_are_averaged() -> None:
    # hand-worked as above: 0.586 / 10.059 x 100 = 5.825629 %; mean with 5.809211 is 5.817420 %
    second = {"crucible_g": 20.918, "crucible_dry_g": 30.977, "crucible_ignited_g": 30.391}
    ev = calculate("loss-on-ignition", {"determinations": [DET, second], "furnace_c": 440})
    assert ev.results["organic_content_determinations"] == [
        pytest.approx(5.809211, abs=1e-6),
        pytest.approx(5.825629, abs=1e-6),
    ]
    assert ev.results["organic_content"] == pytest.approx(5.817420, abs=1e-6)


def test_uncertainty_follows_first_order_propagation_of_the_three_weighings() -> None:
    # JCGM 100:2008 eq. 10 with a = 0.584 g lost, b = 10.053 g dry soil: sensitivities 100 (b - a)/b^2,
    # -100/b, 100 a/b^2; each weighing u = sqrt(0.01^2/12 + 0.005^2) g (the default balance)
    a, b = 0.584, 10.053
    u_mass = math.sqrt(0.01**2 / 12 + 0.005**2)
    expected = u_mass * 100 * math.sqrt(((b - a) / b**2) ** 2 + (1 / b) ** 2 + (a / b**2) ** 2)
    ev = calculate("loss-on-ignition", {"determinations": [DET], "furnace_c": 440})
    assert ev.results["uncertainty"]["organic_content"]["u"] == pytest.approx(expected, rel=1e-9)


@pytest.mark.parametrize(
    ("furnace", "flagged"),
    [
        (440, False),  # ASTM D2974-14 Method C and BS 1377-3 cl. 4
        (400, False),  # 440 - 40 °C, the edge of Method C's window (D2974-14 section 1.1.3)
        (480, False),
        (481, True),
        (550, True),  # between the two ASTM windows
        (712, False),  # 750 - 38 °C, the edge of Method D's window (D2974-14 section 1.1.4)
        (750, False),
        (800, True),
    ],
)
def test_a_furnace_outside_both_astm_windows_is_flagged_and_the_result_kept(
    furnace: float, flagged: bool
) -> None:
    ev = calculate("loss-on-ignition", {"determinations": [DET], "furnace_c": furnace})
    assert ("furnace-temperature-nonstandard" in _codes(ev)) is flagged
    assert ev.results["organic_content"] == pytest.approx(5.809211, abs=1e-6)  # same arithmetic (DESIGN.md 8)
    if flagged:
        assert _codes(ev)["furnace-temperature-nonstandard"] == "warning"


@pytest.mark.parametrize(
    ("change", "field", "words"),
    [
        ({"crucible_ignited_g": 31.500}, "crucible_ignited_g", "does not add mass"),
        ({"crucible_ignited_g": 21.000}, "crucible_ignited_g", "below the crucible"),
        ({"crucible_dry_g": 21.402}, "crucible_dry_g", "no dry soil"),
        ({"crucible_g": -0.5}, "crucible_g", "below 0 g"),
    ],
)
def test_impossible_masses_are_refused_at_their_field(change: dict[str, Any], field: str, words: str) -> None:
    ev = evaluate("loss-on-ignition", {"determinations": [{**DET, **change}], "furnace_c": 440})
    (error,) = ev.errors
    assert error.loc == ("readings", "determinations", 0, field) and words in error.message
    assert "organic_content" not in ev.results


def test_the_furnace_temperature_is_required_and_bounded() -> None:
    (error,) = evaluate("loss-on-ignition", {"determinations": [DET]}).errors
    assert (error.loc, error.kind) == (("readings", "furnace_c"), "missing")
    (error,) = evaluate("loss-on-ignition", {"determinations": [DET], "furnace_c": 0}).errors
    assert error.loc == ("readings", "furnace_c") and error.kind == "invalid"
    (error,) = evaluate("loss-on-ignition", {"determinations": [DET], "furnace_c": 4400}).errors
    assert "above 1200 °C" in error.message
