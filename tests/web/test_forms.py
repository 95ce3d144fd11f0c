"""Bench form fields to readings values and back: one rule for every method's inputs."""

from __future__ import annotations

import pytest

from server.engine import FieldError
from server.services.readings_paths import same
from server.web.forms import dotted, errors_by_path, form_fields, text_of, typed_value


@pytest.mark.parametrize(
    ("typed", "value"),
    [
        ("38.11", "38.11"),
        ("44.20", "44.20"),  # the trailing zero read off the balance stays (ISO/IEC 17025:2017 cl. 7.5.1)
        (" 38,11 ", "38.11"),  # a decimal comma, as many tablets' keypads give it (common practice)
        ("25", "25"),
        ("-0.5", "-0.5"),
        ("1e3", "1e3"),
        ("", None),
        ("   ", None),
        ("forty", "forty"),  # kept as typed, for the engine to refuse with its own words
        ("1e999", "1e999"),  # the engine refuses it as not finite
    ],
)
def test_a_typed_number_is_kept_as_its_decimal_text_and_anything_else_as_typed(
    typed: str, value: object
) -> None:
    got = typed_value(typed)
    assert got == value and type(got) is type(value)


@pytest.mark.parametrize(
    ("value", "text"),
    [
        (None, ""),
        (15.0, "15.0"),
        (38.11, "38.11"),
        (25, "25"),
        (True, "true"),
        (False, ""),
        ("T-17", "T-17"),
        ("44.20", "44.20"),  # stored as typed, shown as typed
    ],
)
def test_a_stored_value_shows_as_the_text_an_input_holds(value: object, text: str) -> None:
    assert text_of(value) == text


def test_a_stored_number_read_back_from_its_text_names_the_same_number() -> None:
    """A reading stored as a JSON number (before readings kept their text) re-typed as shown is
    the same reading: the text names the number exactly (computed)."""
    for value in (15.0, 38.11, 0.075, 1e-05, 123456.789):
        again = typed_value(text_of(value))
        assert isinstance(again, str) and float(again) == value and same(again, value)


def test_form_fields_keep_the_last_of_a_name_and_blank_an_unticked_box() -> None:
    items = [
        ("csrf_token", "x"),
        ("r.fines", "86"),
        ("r.fines", "87"),
        ("f.not_determinable", "1"),  # the tick box is on the form...
        ("f.peat", "1"),
        ("r.peat", "true"),  # ...and this one was ticked
        ("version", "3"),
    ]
    assert form_fields(items) == {"fines": "87", "not_determinable": "", "peat": "true"}


def test_refusals_are_keyed_by_the_path_of_their_input() -> None:
    errors = [
        FieldError(("readings", "liquid_limit", "trials", 1, "dry_tare_g"), "dry above wet"),
        FieldError(("readings", "liquid_limit", "trials", 1, "dry_tare_g"), "second message"),
        FieldError(("readings", "plastic_limit", "determinations"), "at least 2 needed", "missing"),
    ]
    assert dotted(errors[0].loc) == "liquid_limit.trials.1.dry_tare_g"
    assert errors_by_path(errors) == {
        "liquid_limit.trials.1.dry_tare_g": "dry above wet",
        "plastic_limit.determinations": "at least 2 needed",
    }
    assert errors_by_path(errors, kinds=("invalid",)) == {"liquid_limit.trials.1.dry_tare_g": "dry above wet"}
