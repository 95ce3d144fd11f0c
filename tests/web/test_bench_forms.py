"""The sheets are data: one mechanism turns each method's readings shape into its bench form.

The check readings are the engine's own example requests (server/api/examples.py), one per
method, which a test of the API already computes: a sheet that covers them field by field,
and gives them back unchanged from what its inputs show, is a sheet for that method.
"""

from __future__ import annotations

from typing import Any

import pytest

from server.api.examples import EXAMPLES
from server.engine import METHODS, evaluate
from server.engine.readings import as_entered
from server.services.readings_paths import tidy, with_changes
from server.web.bench import sheet_texts
from server.web.bench_forms import RESULT_LINES, SHEETS, Input, Option, Rows, Values, input_at


def leaves(node: Any, prefix: str = "") -> dict[str, Any]:
    """Every scalar of some readings by its dotted path."""
    if isinstance(node, dict):
        out: dict[str, Any] = {}
        for key, value in node.items():
            out.update(leaves(value, f"{prefix}{key}."))
        return out
    if isinstance(node, list):
        out = {}
        for i, value in enumerate(node):
            out.update(leaves(value, f"{prefix}{i}."))
        return out
    return {prefix[:-1]: node}


def test_every_method_of_the_engine_has_a_bench_sheet() -> None:
    assert set(SHEETS) == set(METHODS)


@pytest.mark.parametrize("method", sorted(EXAMPLES))
def test_every_reading_of_the_methods_example_has_its_input(method: str) -> None:
    missing = [path for path in leaves(EXAMPLES[method]) if input_at(method, path) is None]
    assert not missing


@pytest.mark.parametrize("method", sorted(EXAMPLES))
def test_what_the_inputs_show_reads_back_as_the_same_readings_and_results(method: str) -> None:
    example = EXAMPLES[method]
    shown = sheet_texts(method, example)
    changes = []
    for path, text in shown.items():
        inp = input_at(method, path)
        assert inp is not None
        changes.append((path, inp.value(text)))
    typed = with_changes({}, changes)
    # numbers come back as the text the inputs showed (readings as entered), every one the same reading
    entered = {path: as_entered(value) for path, value in leaves(typed).items()}
    assert entered == {path: as_entered(value) for path, value in leaves(tidy(example)).items()}
    assert sheet_texts(method, typed) == shown
    assert evaluate(method, typed).results == evaluate(method, example).results


def test_a_path_the_sheet_does_not_have_is_no_input() -> None:
    assert input_at("atterberg", "liquid_limit.trials.0.blows") is not None
    assert input_at("atterberg", "liquid_limit.trials.8.blows") is None  # beyond the 8 rows it allows
    assert input_at("atterberg", "liquid_limit.trials.x.blows") is None
    # instruments are listed once, at the top of the readings
    assert input_at("atterberg", "liquid_limit.equipment.0.id") is None
    assert input_at("no-such-method", "fines") is None


def test_every_input_has_a_label_and_numbers_ask_for_a_numeric_keypad() -> None:
    for method, sections in SHEETS.items():
        for section in sections:
            assert section.title, method
            for inp in section.inputs:
                assert inp.label, (method, inp.key)
                if inp.kind == "decimal":
                    assert inp.inputmode == "decimal"
                if inp.kind == "integer":
                    assert inp.inputmode == "numeric"


def test_every_table_shows_at_least_its_first_rows_and_allows_more() -> None:
    for sections in SHEETS.values():
        for section in sections:
            if isinstance(section, Rows):
                assert 1 <= section.rows <= section.max_rows


def test_a_value_is_read_by_the_kind_of_its_input() -> None:
    angles = (Option(30, "30°"), Option(60, "60°"))
    angle = Input("cone_angle_deg", "Cone angle", kind="choice", options=angles)
    assert angle.value("30") == 30 and angle.value("45") == "45" and angle.value("") is None
    assert Input("not_determinable", "Cannot be determined", kind="flag").value("true") is True
    assert Input("container", "Tin no.", kind="text").value(" 007 ") == "007"  # a tin number stays text
    # a typed number is kept as its decimal text, trailing zero and all (ISO/IEC 17025:2017 cl. 7.5.1)
    assert Input("tare_g", "Empty tin", "g").value("15,20") == "15.20"
    assert Input("blows", "Blows", kind="integer").value("25") == "25"


