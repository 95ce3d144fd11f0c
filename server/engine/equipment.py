"""Equipment used past its calibration due date: a quality flag of severity error; and the
capacity of the balance named, which bounds every mass of the readings.

Readings of any method may carry ``"tested_on": "2026-12-01"`` and ``"equipment": [{"id":
"BAL-02", "calibration_due": "2026-11-30", "capacity_g": 6200}]``. Equipment is in calibration
up to and including its due date (common practice: a calibration certificate states "valid
until"). A result obtained with equipment out of calibration is not refused (the readings are
what they are) but flagged so that a reviewer sees it (ISO/IEC 17025:2017 cl. 6.4.13 keeps the
calibration status). A mass above what the balance can weigh cannot have been read from it: it
is a typing or unit slip, refused at its field (``Readings.capacity``).
"""

from __future__ import annotations

from datetime import date
from typing import TYPE_CHECKING

from server.engine.readings import Capacity, Readings

if TYPE_CHECKING:  # contract imports this module to check every method's equipment
    from server.engine.contract import Outcome


def read_date(r: Readings, key: str, name: str) -> date | None:
    """An ISO date (YYYY-MM-DD), or None with the refusal recorded."""
    if not r.present(key):
        return None
    raw = r.data[key]
    if isinstance(raw, str):
        try:
            return date.fromisoformat(raw.strip())
        except ValueError:
            pass
    r.refuse(key, f"{name} must be a date written YYYY-MM-DD, not {raw!r}")
    return None


def check_equipment(r: Readings, out: Outcome, tested_on: date | None = None) -> date | None:
    """Flag equipment used past its calibration due date (severity error), and bound the masses
    of these readings by the capacity of the balance they name.

    Readings may carry ``"tested_on": "2026-12-01"`` and ``"equipment": [{"id": "BAL-02",
    "calibration_due": "2026-11-30", "capacity_g": 6200}]``; equipment is in calibration up to
    and including its due date. A part without its own test date uses the set's (``tested_on``).
    Where several balances are named, a mass is plausible up to the largest capacity (it may have
    been weighed on that one). Called before the method reads any mass. Returns the date used.
    """
    own = read_date(r, "tested_on", "test date")
    when = own or tested_on
    if "equipment" not in r.data:
        return when
    largest: Capacity | None = None
    for item in r.items("equipment", noun="equipment item"):
        ident = item.text("id", required=True, max_length=60)
        due = read_date(item, "calibration_due", "calibration due date")
        if when is not None and due is not None and when > due:
            out.flag("equipment-calibration-expired", "error",
                     f"equipment {ident or '(no id)'} was past its calibration due date "
                     f"({due.isoformat()}) when the test was run ({when.isoformat()})")
        capacity = item.number("capacity_g", name="capacity", unit="g", required=False, above=0.0)
        if capacity is not None and (largest is None or capacity > largest.grams):
            largest = Capacity(capacity, ident or "(no id)")
    if largest is not None:
        r.capacity = largest
    return when
