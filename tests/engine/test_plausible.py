"""Plausible values only (S7 point 6): masses above the balance's capacity, numbers the engine
cannot represent and non-finite numbers are refused at the field; no result is ever Infinity or
NaN; an implausible result is flagged as an error for the reviewer."""

from __future__ import annotations

import copy
import json
import math
from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from server.api.examples import EXAMPLES
from server.engine import evaluate
from server.engine.contract import IMPLAUSIBLE_PERCENT, drop_non_finite
from server.engine.readings import DEFAULT_CAPACITY_G, as_entered, as_number, decimal_text
from tests.support.scenario import ATTERBERG

WET = ("readings", "determinations", 0, "wet_tare_g")
BALANCE = {"id": "BAL-02", "calibration_due": "2099-12-31", "capacity_g": 600}  # a 600 g top-pan balance


def _water(wet: Any, *, tare: Any = 10.00, dry: Any = 30.00, **extra: Any) -> dict[str, Any]:
    return {"determinations": [{"tare_g": tare, "wet_tare_g": wet, "dry_tare_g": dry}], **extra}


def _refusal(readings: dict[str, Any], method: str = "water-content") -> tuple[tuple[Any, ...], str, str]:
    (error,) = evaluate(method, readings).errors
    return error.loc, error.kind, error.message


# -- masses and the balance ---------------------------------------------------------------------


def test_a_mass_above_the_named_balances_capacity_is_refused_at_its_field() -> None:
    # a balance cannot read a load above its capacity, so such a mass is a slip (common practice)
    loc, kind, message = _refusal(_water(612.40, equipment=[BALANCE]))
    assert (loc, kind) == (WET, "invalid")
    assert "wet mass plus tare (612.4 g) is above the capacity of balance BAL-02 (600 g)" in message
    assert evaluate("water-content", _water("612.40", equipment=[BALANCE])).errors  # typed text alike
    assert evaluate("water-content", _water(600.0, equipment=[BALANCE])).ok  # up to the capacity itself


def test_without_a_named_balance_a_mass_is_accepted_up_to_ten_kilograms() -> None:
    assert DEFAULT_CAPACITY_G == 10_000.0  # the S7 issue's bound where no balance is named
    assert evaluate("water-content", _water(10_000.0)).ok
    loc, kind, message = _refusal(_water(10_000.01))
    assert (loc, kind) == (WET, "invalid") and "above 10000 g" in message and "name the balance" in message
    assert _refusal(_water(1_000_000.0))[1] == "invalid"  # 1,000 kg, from the S7 probe


def test_a_larger_balance_named_admits_heavier_masses_and_its_capacity_is_no_mass() -> None:
    floor_scale = {"id": "BAL-30", "calibration_due": "2099-12-31", "capacity_g": 30_000}  # 30 kg
    sieve = {"dry_mass_g": 12_000.0, "sieves": [{"size_mm": 20.0, "retained_g": 3_000.0}]}
    assert not evaluate("sieve", sieve).ok  # 12 kg above the 10 kg default
    assert evaluate("sieve", {**sieve, "equipment": [floor_scale]}).ok
    both = [BALANCE, floor_scale]  # weighed on one of two balances: up to the larger (common practice)
    assert evaluate("water-content", _water(900.0, equipment=both)).ok


def test_every_part_of_an_atterberg_set_is_bounded_by_the_balance_the_set_names() -> None:
    readings = copy.deepcopy(ATTERBERG)
    readings["equipment"] = [BALANCE]
    readings["liquid_limit"]["trials"][1]["wet_tare_g"] = 638.16  # a slip of a 6 before 38.16
    (error,) = evaluate("atterberg", readings).errors
    assert error.loc == ("readings", "liquid_limit", "trials", 1, "wet_tare_g") and error.kind == "invalid"
    assert "capacity of balance BAL-02" in error.message


# -- what the engine cannot represent ----------------------------------------------------------


@pytest.mark.parametrize(
    ("wet", "words"),
    [
        (1e300, "too large to be a reading"),  # from the S7 probe
        ("1e300", "too large to be a reading"),
        (10**400, "too large to be a reading"),  # an integer no float holds
        (float("nan"), "must be a finite number"),
        (float("inf"), "must be a finite number"),
        ("1e999", "must be a finite number"),
        ("nan", "must be a number"),
        ("Infinity", "must be a number"),
        ("1_000", "must be a number"),  # a digit separator Python's float would accept
        ("٤٤", "must be a number"),  # digits of another script, likewise
        ("44.2000000000000000000000000001", "at most 30"),  # 31 characters: more than any balance reads
        (1e-300, "too small to be a reading"),
    ],
)
def test_a_value_the_engine_cannot_represent_is_refused_at_its_field(wet: Any, words: str) -> None:
    loc, kind, message = _refusal(_water(wet))
    assert (loc, kind) == (WET, "invalid") and words in message


def test_zero_is_a_reading_and_a_dry_mass_equal_to_the_tare_is_refused_not_divided_by() -> None:
    assert evaluate("water-content", _water(36.0, tare=0, dry=30.0)).ok  # a tared balance reads 0 g
    loc, kind, message = _refusal(_water(36.0, dry=10.0))  # ASTM D2216: no dry soil, no water content
    assert kind == "invalid" and "there is no dry soil" in message


