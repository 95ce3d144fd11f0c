"""The closed readings models: every method has one, they take what the bench and the examples
write, and refuse a key no method reads."""

from __future__ import annotations

from typing import Any

import pytest

from server.api.examples import EXAMPLES
from server.engine import METHODS
from server.services import calculations, readings_shape
from server.services.errors import Invalid
from server.web.bench_forms import SHEETS, Input, Rows, Values


def test_every_engine_method_has_a_readings_model() -> None:
    assert set(readings_shape.MODELS) == set(METHODS)


@pytest.mark.parametrize("method", sorted(EXAMPLES))
def test_the_published_examples_are_of_their_methods_shape(method: str) -> None:
    assert readings_shape.refusals(method, EXAMPLES[method]) == []


def _filled(inp: Input) -> Any:
    """A value of the kind the bench stores for this input (``Input.value`` of typed text)."""
    if inp.kind == "choice":
        return inp.options[0].value
    if inp.kind == "flag":
        return True
    if inp.kind == "text":
        return "2026-12-01" if "due" in inp.key or inp.key == "tested_on" else "T-1"
    return inp.value("12.50")


def _put(tree: dict[str, Any], path: str, value: Any) -> None:
    parts = path.split(".")
    node: Any = tree
    for part, following in zip(parts, [*parts[1:], None], strict=True):
        key: Any = int(part) if part.isdigit() else part
        if following is None:
            if isinstance(node, list):
                node.extend([None] * (key + 1 - len(node)))
            node[key] = value
            return
        child: Any = [] if following.isdigit() else {}
        if isinstance(node, list):
            node.extend([None] * (key + 1 - len(node)))
            node[key] = node[key] if node[key] is not None else child
            node = node[key]
        else:
            node = node.setdefault(key, child)


@pytest.mark.parametrize("method", sorted(SHEETS))
def test_every_input_of_the_bench_sheet_is_a_reading_of_its_method(method: str) -> None:
    readings: dict[str, Any] = {}
    for section in SHEETS[method]:
        if isinstance(section, Values):
            for inp in section.inputs:
                _put(readings, inp.key, _filled(inp))
        else:
            assert isinstance(section, Rows)
            for inp in section.inputs:
                _put(readings, f"{section.path}.1.{inp.key}", _filled(inp))
    assert readings_shape.refusals(method, readings) == []


def test_a_key_no_method_reads_is_refused_at_its_place_beside_the_engines_words() -> None:
    readings = {"determinations": [{"tare": 15.2, "tare_g": "x", "wet_tare_g": 45.62, "dry_tare_g": 38.11}]}
    with pytest.raises(Invalid) as refused:
        calculations.calculate("water-content", readings)
    where = {tuple(e.loc): e.message for e in refused.value.errors}
    assert where[("readings", "determinations", 0, "tare")] == "not a reading of this method"
    assert "must be a number" in where[("readings", "determinations", 0, "tare_g")]  # the engine's words


def test_an_object_where_a_number_belongs_is_refused_even_where_tidying_would_drop_it() -> None:
    found = readings_shape.refusals("water-content", {"determinations": [{"dry_tare_g": {}}]})
    assert [e.loc for e in found] == [("readings", "determinations", 0, "dry_tare_g")]