def test_the_atterberg_sheet_asks_for_blows_with_the_cup_and_drops_with_the_cone() -> None:
    trials = next(s for s in SHEETS["atterberg"] if isinstance(s, Rows) and s.path == "liquid_limit.trials")
    by_key = {inp.key: inp for inp in trials.inputs}
    assert by_key["blows"].when is not None and "ll-cup-multipoint" in by_key["blows"].when.values
    drop = by_key["penetration_mm.0"].when
    assert drop is not None and drop.values == ("ll-cone",)
    assert by_key["tare_g"].when is None
    methods = next(s for s in SHEETS["atterberg"] if isinstance(s, Values) and s.title == "Liquid limit")
    choice = methods.inputs[0]
    assert choice.key == "liquid_limit.method" and {o.value for o in choice.options} == {
        "ll-cup-multipoint",
        "ll-cup-one-point",
        "ll-cone",
    }


def test_every_sheet_asks_for_the_test_date_and_the_instruments_used() -> None:
    for method in SHEETS:
        assert input_at(method, "tested_on") is not None, method
        assert input_at(method, "equipment.0.id") is not None, method
        assert input_at(method, "equipment.0.calibration_due") is not None, method


S12_METHODS = ("particle-density", "linear-shrinkage", "density", "loss-on-ignition", "compaction")


def _rows(method: str, path: str) -> Rows:
    return next(s for s in SHEETS[method] if isinstance(s, Rows) and s.path == path)


def test_each_compaction_point_asks_for_its_tins_as_the_water_content_sheet_does() -> None:
    points = _rows("compaction", "points")
    by_key = {inp.key: inp for inp in points.inputs}
    tins = _rows("water-content", "determinations").inputs
    for inp in tins:
        first = by_key[f"determinations.0.{inp.key}"]
        assert (first.label, first.unit, first.kind) == (inp.label, inp.unit, inp.kind)
        second = by_key[f"determinations.1.{inp.key}"]
        assert (second.unit, second.kind, second.hint) == (inp.unit, inp.kind, "optional")
    assert input_at("compaction", "points.9.determinations.1.dry_tare_g") is not None
    assert input_at("compaction", "points.10.determinations.0.tare_g") is None  # ten points at most
    assert input_at("compaction", "points.0.determinations.2.tare_g") is None  # two tins a point


def test_the_density_sheet_takes_its_water_content_as_the_water_content_sheet_does() -> None:
    nested = _rows("density", "water_content.determinations")
    assert nested.inputs == _rows("water-content", "determinations").inputs
    assert nested.outputs == _rows("water-content", "determinations").outputs


def test_the_bar_condition_and_the_compactive_effort_are_choices_of_the_engines_words() -> None:
    condition = input_at("linear-shrinkage", "condition")
    effort = input_at("compaction", "effort")
    assert condition is not None and condition.kind == "choice"
    assert [o.value for o in condition.options] == ["intact", "cracked", "curled"]  # DESIGN.md section 8
    assert effort is not None and effort.kind == "choice"
    assert [o.value for o in effort.options] == ["standard", "modified"]  # DESIGN.md section 8
    assert effort.value("modified") == "modified" and effort.value("heavy") == "heavy"  # the engine refuses


@pytest.mark.parametrize("method", S12_METHODS)
def test_every_number_the_new_methods_give_has_its_line_on_the_results_panel(method: str) -> None:
    lines = {line.key for line in RESULT_LINES}
    results = evaluate(method, EXAMPLES[method]).results
    numbers = [k for k, v in results.items() if isinstance(v, int | float) and not isinstance(v, bool)]
    assert numbers and not [k for k in numbers if k not in lines]


@pytest.mark.parametrize("method", S12_METHODS)
def test_the_new_sheets_name_the_instruments_to_list(method: str) -> None:
    equipment = _rows(method, "equipment")
    assert equipment.note.startswith("List the ") and "register" in equipment.note
    assert input_at(method, "balance.resolution_g") is not None or method == "linear-shrinkage"