def _leaves(node: Any, path: tuple[Any, ...] = ()) -> list[tuple[Any, ...]]:
    if isinstance(node, dict):
        return [p for k, v in node.items() for p in _leaves(v, (*path, k))]
    if isinstance(node, list):
        return [p for i, v in enumerate(node) for p in _leaves(v, (*path, i))]
    return [path] if isinstance(node, int | float) and not isinstance(node, bool) else []


def _set(node: Any, path: tuple[Any, ...], value: Any) -> None:
    for part in path[:-1]:
        node = node[part]
    node[path[-1]] = value


EXTREMES = [0, 0.0, 1e-9, 1e-8, 1e-3, 1.0, 100.0, 9_999.0, 10_000.0, 1e6, 1e11, 1e12, -1e12, "1e-300", 5e-324]


@settings(max_examples=400, deadline=None)
@given(st.sampled_from(sorted(EXAMPLES)), st.data())
def test_no_result_is_ever_infinite_or_nan_and_nothing_raises(method: str, data: st.DataObject) -> None:
    """Any numbers of any method's example changed to extremes (computed property)."""
    readings = copy.deepcopy(EXAMPLES[method])
    paths = _leaves(readings)
    for path in data.draw(st.lists(st.sampled_from(paths), min_size=1, max_size=len(paths))):
        _set(readings, path, data.draw(st.sampled_from(EXTREMES)))
    ev = evaluate(method, readings)
    json.dumps(ev.to_dict(), allow_nan=False)  # raises on Infinity or NaN anywhere in the results


def test_the_last_guard_replaces_a_non_finite_result_by_nothing() -> None:
    results: dict[str, Any] = {"a": 1.0, "b": math.inf, "c": [2.0, math.nan, {"d": -math.inf}]}
    assert drop_non_finite(results)
    assert results == {"a": 1.0, "b": None, "c": [2.0, None, {"d": None}]}
    assert not drop_non_finite({"a": [1.0, {"b": 2}]})


# -- implausible results -----------------------------------------------------------------------


def _codes(ev: Any) -> dict[str, str]:
    return {f.code: f.severity for f in ev.flags}


def test_a_water_content_above_1000_percent_is_an_error_for_the_reviewer() -> None:
    assert IMPLAUSIBLE_PERCENT == 1000.0  # the S7 issue's bound
    # ASTM D2216 formula: (120.00 - 20.00) / (20.00 - 10.00) x 100 = 1000 % exactly: not above (computed)
    assert "implausible-water-content" not in _codes(evaluate("water-content", _water(120.00, dry=20.00)))
    ev = evaluate("water-content", _water(120.10, dry=20.00))  # 1001 % (computed)
    assert ev.ok and _codes(ev)["implausible-water-content"] == "error"
    assert "1001 %" in next(f.message for f in ev.flags if f.code == "implausible-water-content")


def test_a_limit_above_1000_percent_is_an_error_for_the_reviewer() -> None:
    # one-point cup at 25 blows: LL = w (ASTM D4318 Method B, factor 1.000); w = 12.00 / 1.00 = 1200 %
    one_point = {"trials": [{"blows": 25, "tare_g": 10.00, "wet_tare_g": 23.00, "dry_tare_g": 11.00}]}
    codes = _codes(evaluate("ll-cup-one-point", one_point))
    assert codes["implausible-liquid-limit"] == "error" and codes["implausible-water-content"] == "error"
    # two threads at 1100 % and 1150 % (computed): PL 1125 %
    plastic = {
        "determinations": [
            {"tare_g": 10.00, "wet_tare_g": 22.00, "dry_tare_g": 11.00},
            {"tare_g": 10.00, "wet_tare_g": 22.50, "dry_tare_g": 11.00},
        ]
    }
    assert _codes(evaluate("plastic-limit", plastic))["implausible-plastic-limit"] == "error"


def test_the_published_atterberg_example_has_no_implausible_flag() -> None:
    # Das problem set and Liu & Evett worked example (tests/support/scenario.py): LL 40, PL 21
    assert not [c for c in _codes(evaluate("atterberg", ATTERBERG)) if c.startswith("implausible")]


# -- the reading as entered ---------------------------------------------------------------------


@pytest.mark.parametrize(
    ("typed", "stored"),
    [("44.20", "44.20"), (" 44,20 ", "44.20"), ("+5", "+5"), (".5", ".5"), ("1e3", "1e3"), ("4 4", None)],
)
def test_typed_numbers_keep_their_digits(typed: str, stored: str | None) -> None:
    assert decimal_text(typed) == stored  # a decimal comma is a point (common practice)


def test_every_stored_reading_has_one_text_as_entered_and_one_number() -> None:
    cases = [("44.20", "44.20", 44.2), (44.2, "44.2", 44.2), (15.0, "15.0", 15.0), (25, "25", 25.0)]
    for value, text, number in cases:
        assert (as_entered(value), as_number(value)) == (text, number)
    assert (
        as_entered(None) == "" and as_entered(True) == "true" and as_entered([17.2, "17.50"]) == "17.2, 17.50"
    )
    assert as_number("forty") is None and as_number(True) is None and as_number("1e999") is None
