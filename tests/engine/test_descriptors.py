"""Class words for plasticity, state, consistency, activity and sensitivity, boundaries included."""

from __future__ import annotations

import math

import pytest

from server.engine.descriptors import (
    activity_class,
    consistency_class,
    describe,
    plasticity_basis,
    plasticity_class,
    sensitivity_class,
    state_class,
)


@pytest.mark.parametrize(
    ("pi", "word"),
    [
        (0, "non-plastic"),
        (1, "slight"),
        (5, "slight"),
        (6, "low"),
        (10, "low"),
        (11, "medium"),
        (20, "medium"),
        (21, "high"),
        (40, "high"),
        (41, "very high"),
    ],
)
def test_plasticity_follows_burmister_with_boundaries_in_the_lower_class(pi: float, word: str) -> None:
    # Burmister (1949) via REFERENCES.md; "> 40 very high" puts 40 in "high", boundaries read alike.
    assert plasticity_class(pi) == word


@pytest.mark.parametrize(
    ("ci", "word"),
    [
        (0.10, "very soft"),
        (0.25, "soft"),
        (0.49, "soft"),
        (0.50, "firm"),
        (0.74, "firm"),
        (0.75, "stiff"),
        (1.00, "stiff"),
        (1.01, "very stiff"),
    ],
)
def test_consistency_follows_iso_14688_2(ci: float, word: str) -> None:
    # ISO 14688-2 bands (confirmed; wording from memory): < 0.25, 0.25-0.50, 0.50-0.75, 0.75-1.00, > 1.00.
    assert consistency_class(ci) == word


@pytest.mark.parametrize(
    ("a", "word"), [(0.5, "inactive"), (0.75, "normal"), (1.25, "normal"), (1.26, "active")]
)
def test_activity_follows_skempton(a: float, word: str) -> None:
    # Skempton (1953): inactive < 0.75, normal 0.75-1.25, active > 1.25 (REFERENCES.md).
    assert activity_class(a) == word


@pytest.mark.parametrize(
    ("st", "word"),
    [
        (1.0, "insensitive"),
        (1.5, "low sensitivity"),
        (2.0, "low sensitivity"),
        (3.0, "medium sensitivity"),
        (4.0, "medium sensitivity"),
        (6.0, "sensitive"),
        (8.0, "sensitive"),
        (12.0, "extra-sensitive"),
        (16.0, "extra-sensitive"),
        (16.5, "quick"),
    ],
)
def test_sensitivity_follows_skempton_and_northey(st: float, word: str) -> None:
    # Skempton & Northey (1952): ~1, 1-2, 2-4, 4-8, 8-16, > 16 (confirmed, REFERENCES.md).
    assert sensitivity_class(st) == word


@pytest.mark.parametrize("st", [0.0, -2.0, math.inf, math.nan, True])
def test_sensitivity_class_refuses_a_ratio_that_is_not_positive(st: float) -> None:
    with pytest.raises(ValueError):
        sensitivity_class(st)


@pytest.mark.parametrize(
    ("li", "word"), [(-0.1, "semi-solid or solid"), (0.0, "plastic"), (1.0, "plastic"), (1.2, "liquid")]
)
def test_state_by_liquidity_index(li: float, word: str) -> None:
    # LI below 0 drier than PL, 0-1 plastic, above 1 liquid (definition of the index; common practice).
    assert state_class(li) == word


def test_describe_names_only_what_the_results_allow() -> None:
    assert describe({"nonplastic": True}) == {"plasticity": "non-plastic"}
    assert describe({"nonplastic": False, "plasticity_index": 19.0}) == {"plasticity": "medium"}


@pytest.mark.parametrize("end_point", [5, 10, 20, 40])
def test_a_pi_on_a_shared_end_point_takes_the_lower_class(end_point: float) -> None:
    # Burmister (1949) via REFERENCES.md: ranges 1-5, 5-10, 10-20, 20-40 share their end points; the
    # engine's rule (PLASTICITY_END_POINTS): the end point goes with the range below it.
    assert plasticity_class(end_point) == plasticity_class(end_point - 0.5)
    assert plasticity_class(end_point) != plasticity_class(end_point + 0.5)


def test_plasticity_basis_names_the_table_and_the_end_point_rule() -> None:
    basis = plasticity_basis()
    assert set(basis) == {"table", "end_points"}
    assert basis["table"].startswith("Burmister (1949)")  # REFERENCES.md "Indices"
    assert "lower class" in basis["end_points"]
    # The rule as written must be the rule as computed: each end point it names, in its class.
    for pi, word in ((5, "slight"), (10, "low"), (20, "medium"), (40, "high")):
        assert f"{pi} {word}" in basis["end_points"]
        assert plasticity_class(pi) == word
