"""Reading raw JSON readings field by field, keeping every refusal with its place.

A ``Readings`` object wraps one JSON object of the readings. Asking it for a number either
returns the number or records a ``FieldError`` naming the field (its JSON path, for forms and
the API) and the rule broken (in words a technician understands, with the value and its unit),
then returns ``None`` so the caller can go on and find the next problem too.

Readings as entered. An original observation is part of the record with every digit read,
trailing zeros included (ISO/IEC 17025:2017 cl. 7.5.1: original observations are recorded at
the time they are made): "44.20" read off a balance says more than 44.2. So a number typed at
the bench is stored as its decimal text ("44.20", see ``decimal_text``) and the engine computes
with the number that text names. A JSON number (an API client that sends numbers, and every
reading stored before readings kept their text) stays a number: its value is the record, and it
is shown by the shortest text that gives it back. Nothing is migrated: an old 44.2 still reads
44.2. ``as_entered`` gives the text of any stored reading, for every page, report and export.

Plausible values only. A reading the engine cannot represent (not finite, beyond 10^12 in size,
nearer zero than 10^-9 without being zero, or written with more than 30 characters) and a mass
above the capacity of the balance the readings name (10 kg when none is named) are refused at
the field, never stored.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

Loc = tuple[str | int, ...]

DECIMAL = re.compile(r"^[+-]?([0-9]+(\.[0-9]*)?|\.[0-9]+)([eE][+-]?[0-9]+)?$")
"""A decimal number as readings hold it in text: ASCII digits, a point, an optional exponent
(no "nan", "inf", digit separators or other scripts' digits, which ``float`` would accept)."""

MAX_MAGNITUDE = 1e12
"""The largest size of any reading (in its own unit): far beyond every quantity a soils bench
measures, and small enough that no formula of the engine overflows from it."""

MIN_MAGNITUDE = 1e-9
"""The smallest size of a reading other than zero: below anything a soils bench measures in the
units of the readings (g, mm, N·m, min), and large enough that no formula underflows to a
division by zero."""

MAX_NUMBER_TEXT = 30
"""The most characters of a number written as text: more digits than any instrument reads."""

DEFAULT_CAPACITY_G = 10_000.0
"""The heaviest mass accepted when the readings name no balance with a capacity: 10 kg, more
than an index-testing bench weighs (common practice); a heavier mass is a typing or unit slip."""

NOT_WEIGHED = frozenset({"capacity_g", "resolution_g", "calibration_u_g", "cone_mass_g"})
"""Keys ending in ``_g`` that are not masses put on the test's balance: the balance's own
figures and the nominal mass of the cone, so a balance's capacity does not bound them."""


def decimal_text(typed: str) -> str | None:
    """A typed number as readings store it, or None when the text is not a number.

    Surrounding blanks are dropped and a decimal comma becomes a point (tablet keypads give
    either, common practice); every digit stays as typed, so "44,20" is kept as "44.20".
    """
    text = typed.strip().replace(",", ".")
    return text if DECIMAL.match(text) else None


def as_number(value: Any) -> float | None:
    """The number a stored reading names (a JSON number or decimal text), None when it names
    none; for code outside the engine that compares readings with results (a sieve's row)."""
    if isinstance(value, bool):
        return None
    if isinstance(value, int | float):
        number = float(value)
    elif isinstance(value, str) and len(value.strip()) <= MAX_NUMBER_TEXT and DECIMAL.match(value.strip()):
        number = float(value.strip())
    else:
        return None
    return number if math.isfinite(number) else None


def as_entered(value: Any) -> str:
    """A stored reading as text, as it was entered: what the bench shows after a reload, the
    review page, the report's "readings as entered", the audit trail and the exports print.

    Text (every number typed at the bench) is shown as stored: "44.20" stays "44.20". A JSON
    number is shown by the shortest text that gives it back (44.2 -> "44.2", 15.0 -> "15.0"):
    digits it never carried cannot be shown. A list (repeat cone drops) is its entries joined
    by ", "; true and false are words; nothing stored is "".
    """
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    if isinstance(value, str):
        return value
    if isinstance(value, list | tuple):
        return ", ".join(as_entered(v) for v in value)
    return str(value)


@dataclass(frozen=True)
class FieldError:
    """One refused field: where it is (JSON path) and why, in plain words.

    ``kind`` tells a value that is wrong ("invalid": never stored) from one not typed yet
    ("missing": a bench draft may be saved without it, but the test cannot be submitted).
    """

    loc: Loc
    message: str
    kind: str = "invalid"

    def to_dict(self) -> dict[str, Any]:
        return {"loc": list(self.loc), "msg": self.message, "type": self.kind}


def fmt(value: float, unit: str = "") -> str:
    """Show a typed value back to the technician as typed, with its unit."""
    text = f"{value:g}"
    return f"{text} {unit}" if unit else text


@dataclass(frozen=True)
class Capacity:
    """The heaviest mass a reading may hold: the capacity of the balance the readings name
    (``balance`` its id), or ``DEFAULT_CAPACITY_G`` when they name none (``balance`` None)."""

    grams: float
    balance: str | None = None

    def words(self) -> str:
        if self.balance is None:
            return (
                f"{fmt(self.grams, 'g')}, the most accepted when no balance with a capacity is "
                "named: name the balance used, or check the units"
            )
        return f"the capacity of balance {self.balance} ({fmt(self.grams, 'g')})"


DEFAULT_CAPACITY = Capacity(DEFAULT_CAPACITY_G)


class Readings:
    """A view on one JSON object of readings that records refusals by field path.

    ``label`` is the human prefix of messages, for example ``"liquid limit, trial 2"``.
    Children share the parent's error list, so one list holds every refusal of a test, and
    inherit its ``capacity`` (the heaviest mass any ``*_g`` reading may hold), which
    ``equipment.check_equipment`` sets from the balance the readings name before masses are read.
    """

    __slots__ = ("data", "loc", "_label", "_item", "errors", "capacity")

    def __init__(
        self,
        data: Mapping[Any, Any],
        loc: Loc = (),
        label: str = "",
        errors: list[FieldError] | None = None,
        capacity: Capacity = DEFAULT_CAPACITY,
    ):
        self.data = data
        self.loc = loc
        self._label = label
        self._item: tuple[str, int] | None = None  # (noun, number) of a list item, labelled lazily
        self.errors: list[FieldError] = [] if errors is None else errors
        self.capacity = capacity

    @property
    def label(self) -> str:
        """The human prefix of this object's messages, built only when a message needs it."""
        if self._item is None:
            return self._label
        noun, number = self._item
        return f"{self._label}, {noun} {number}" if self._label else f"{noun} {number}"

    # -- refusals -------------------------------------------------------------------------
    def refuse(self, key: str | int | None, message: str, kind: str = "invalid") -> None:
        """Record a refusal of ``key`` (or of this whole object when key is None).

        ``kind="missing"`` marks something not entered yet rather than entered wrong.
        """
        loc = self.loc if key is None else (*self.loc, key)
        text = f"{self.label}: {message}" if self.label else message
        self.errors.append(FieldError(loc, text, kind))

    def has_errors_under(self, key: str | int | None = None) -> bool:
        """True when a refusal was recorded at or below this object (or its ``key``)."""
        prefix = self.loc if key is None else (*self.loc, key)
        n = len(prefix)
        return any(e.loc[:n] == prefix for e in self.errors)

    # -- fields ---------------------------------------------------------------------------
    def present(self, key: str | int) -> bool:
        return key in self.data and self.data[key] is not None and self.data[key] != ""

    def number(
        self,
        key: str | int,
        *,
        name: str,
        unit: str = "",
        required: bool = True,
        minimum: float | None = None,
        maximum: float | None = None,
        above: float | None = None,
        integer: bool = False,
    ) -> float | None:
        """A finite number within bounds, or None with the refusal recorded.

        ``minimum``/``maximum`` are inclusive bounds, ``above`` an exclusive lower bound.
        Numeric strings are accepted (the bench stores typed numbers as text); anything else is
        refused, as is a number beyond ``MAX_MAGNITUDE`` and, for a mass (a key ending in ``_g``
        but not in ``NOT_WEIGHED``), one above the capacity of the balance.
        """
        raw: Any = self.data.get(key)
        kind = type(raw)
        value: float | None
        if kind is float:  # the common cases, kept fast: the engine reads many numbers
            value = raw
        elif kind is int and -(2**53) < raw < 2**53:
            value = float(raw)
        else:
            value = self._parse_number(key, raw, name=name, required=required)
        if value is None:
            return None
        if not -MAX_MAGNITUDE <= value <= MAX_MAGNITUDE:  # also false for NaN
            if not math.isfinite(value):
                self.refuse(key, f"{name} must be a finite number")
            else:
                self.refuse(
                    key,
                    f"{name} ({fmt(value, unit)}) is too large to be a reading: "
                    "check the units and the decimal point",
                )
            return None
        if -MIN_MAGNITUDE < value < MIN_MAGNITUDE and value != 0.0:
            self.refuse(
                key,
                f"{name} ({fmt(value, unit)}) is too small to be a reading: "
                "check the units and the decimal point",
            )
            return None
        if integer and value != int(value):
            self.refuse(key, f"{name} must be a whole number, not {fmt(value)}")
            return None
        if minimum is not None and value < minimum:
            self.refuse(key, f"{name} ({fmt(value, unit)}) is below {fmt(minimum, unit)}")
            return None
        if above is not None and value <= above:
            self.refuse(key, f"{name} ({fmt(value, unit)}) must be above {fmt(above, unit)}")
            return None
        if maximum is not None and value > maximum:
            self.refuse(key, f"{name} ({fmt(value, unit)}) is above {fmt(maximum, unit)}")
            return None
        if value > self.capacity.grams and type(key) is str and key.endswith("_g") and key not in NOT_WEIGHED:
            self.refuse(key, f"{name} ({fmt(value, unit)}) is above {self.capacity.words()}")
            return None
        return int(value) if integer else value

    def _parse_number(self, key: str | int, raw: Any, *, name: str, required: bool) -> float | None:
        """The slow path of ``number``: absent values, numeric text, and refusals."""
        if raw is None or raw == "":
            if required:
                self.refuse(key, f"{name} is required", "missing")
            return None
        if isinstance(raw, bool) or not isinstance(raw, str | int | float):
            self.refuse(key, f"{name} must be a number, not {raw!r}")
            return None
        if isinstance(raw, str):
            text = raw.strip()
            if len(text) > MAX_NUMBER_TEXT:
                self.refuse(
                    key,
                    f"{name} is written with {len(text)} characters; a reading has at most {MAX_NUMBER_TEXT}",
                )
                return None
            if not DECIMAL.match(text):
                self.refuse(key, f"{name} must be a number, not {text!r}")
                return None
            return float(text)  # "1e999" gives inf, refused by the caller as not finite
        try:
            return float(raw)
        except OverflowError:  # an integer too large for a float
            self.refuse(key, f"{name} is too large to be a reading: check the units and the decimal point")
            return None

    def numbers(
        self,
        key: str,
        *,
        name: str,
        unit: str = "",
        min_items: int = 1,
        minimum: float | None = None,
        maximum: float | None = None,
        above: float | None = None,
    ) -> list[float] | None:
        """A list of numbers (for example repeat cone penetrations), each checked."""
        raw = self.data.get(key)
        if raw is None or raw == "" or raw == []:
            self.refuse(key, f"{name} is required", "missing")
            return None
        if not isinstance(raw, Sequence) or isinstance(raw, str):
            raw = [raw]
        child = Readings(
            {i: v for i, v in enumerate(raw)}, (*self.loc, key), self.label, self.errors, self.capacity
        )
        values: list[float] = []
        for i in range(len(raw)):
            v = child.number(
                i,
                name=f"{name} {i + 1}",
                unit=unit,
                minimum=minimum,
                maximum=maximum,
                above=above,
            )
            if v is not None:
                values.append(v)
        if len(values) != len(raw):
            return None
        if len(values) < min_items:
            self.refuse(key, f"{name}: at least {min_items} needed, {len(values)} given", "missing")
            return None
        return values

    def choice(
        self, key: str, *, name: str, choices: Sequence[str], default: str | None = None
    ) -> str | None:
        """One of a fixed set of words (a cone type, a specimen state)."""
        if not self.present(key):
            if default is not None:
                return default
            self.refuse(key, f"{name} is required (one of {', '.join(choices)})", "missing")
            return None
        raw = self.data[key]
        if raw not in choices:
            self.refuse(key, f"{name} must be one of {', '.join(choices)}, not {raw!r}")
            return None
        return str(raw)

    def text(self, key: str, *, required: bool = False, max_length: int = 200) -> str | None:
        """Free text such as a container id; trimmed, bounded in length."""
        if not self.present(key):
            if required:
                self.refuse(key, f"{key} is required", "missing")
            return None
        raw = self.data[key]
        if not isinstance(raw, str | int):
            self.refuse(key, f"{key} must be text")
            return None
        value = str(raw).strip()
        if len(value) > max_length:
            self.refuse(key, f"{key} is longer than {max_length} characters")
            return None
        return value

    def child(self, key: str, *, label: str, required: bool = True) -> Readings | None:
        """A nested object of readings (the liquid-limit part of an Atterberg set)."""
        if not self.present(key):
            if required:
                self.refuse(key, f"{label} readings are required", "missing")
            return None
        raw = self.data[key]
        if not isinstance(raw, Mapping):
            self.refuse(key, f"{label} readings must be an object")
            return None
        return Readings(raw, (*self.loc, key), label, self.errors, self.capacity)

    def items(
        self, key: str, *, noun: str, min_items: int = 0, max_items: int | None = None
    ) -> list[Readings]:
        """A list of objects (trials, determinations), each labelled "noun n" after this label."""
        raw = self.data.get(key)
        if raw is None:
            raw = []
        if type(raw) is not list and (not isinstance(raw, Sequence) or isinstance(raw, str)):
            self.refuse(key, f"{noun}s must be a list")
            return []
        out: list[Readings] = []
        parent, loc, errors, capacity = self.label, (*self.loc, key), self.errors, self.capacity
        for i, item in enumerate(raw):
            if type(item) is not dict and not isinstance(item, Mapping):
                prefix = f"{parent}, {noun} {i + 1}" if parent else f"{noun} {i + 1}"
                errors.append(FieldError((*loc, i), f"{prefix} must be an object"))
                continue
            child = Readings(item, (*loc, i), parent, errors, capacity)
            child._item = (noun, i + 1)
            out.append(child)
        if len(raw) < min_items:
            self.refuse(key, f"at least {min_items} {noun}s are needed, {len(raw)} given", "missing")
        if max_items is not None and len(raw) > max_items:
            self.refuse(key, f"at most {max_items} {noun}s are allowed, {len(raw)} given")
        return out
