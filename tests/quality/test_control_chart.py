"""Control-chart limits and run rules (server/quality/control_chart.py).

The history used throughout: ten results 30, 31, 29, 30, 31, 29, 30, 31, 29, 30 (our own). By
hand: mean 300 / 10 = 30.0; squared deviations 0 + 1 + 1 + 0 + 1 + 1 + 0 + 1 + 1 + 0 = 6;
sample variance 6 / 9; σ = 0.8165; warning limits 30 ± 1.633, action limits 30 ± 2.449.
"""

from __future__ import annotations

import math

import pytest

from server.quality import control_chart as cc

HISTORY = [30.0, 31.0, 29.0, 30.0, 31.0, 29.0, 30.0, 31.0, 29.0, 30.0]
SD = math.sqrt(6 / 9)  # hand-worked above


def test_limits_are_the_mean_and_sample_standard_deviation() -> None:
    limits = cc.limits_of(HISTORY)
    assert (limits.n, limits.mean) == (10, 30.0)
    assert limits.sd == pytest.approx(0.8165, abs=1e-4)
    assert limits.line(3) == pytest.approx(32.449, abs=1e-3)
    assert limits.line(-2) == pytest.approx(28.367, abs=1e-3)


def test_no_limits_are_drawn_before_ten_earlier_results() -> None:
    judged = cc.judge(HISTORY)
    assert [p.zone for p in judged] == ["no limits"] * 10
    assert all(p.limits is None and not p.violations for p in judged)


def test_a_point_is_judged_against_the_points_before_it_only() -> None:
    judged = cc.judge([*HISTORY, 32.0])
    # z = 2 / 0.8165 = 2.449: in the warning zone, no rule broken on its own (hand-worked)
    last = judged[-1]
    assert last.limits is not None and last.limits.n == 10
    assert last.z == pytest.approx(2.0 / SD)
    assert (last.zone, last.violations) == ("warning", ())


def test_a_point_beyond_three_sigma_is_an_error_and_stays_out_of_later_histories() -> None:
    judged = cc.judge([*HISTORY, 33.0, 30.0])
    action, after = judged[10], judged[11]
    assert action.z == pytest.approx(3.0 / SD)  # 3.674 > 3 (Western Electric rule 1)
    assert action.zone == "action"
    assert [(v.rule, v.severity) for v in action.violations] == [("beyond-3s", "error")]
    assert action.worst == "error"
    # The next point's history is the ten results, without the 33.0 (the module's rule).
    assert after.limits == cc.limits_of(HISTORY)


def test_two_of_three_beyond_two_sigma_on_one_side_is_a_warning() -> None:
    # 32.2: z = 2.2 / 0.8165 = 2.694; history then 11 results, mean 332.2 / 11 = 30.2,
    # σ 1.0198 (hand-worked), 32.4: z = 2.2 / 1.0198 = 2.157 -> two beyond 2σ above
    judged = cc.judge([*HISTORY, 32.2, 32.4])
    assert judged[11].z == pytest.approx(2.157, abs=1e-3)
    assert [v.rule for v in judged[10].violations] == []
    assert [(v.rule, v.severity) for v in judged[11].violations] == [("2-of-3-beyond-2s", "warning")]


def test_two_beyond_two_sigma_on_opposite_sides_break_no_rule() -> None:
    judged = cc.judge([*HISTORY, 32.2, 27.6])
    assert judged[11].zone == "warning"  # (27.6 - 30.2) / 1.0198 = -2.55 (hand-worked)
    assert judged[11].violations == ()


def test_a_point_inside_two_sigma_does_not_inherit_an_earlier_pattern() -> None:
    # 32.2, 32.4 break the rule at the second point; 30.0 after them is within 1σ.
    judged = cc.judge([*HISTORY, 32.2, 32.4, 30.0])
    assert judged[12].violations == ()


def test_four_of_five_beyond_one_sigma_on_one_side_is_a_warning() -> None:
    # Results of 31.6 (our own); the limits grow with the history: z = 1.960, 1.594, 1.380,
    # 1.236, each above 1σ (the first by hand: 1.6 / 0.8165 = 1.960). The fourth completes
    # "4 of the last 5" (the fifth of those five, the last of the history, has no limits).
    judged = cc.judge([*HISTORY, *[31.6] * 4])
    assert judged[10].z == pytest.approx(1.6 / SD)
    assert all(p.z is not None and p.z > 1 for p in judged[10:])
    assert [[v.rule for v in p.violations] for p in judged[10:]] == [[], [], [], ["4-of-5-beyond-1s"]]


def test_eight_in_a_row_on_one_side_of_the_mean_is_a_warning() -> None:
    # 30.5 is above every history's mean (each mean is an average of values up to 30.5), and
    # within 1σ (0.5 / 0.8165 = 0.61 at first): only the run rule fires, at the eighth
    # (Western Electric handbook, 1956: a run of eight).
    judged = cc.judge([*HISTORY, *[30.5] * 8])
    assert [v.rule for p in judged[10:17] for v in p.violations] == []
    assert [v.rule for v in judged[17].violations] == ["8-on-one-side"]
    assert cc.RUN_LENGTH == 8


def test_a_history_with_no_spread_puts_any_other_value_beyond_the_action_limit() -> None:
    judged = cc.judge([*[25.0] * 10, 25.0, 25.1])
    assert judged[10].zone == "in control" and judged[10].z == 0.0
    assert judged[11].zone == "action" and judged[11].z == math.inf


def test_values_that_are_not_finite_are_refused() -> None:
    with pytest.raises(ValueError):
        cc.judge([*HISTORY, float("inf")])
