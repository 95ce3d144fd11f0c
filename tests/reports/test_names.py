"""The display names: every method, flag, state, role and audit event the code defines has one.

The flag codes and audit events are found by reading the sources (``ast``), not by a list kept
here: a new ``out.flag("...")``, ``Flag(...)``, flag dict or ``audit.record(...)`` without a name
fails the test. A call whose code the scan cannot read (a variable) must be listed in
``RESOLVED_BY_HAND`` with where its values come from, so it cannot slip through either.
"""

from __future__ import annotations

import ast
from collections.abc import Iterator
from pathlib import Path

import pytest

from server.engine import METHODS
from server.engine.contract import _IMPLAUSIBLE
from server.reports import names
from server.workflow.states import Role, Status

SERVER = Path(__file__).resolve().parents[2] / "server"
FLAG_SOURCES = ("engine", "services", "quality")
# Calls whose code is a variable, and the values it takes (read from the code beside it).
RESOLVED_BY_HAND: dict[tuple[str, str], tuple[str, ...]] = {
    # flag_implausible loops over _IMPLAUSIBLE; Outcome.flag passes its argument on
    ("engine/contract.py", "code"): tuple(code for code, _, _ in _IMPLAUSIBLE),
    # Flag.to_dict writes the code the Flag was made with
    ("engine/contract.py", "self.code"): (),
    # samples._update(record: Location | Sample, entity, ...)
    ("services/samples.py", "entity"): ("location", "sample"),
}


def _modules(*folders: str) -> Iterator[tuple[str, ast.Module]]:
    for folder in folders:
        for path in sorted((SERVER / folder).rglob("*.py")):
            yield str(path.relative_to(SERVER)), ast.parse(path.read_text(encoding="utf-8"))


def _assigned(tree: ast.Module) -> dict[str, list[ast.expr]]:
    """What each plain name is assigned anywhere in the module (``NAME = ...``, ``code = a if c else b``)."""
    out: dict[str, list[ast.expr]] = {}
    for node in ast.walk(tree):
        if isinstance(node, ast.Assign) and len(node.targets) == 1 and isinstance(node.targets[0], ast.Name):
            out.setdefault(node.targets[0].id, []).append(node.value)
    return out


def _values(where: str, node: ast.expr, assigned: dict[str, list[ast.expr]]) -> tuple[str, ...]:
    """The strings an argument can be: a literal, either side of ``a if c else b``, what a name is
    assigned in the module, or what ``RESOLVED_BY_HAND`` says; fails on anything else."""
    if isinstance(node, ast.Constant) and isinstance(node.value, str):
        return (node.value,)
    if isinstance(node, ast.IfExp):
        return _values(where, node.body, assigned) + _values(where, node.orelse, assigned)
    if isinstance(node, ast.Name) and node.id in assigned:
        return tuple(v for expr in assigned[node.id] for v in _values(where, expr, assigned))
    key = (where, ast.unparse(node))
    assert key in RESOLVED_BY_HAND, f"{where}: cannot read {ast.unparse(node)}; add it to RESOLVED_BY_HAND"
    return RESOLVED_BY_HAND[key]


def flag_codes() -> set[str]:
    """Every code passed to ``flag(...)``/``Flag(...)`` or written as a {"code", "severity"} dict."""
    codes: set[str] = set()
    for where, tree in _modules(*FLAG_SOURCES):
        assigned = _assigned(tree)
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and node.args:
                func = node.func
                called = func.attr if isinstance(func, ast.Attribute) else getattr(func, "id", "")
                if called in ("flag", "Flag"):
                    codes.update(_values(where, node.args[0], assigned))
            elif isinstance(node, ast.Dict):
                keys = {
                    k.value: v
                    for k, v in zip(node.keys, node.values, strict=True)
                    if isinstance(k, ast.Constant)
                }
                if "code" in keys and "severity" in keys:
                    codes.update(_values(where, keys["code"], assigned))
    return codes


