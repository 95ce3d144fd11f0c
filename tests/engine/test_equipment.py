"""Equipment past its calibration due date is flagged for every method, not refused."""

from __future__ import annotations

import pytest

from server.engine import calculate, evaluate

VANE = {"diameter_mm": 12.7, "height_mm": 12.7, "undisturbed": {"torque_nm": 0.0142}}


@pytest.mark.parametrize(
    "method, readings",
    [
        ("vane", VANE),
        ("water-content", {"determinations": [{"tare_g": 10.0, "wet_tare_g": 36.0, "dry_tare_g": 30.0}]}),
    ],
)
def test_any_method_flags_equipment_used_after_its_due_date(method: str, readings: dict[str, object]) -> None:
    late = {
        **readings,
        "tested_on": "2026-12-01",
        "equipment": [{"id": "BAL-02", "calibration_due": "2026-11-30"}],
    }
    flags = calculate(method, late).flags
    assert [(f.code, f.severity) for f in flags if f.code.startswith("equipment")] == [
        ("equipment-calibration-expired", "error")
    ]
    assert "BAL-02" in flags[-1].message or any("BAL-02" in f.message for f in flags)


def test_equipment_is_in_calibration_up_to_and_including_its_due_date() -> None:
    # common practice: a certificate is "valid until" its due date
    on_the_day = {
        **VANE,
        "tested_on": "2026-11-30",
        "equipment": [{"id": "V-1", "calibration_due": "2026-11-30"}],
    }
    assert not [f for f in calculate("vane", on_the_day).flags if f.code.startswith("equipment")]


@pytest.mark.parametrize("bad", ["30/11/2026", 20261130, "2026-13-01"])
def test_refuses_a_date_not_written_as_an_iso_date(bad: object) -> None:
    ev = evaluate("vane", {**VANE, "tested_on": bad})
    assert [e.loc for e in ev.errors] == [("readings", "tested_on")]
    assert "YYYY-MM-DD" in ev.errors[0].message
