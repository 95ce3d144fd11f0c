"""Checking the values of a register form or request, every bad field named at once.

The use-cases of intake (clients, jobs, locations, samples, receipt) take values as a page
posts them (text) or as the API and the import hand them over (numbers, dates); ``Checks``
reads either, so the same value gets the same refusal at every front door, and a form with
three mistakes shows three messages instead of one at a time.
"""

from __future__ import annotations

import math
import re
from datetime import date, datetime
from typing import NoReturn

from server.engine import FieldError
from server.services.errors import Invalid

Number = float | int | str | None
Day = date | str | None

_CONTROL = re.compile(r"[\x00-\x1f\x7f]")
_EMAIL = re.compile(r"^[^@\s]+@[^@\s]+\.[^@\s]+$")
_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d{1,3})?$")


class Checks:
    """Collects field-level refusals; ``done()`` raises them all together, or returns."""

    def __init__(self) -> None:
        self.errors: list[FieldError] = []

    def add(self, field: str, message: str) -> None:
        self.errors.append(FieldError((field,), message))

    def errors_for(self, field: str) -> bool:
        return any(e.loc == (field,) for e in self.errors)

    def text(self, field: str, value: str | None, label: str, max_len: int, *, required: bool = False) -> str:
        """Text stripped of surrounding blanks; too long, or blank when required, is refused."""
        text = (value or "").strip()
        if required and not text:
            self.add(field, f"{label} is required")
        elif len(text) > max_len:
            self.add(field, f"{label} is {len(text)} characters long; at most {max_len} are kept")
        return text

    def code(self, field: str, value: str | None, label: str, max_len: int = 32) -> str:
        """A code written on a record or a label: required, one line, at most ``max_len``."""
        text = self.text(field, value, label, max_len, required=True)
        if _CONTROL.search(text):
            self.add(field, f"{label} must be one line of printable characters")
        return text

    def number(
        self,
        field: str,
        value: Number,
        label: str,
        unit: str,
        low: float,
        high: float,
        *,
        required: bool = False,
    ) -> float | None:
        """A finite number within [low, high]; text may use a decimal comma; blank is None."""
        if value is None or (isinstance(value, str) and not value.strip()):
            if required:
                self.add(field, f"{label} is required")
            return None
        if isinstance(value, str):
            typed = value.strip().replace(",", ".")
            if not _NUMBER.match(typed):
                self.add(field, f"{label} must be a number of {unit}, not {value.strip()[:40]!r}")
                return None
            number = float(typed)
        else:
            number = float(value)
        if not math.isfinite(number):
            self.add(field, f"{label} must be a finite number of {unit}")
            return None
        if not low <= number <= high:
            self.add(field, f"{label} must be from {low:g} to {high:g} {unit}, not {number:g}")
            return None
        return number

    def day(self, field: str, value: Day, label: str, *, required: bool = False) -> date | None:
        """A calendar date (YYYY-MM-DD as a date picker sends it); blank is None."""
        if isinstance(value, date):
            return value.date() if isinstance(value, datetime) else value
        text = (value or "").strip()
        if not text:
            if required:
                self.add(field, f"{label} is required")
            return None
        try:
            return date.fromisoformat(text)
        except ValueError:
            self.add(field, f"{label} must be a date written YYYY-MM-DD, not {text[:40]!r}")
            return None

    def choice(self, field: str, value: str | None, label: str, allowed: dict[str, str]) -> str:
        """One of a vocabulary's ids (the stored value), else refused listing the labels."""
        text = (value or "").strip()
        if text not in allowed:
            self.add(field, f"{label} must be one of: {', '.join(allowed.values())}")
        return text

    def email(self, field: str, value: str | None, label: str) -> str:
        text = self.text(field, value, label, 254)
        if text and not _EMAIL.match(text):
            self.add(field, f"{label} {text[:60]!r} is not an e-mail address")
        return text

    def done(self) -> None:
        if self.errors:
            raise Invalid(self.errors)


def refuse(field: str, message: str) -> NoReturn:
    """Refuse one field at once (for checks that need the database)."""
    raise Invalid([FieldError((field,), message)])
