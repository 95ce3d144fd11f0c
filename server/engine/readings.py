"""Reading raw JSON readings field by field, keeping every refusal with its place.

A ``Readings`` object wraps one JSON object of the readings. Asking it for a number either
returns the number or records a ``FieldError`` naming the field (its JSON path, for forms and
the API) and the rule broken (in words a technician understands, with the value and its unit),
then returns ``None`` so the caller can go on and find the next problem too.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

Loc = tuple[str | int, ...]


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


class Readings:
    """A view on one JSON object of readings that records refusals by field path.

    ``label`` is the human prefix of messages, for example ``"liquid limit, trial 2"``.
    Children share the parent's error list, so one list holds every refusal of a test.
    """

    __slots__ = ("data", "loc", "_label", "_item", "errors")

    def __init__(
        self,
        data: Mapping[Any, Any],
        loc: Loc = (),
        label: str = "",
        errors: list[FieldError] | None = None,
    ):
        self.data = data
        self.loc = loc
        self._label = label
        self._item: tuple[str, int] | None = None  # (noun, number) of a list item, labelled lazily
        self.errors: list[FieldError] = [] if errors is None else errors

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
        Numeric strings are accepted (form fields arrive as text); anything else is refused.
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
        if not math.isfinite(value):
            self.refuse(key, f"{name} must be a finite number")
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
        try:
            return float(raw.strip()) if isinstance(raw, str) else float(raw)
        except (ValueError, OverflowError):
            self.refuse(key, f"{name} must be a number, not {raw!r}")
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
        child = Readings({i: v for i, v in enumerate(raw)}, (*self.loc, key), self.label, self.errors)
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
        return Readings(raw, (*self.loc, key), label, self.errors)

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
        parent, loc, errors = self.label, (*self.loc, key), self.errors
        for i, item in enumerate(raw):
            if type(item) is not dict and not isinstance(item, Mapping):
                prefix = f"{parent}, {noun} {i + 1}" if parent else f"{noun} {i + 1}"
                errors.append(FieldError((*loc, i), f"{prefix} must be an object"))
                continue
            child = Readings(item, (*loc, i), parent, errors)
            child._item = (noun, i + 1)
            out.append(child)
        if len(raw) < min_items:
            self.refuse(key, f"at least {min_items} {noun}s are needed, {len(raw)} given", "missing")
        if max_items is not None and len(raw) > max_items:
            self.refuse(key, f"at most {max_items} {noun}s are allowed, {len(raw)} given")
        return out
