"""From bench form fields to readings values, and back to the text an input shows.

Inputs are named by their JSON path in the readings (``r.liquid_limit.trials.2.blows``), so one
rule turns any method's form into changes of its readings and an engine refusal's ``loc`` names
the input it belongs to. Nothing here knows a method: the sheets (``bench_forms``) say which
paths a method's page has and what kind of value each one takes.

A typed number is stored as its decimal text, digits kept ("44.20" stays "44.20"; see
``server.engine.readings``): an original observation is recorded as it was read.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

from server.engine.readings import as_entered, decimal_text

VALUE_PREFIX = "r."  # an input's name: "r." + its readings path
FLAG_PREFIX = "f."  # a hidden marker that a tick box is on the form (an unticked box sends nothing)
MAX_TEXT = 200


def typed_value(text: str) -> str | None:
    """What a number field stores for the text typed: the number as decimal text with every digit
    typed (a decimal comma becomes a point: "44,20" -> "44.20"), or the text as typed for the
    engine to refuse with a field-level message; blank text is None.

    The text is kept rather than turned into a float, which would drop the trailing zeros the
    technician read ("44.20" -> 44.2); the engine computes with the number the text names."""
    typed = text.strip()
    if not typed:
        return None
    return decimal_text(typed) or typed[:MAX_TEXT]


def text_of(value: Any) -> str:
    """What an input shows for a stored value (and what the page compares when it autosaves):
    the reading as entered (``as_entered``); a tick box's false and a list or object show blank."""
    if value is False or isinstance(value, list | dict):
        return ""
    return as_entered(value)


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
