"""Plastic limit: mean of the thread determinations, the spread check, and refusals."""

from __future__ import annotations

from server.engine import calculate, evaluate

# Liu & Evett, Soil Properties: Testing, Measurement and Evaluation (plastic-limit worked example).
LIU_EVETT = [
    {"tare_g": 11.56, "wet_tare_g": 20.47, "dry_tare_g": 18.93},
    {"tare_g": 11.68, "wet_tare_g": 21.27, "dry_tare_g": 19.57},
]


def test_plastic_limit_of_the_liu_and_evett_example_is_21_2() -> None:
    # Liu & Evett worked example: 20.9 % and 21.5 % -> PL 21.2.
    ev = calculate("plastic-limit", {"determinations": LIU_EVETT})
    assert [round(w, 1) for w in ev.results["plastic_limit_determinations"]] == [20.9, 21.5]
    assert round(ev.results["plastic_limit"], 1) == 21.2


def test_flags_determinations_more_than_half_a_percent_apart() -> None:
    # BS 1377-2:1990 cl. 5: repeat when the two differ by more than 0.5 % (confirmed);
    # the Liu & Evett pair is 0.65 % apart.
    ev = calculate("plastic-limit", {"determinations": LIU_EVETT})
    assert [f.code for f in ev.flags] == ["pl-determinations-apart"]


def test_refuses_a_single_determination() -> None:
    # ASTM D4318 and BS 1377-2 cl. 5 average two determinations (confirmed).
    ev = evaluate("plastic-limit", {"determinations": LIU_EVETT[:1]})
    assert [e.loc for e in ev.errors] == [("readings", "determinations")]
    assert "plastic_limit" not in ev.results
    assert round(ev.results["plastic_limit_determinations"][0], 1) == 20.9


def test_marks_a_soil_whose_thread_cannot_be_rolled_non_plastic() -> None:
    # ASTM D4318: report NP when the plastic limit cannot be determined (confirmed).
    ev = calculate("plastic-limit", {"not_determinable": True})
    assert ev.results == {"nonplastic": True}
