"""From bench form fields to readings JSON, and back.

Inputs are named by their JSON path (``liquid_limit.trials.2.blows``), so one rule turns any
method's form into the readings the engine takes, and an engine refusal's ``loc`` names the
input it belongs to. Trailing blank rows of a list are dropped (spare rows on the sheet);
a blank row between filled ones is kept so that row numbers still match what was typed.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping
from typing import Any

_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
_INTEGER = re.compile(r"^[+-]?\d+$")


def _value(text: str) -> Any:
    """A typed value: a number when it reads as one (a decimal comma too), otherwise the text
    as typed, for the engine to refuse with a field-level message."""
    typed = text.strip()
    number = typed.replace(",", ".")
    if not _NUMBER.match(number):
        return typed
    return int(number) if _INTEGER.match(number) else float(number)


def _is_blank(node: Any) -> bool:
    if isinstance(node, dict):
        return all(_is_blank(v) for v in node.values())
    if isinstance(node, list):
        return all(_is_blank(v) for v in node)
    return node is None or node == ""


def _listify(node: Any) -> Any:
    if not isinstance(node, dict):
        return node
    if node and all(isinstance(k, int) for k in node):
        items = [_listify(node[i]) if i in node else {} for i in range(max(node) + 1)]
        while items and _is_blank(items[-1]):
            items.pop()
        return items
    return {k: _listify(v) for k, v in node.items() if not _is_blank(v)}


def readings_from_form(fields: Iterable[tuple[str, str]], prefix: str = "r.") -> dict[str, Any]:
    """Nest ``prefix``-named form fields into readings JSON (other fields are ignored)."""
    root: dict[Any, Any] = {}
    for name, raw in fields:
        if not name.startswith(prefix):
            continue
        parts: list[Any] = [int(p) if p.isdigit() else p for p in name[len(prefix) :].split(".")]
        node = root
        for part in parts[:-1]:
            node = node.setdefault(part, {})
        node[parts[-1]] = _value(raw) if raw.strip() else ""
    result = _listify(root)
    return result if isinstance(result, dict) else {}


def lookup(readings: Mapping[str, Any] | None, path: str) -> Any:
    """The value at a dotted path of readings, or "" when absent (for prefilling inputs)."""
    node: Any = readings or {}
    for part in path.split("."):
        if isinstance(node, list) and part.isdigit() and int(part) < len(node):
            node = node[int(part)]
        elif isinstance(node, Mapping) and part in node:
            node = node[part]
        else:
            return ""
    return "" if node is None else node


def errors_by_path(errors: Iterable[Any]) -> dict[str, str]:
    """Engine refusals keyed by the dotted path of the input they concern."""
    out: dict[str, str] = {}
    for e in errors:
        loc = [str(p) for p in e.loc]
        if loc and loc[0] == "readings":
            loc = loc[1:]
        out.setdefault(".".join(loc), e.message)
    return out
