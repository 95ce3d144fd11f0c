"""Dotted paths into readings: one field read or changed at a time, the shape kept tidy."""

from __future__ import annotations

import pytest

from server.services.readings_paths import PathError, is_blank, parse, same, value_at, with_changes

DET = {"tare_g": 15.2, "wet_tare_g": 45.62, "dry_tare_g": 38.11}  # shape of DESIGN.md section 3


def test_a_path_names_keys_and_list_indexes() -> None:
    assert parse("liquid_limit.trials.2.blows") == ("liquid_limit", "trials", 2, "blows")
    assert parse("") == ()


@pytest.mark.parametrize("path", ["a..b", "a.b c", "a.-1", "trials.501.blows", "a.b.c.d.e.f.g.h.i", "é"])
def test_refuses_a_path_that_cannot_name_a_field(path: str) -> None:
    with pytest.raises(PathError):
        parse(path)


def test_reads_the_value_at_a_path_or_none() -> None:
    readings = {"liquid_limit": {"trials": [{"blows": 25, **DET}]}}
    assert value_at(readings, "liquid_limit.trials.0.blows") == 25
    assert value_at(readings, "liquid_limit.trials.1.blows") is None
    assert value_at(readings, "liquid_limit.method") is None
    assert value_at(None, "fines") is None


def test_setting_a_field_creates_the_rows_and_objects_on_the_way() -> None:
    got = with_changes(
        {}, [("liquid_limit.trials.0.blows", 25), ("liquid_limit.trials.0.penetration_mm.1", 17.5)]
    )
    assert got == {"liquid_limit": {"trials": [{"blows": 25, "penetration_mm": [None, 17.5]}]}}


def test_a_blank_row_between_typed_ones_stays_so_row_numbers_match_what_was_typed() -> None:
    got = with_changes({}, [("trials.2.blows", 18), ("trials.0.blows", 33)])
    assert got == {"trials": [{"blows": 33}, {}, {"blows": 18}]}


def test_clearing_the_last_rows_fields_drops_the_row_and_empty_parents() -> None:
    readings = {"trials": [{"blows": 33}, {"blows": 18}], "cone": "80g-30deg"}
    got = with_changes(readings, [("trials.1.blows", None)])
    assert got == {"trials": [{"blows": 33}], "cone": "80g-30deg"}
    assert with_changes(got, [("trials.0.blows", ""), ("cone", "")]) == {}


def test_changes_never_touch_the_readings_they_start_from() -> None:
    readings = {"determinations": [dict(DET)]}
    with_changes(readings, [("determinations.0.tare_g", 14.0)])
    assert readings == {"determinations": [DET]}


def test_the_empty_path_replaces_the_whole_readings() -> None:
    assert with_changes({"fines": 86.0}, [("", {"sand": 12.0})]) == {"sand": 12.0}


def test_false_and_zero_are_readings_not_blanks() -> None:
    assert not is_blank(False) and not is_blank(0) and is_blank({"a": [None, ""]})
    got = with_changes({}, [("not_determinable", False), ("pan_g", 0)])
    assert got == {"not_determinable": False, "pan_g": 0}


def test_the_same_reading_compares_numbers_by_value_and_blanks_alike() -> None:
    assert same(15, 15.0) and same(None, "") and same("T-17", "T-17")
    assert not same(15, 15.01) and not same(True, 1) and not same("", 0)
