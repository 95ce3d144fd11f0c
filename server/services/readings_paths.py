"""Dotted paths into readings JSON: read one value, change a few, keep the shape tidy.

A bench field is named by its path in the readings (``liquid_limit.trials.2.blows``; a part
made of digits is a list index), so a single field can be saved on its own and an engine
refusal's ``loc`` names the field it concerns. Changing values here never computes anything
about soil; it only edits JSON.

Tidy shape: a cleared field (None or "") is removed, an object or list left empty is removed,
and blank entries at the end of a list are dropped (the spare rows of a sheet). A blank entry
between filled ones stays, as ``{}`` or ``None``, so that row numbers still match what was typed.
"""

from __future__ import annotations

import copy
import math
from collections.abc import Iterable, Mapping
from typing import Any

from server.engine.readings import as_entered

Part = str | int
MAX_INDEX = 500  # no sheet has this many rows; a larger index is a wrong request, not a reading
MAX_DEPTH = 8


class PathError(ValueError):
    """A path that cannot name a field of readings."""


def parse(path: str) -> tuple[Part, ...]:
    """``"liquid_limit.trials.2.blows"`` -> ``("liquid_limit", "trials", 2, "blows")``; ``""`` -> ``()``."""
    if path == "":
        return ()
    parts: list[Part] = []
    for text in path.split("."):
        if text.isdigit() and text.isascii():
            index = int(text)
            if index > MAX_INDEX:
                raise PathError(f"row {index + 1} is beyond the last row a sheet can have")
            parts.append(index)
        elif text and (text.replace("_", "").isalnum() and text.isascii()):
            parts.append(text)
        else:
            raise PathError(f"{path!r} is not a field path")
    if len(parts) > MAX_DEPTH:
        raise PathError(f"{path!r} is nested too deeply")
    return tuple(parts)


def is_blank(value: Any) -> bool:
    """Nothing typed: None, "", or an object or list holding only blanks."""
    if value is None or value == "":
        return True
    if isinstance(value, Mapping):
        return all(is_blank(v) for v in value.values())
    if isinstance(value, list):
        return all(is_blank(v) for v in value)
    return False


def value_at(readings: Mapping[str, Any] | None, path: str) -> Any:
    """The value at ``path``, or None when there is none."""
    node: Any = readings or {}
    for part in parse(path):
        if isinstance(part, int) and isinstance(node, list) and part < len(node):
            node = node[part]
        elif isinstance(part, str) and isinstance(node, Mapping) and part in node:
            node = node[part]
        else:
            return None
    return node


def _is_number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def same(a: Any, b: Any) -> bool:
    """Whether two field values are the same reading: blanks alike, numbers by value, text as
    typed ("44.20" is not "44.2": a digit more was read), and a number stored as a JSON number
    (before readings kept their text) the same as the text it shows as (44.2 and "44.2"), so
    that re-saving what a page showed is no change and no conflict."""
    if is_blank(a) and is_blank(b):
        return True
    if isinstance(a, bool) or isinstance(b, bool):
        return a is b
    if _is_number(a) and _is_number(b):
        fa, fb = float(a), float(b)
        return fa == fb or (math.isnan(fa) and math.isnan(fb))
    if (_is_number(a) and isinstance(b, str)) or (isinstance(a, str) and _is_number(b)):
        return as_entered(a) == as_entered(b)
    return bool(a == b)


def _container(next_part: Part) -> Any:
    return [] if isinstance(next_part, int) else {}


def _set(node: Any, parts: tuple[Part, ...], value: Any) -> Any:
    """``node`` with ``value`` at ``parts``, creating objects and lists on the way."""
    if not parts:
        return value
    head, rest = parts[0], parts[1:]
    if isinstance(head, int):
        items = node if isinstance(node, list) else []
        while len(items) <= head:
            items.append({} if rest and isinstance(rest[0], str) else None)
        items[head] = _set(items[head], rest, value) if rest else value
        return items
    obj = node if isinstance(node, dict) else {}
    child = obj.get(head)
    if rest and not isinstance(child, dict | list):
        child = _container(rest[0])
    obj[head] = _set(child, rest, value) if rest else value
    return obj


def tidy(node: Any) -> Any:
    """The same readings without blanks (see the module docstring); blank rows inside lists stay."""
    if isinstance(node, dict):
        out = {}
        for key, value in node.items():
            kept = tidy(value)
            if not is_blank(kept):
                out[key] = kept
        return out
    if isinstance(node, list):
        items = [tidy(v) for v in node]
        while items and is_blank(items[-1]):
            items.pop()
        return [({} if isinstance(v, dict) else None) if is_blank(v) else v for v in items]
    return node


def with_changes(readings: Mapping[str, Any] | None, changes: Iterable[tuple[str, Any]]) -> dict[str, Any]:
    """A copy of ``readings`` with each (path, value) applied in order, tidied.

    The path ``""`` replaces the whole readings. A blank value clears the field.
    """
    root: Any = copy.deepcopy(dict(readings or {}))
    for path, value in changes:
        root = _set(root, parse(path), copy.deepcopy(value))
    result = tidy(root)
    return result if isinstance(result, dict) else {}
