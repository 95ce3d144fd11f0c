"""Equipment used past its calibration due date: a quality flag of severity error.

Readings of any method may carry ``"tested_on": "2026-12-01"`` and ``"equipment": [{"id":
"BAL-02", "calibration_due": "2026-11-30"}]``. Equipment is in calibration up to and including
its due date (common practice: a calibration certificate states "valid until"). A result
obtained with equipment out of calibration is not refused (the readings are what they are) but
flagged so that a reviewer sees it (ISO/IEC 17025:2017 cl. 6.4.13 keeps the calibration status).
"""

from __future__ import annotations

from datetime import date
from typing import TYPE_CHECKING

from server.engine.readings import Readings

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
    """Flag equipment used past its calibration due date (severity error).

    Readings may carry ``"tested_on": "2026-12-01"`` and ``"equipment": [{"id": "BAL-02",
    "calibration_due": "2026-11-30"}]``; equipment is in calibration up to and including its due
    date. A part without its own test date uses the set's (``tested_on``). Returns the date used.
    """
    own = read_date(r, "tested_on", "test date")
    when = own or tested_on
    if "equipment" not in r.data:
        return when
    for item in r.items("equipment", noun="equipment item"):
        ident = item.text("id", required=True, max_length=60)
        due = read_date(item, "calibration_due", "calibration due date")
        if when is not None and due is not None and when > due:
            out.flag("equipment-calibration-expired", "error",
                     f"equipment {ident or '(no id)'} was past its calibration due date "
                     f"({due.isoformat()}) when the test was run ({when.isoformat()})")
    return when
