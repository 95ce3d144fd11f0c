"""From bench form fields to readings values, and back to the text an input shows.

Inputs are named by their JSON path in the readings (``r.liquid_limit.trials.2.blows``), so one
rule turns any method's form into changes of its readings and an engine refusal's ``loc`` names
the input it belongs to. Nothing here knows a method: the sheets (``bench_forms``) say which
paths a method's page has and what kind of value each one takes.
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from typing import Any

_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
_INTEGER = re.compile(r"^[+-]?\d+$")
VALUE_PREFIX = "r."  # an input's name: "r." + its readings path
FLAG_PREFIX = "f."  # a hidden marker that a tick box is on the form (an unticked box sends nothing)
MAX_TEXT = 200


def typed_value(text: str) -> Any:
    """A typed number (a decimal comma too), or the text as typed for the engine to refuse
    with a field-level message; blank text is None."""
    typed = text.strip()
    if not typed:
        return None
    number = typed.replace(",", ".")
    if not _NUMBER.match(number):
        return typed[:MAX_TEXT]
    if _INTEGER.match(number):
        return int(number)
    value = float(number)
    return value if value not in (float("inf"), float("-inf")) else typed[:MAX_TEXT]


def text_of(value: Any) -> str:
    """What an input shows for a stored value (and what the page compares when it autosaves)."""
    if value is None:
        return ""
    if value is True:
        return "true"
    if value is False:
        return ""
    if isinstance(value, float) and value.is_integer() and abs(value) < 1e15:
        return f"{value:.1f}"
    if isinstance(value, list | dict):
        return ""
    return str(value)


def form_fields(items: Iterable[tuple[str, Any]]) -> dict[str, str]:
    """The readings paths a posted form carries, with their text (the last of a repeated name),
    plus every tick box on the form that was left unticked, as blank."""
    values: dict[str, str] = {}
    flags: list[str] = []
    for name, raw in items:
        if not isinstance(raw, str):
            continue
        if name.startswith(VALUE_PREFIX):
            values[name[len(VALUE_PREFIX) :]] = raw
        elif name.startswith(FLAG_PREFIX):
            flags.append(name[len(FLAG_PREFIX) :])
    for path in flags:
        values.setdefault(path, "")
    return values


def dotted(loc: Iterable[Any]) -> str:
    """An engine refusal's ``loc`` as the dotted path of the input it concerns."""
    parts = [str(p) for p in loc]
    if parts and parts[0] == "readings":
        parts = parts[1:]
    return ".".join(parts)


def errors_by_path(errors: Iterable[Any], kinds: Iterable[str] | None = None) -> dict[str, str]:
    """Engine refusals (of these kinds, or all) keyed by the dotted path they concern; the first wins."""
    wanted = None if kinds is None else set(kinds)
    out: dict[str, str] = {}
    for e in errors:
        if wanted is None or e.kind in wanted:
            out.setdefault(dotted(e.loc), e.message)
    return out


def refusal_of(exc: Exception) -> tuple[dict[str, str], str]:
    """A service refusal as field messages (by form field) and the line shown above the form."""
    errors = getattr(exc, "errors", None)
    if errors and all(hasattr(e, "loc") for e in errors):
        return errors_by_path(errors), f"Nothing was saved: {exc}."
    return {}, f"Nothing was saved: {exc}."


def record_id(raw: str) -> int | None:
    """A record id as a form or query sends it (a select's value, ``?sample=``), or None when it
    is not one: only plain digits short enough for any backend's integer column are ids."""
    raw = raw.strip()
    return int(raw) if raw.isdigit() and len(raw) < 10 else None