def audit_events() -> set[tuple[str, str]]:
    """(entity, action) of every ``audit.record(session, actor, entity, id, action, ...)`` call."""
    events: set[tuple[str, str]] = set()
    for where, tree in _modules("services", "web", "api", "tasks"):
        assigned = _assigned(tree)
        for node in ast.walk(tree):
            if (
                isinstance(node, ast.Call)
                and isinstance(node.func, ast.Attribute)
                and node.func.attr == "record"
                and isinstance(node.func.value, ast.Name)
                and node.func.value.id == "audit"
            ):
                assert len(node.args) >= 5, f"{where}:{node.lineno}: audit.record without entity and action"
                for entity in _values(where, node.args[2], assigned):
                    for action in _values(where, node.args[4], assigned):
                        events.add((entity, action))
    return events


def test_the_scan_finds_the_flags_and_events_it_must() -> None:
    # A scan that found nothing would pass the tests below; these are codes the engine raises
    # (server/engine/liquid_limit.py, equipment.py, contract.py) and events the review writes.
    codes = flag_codes()
    assert {"blows-out-of-range", "equipment-calibration-expired", "implausible-water-content"} <= codes
    assert {
        "reference-soil-out-of-control",
        "duplicate-outside-precision",
    } <= codes  # services/quality_charts.py
    assert {("lab_test", "approve"), ("report", "issue"), ("user", "deactivate")} <= audit_events()


def test_every_flag_code_the_code_can_raise_has_a_name() -> None:
    missing = sorted(flag_codes() - set(names.FLAG_NAMES))
    assert not missing, f"flag codes without a display name in server/reports/names.py: {missing}"


def test_every_audit_event_the_services_write_has_a_name() -> None:
    missing = sorted(audit_events() - set(names.EVENT_NAMES))
    assert not missing, f"audit events without a display name in server/reports/names.py: {missing}"


def test_no_name_is_kept_for_a_flag_or_event_the_code_no_longer_raises() -> None:
    assert not set(names.FLAG_NAMES) - flag_codes()
    assert not set(names.EVENT_NAMES) - audit_events()


@pytest.mark.parametrize("method_id", sorted(METHODS))
def test_every_method_has_a_name_in_words(method_id: str) -> None:
    name = names.method_name(method_id)
    # words with spaces, not an id such as ll-cup-multipoint
    assert name != method_id and name[0].isupper() and " " in name, name


def test_every_state_and_role_has_a_name_and_every_state_a_symbol() -> None:
    for status in Status:
        assert names.state_name(status) in names.STATE_NAMES.values()
        assert names.state_mark(status)
    for role in Role:
        assert names.role_name(role) in names.ROLE_NAMES.values()
    assert (
        names.state_name(Status.submitted) == "awaiting review"
    )  # workflow/states.py NEXT_STEP says the same


def test_an_unknown_id_still_reads_as_words() -> None:
    assert names.flag_name("new-check-code") == "New check code"
    assert names.event_name("lab_test", "new_thing") == "Lab test: new thing"
    assert names.method_name("no-such-method") == "no-such-method"  # an id the registry lacks stays as given


@pytest.mark.parametrize(
    ("n", "singular", "given", "expected"),
    [
        (1, "day", None, "1 day"),
        (4, "test", None, "4 tests"),
        (0, "sample", None, "0 samples"),
        (2, "box", None, "2 boxes"),
        (3, "quantity", None, "3 quantities"),
        (2, "analysis", "analyses", "2 analyses"),
    ],
)
def test_plural_agrees_with_the_count(n: int, singular: str, given: str | None, expected: str) -> None:
    # English plural rules (common practice): -s, -es after s/x/z/ch/sh, -ies after a consonant and y
    assert names.plural(n, singular, given) == expected


@pytest.mark.parametrize(
    ("word", "expected"),
    [
        ("instrument", "an instrument"),
        ("test", "a test"),
        ("unit", "a unit"),
        ("hour", "an hour"),
        ("error", "an error"),
        ("LL test", "an LL test"),  # letters read by name: "el-el" (common practice)
        ("PI", "a PI"),
    ],
)
def test_the_article_follows_the_first_sound(word: str, expected: str) -> None:
    assert names.with_article(word) == expected
