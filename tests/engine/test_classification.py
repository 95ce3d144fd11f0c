"""Soil classification: USCS symbols and group names (ASTM D2487-17), AASHTO groups and group
index (M 145), and the ``classification`` method's readings, refusals and flags.

Sources: REFERENCES.md "Classification" and "Published worked examples". The D2487 group-name
wording (Fig. 1a, 1b) and the M 145 Table 2 limits are quoted from memory where REFERENCES.md
does not spell them out; such checks say so.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from typing import Any

import pytest
from hypothesis import given
from hypothesis import strategies as st

from server.engine import calculate, classification_methods, evaluate
from server.engine.classification import (
    NP_READING,
    Aashto,
    MissingInput,
    Uscs,
    aashto,
    group_index,
    group_index_value,
    is_organic,
    uscs,
    uscs_borderline,
    uscs_missing,
)

# ==================================================================================================
# Published worked examples
# ==================================================================================================


def test_worked_example_54_percent_fines_ll_53_5_pl_31_6_is_mh() -> None:
    # REFERENCES.md "Published worked examples" (USCS): 54.3 % fines, LL 53.5, PL 31.6 -> MH.
    # The example gives no sand/gravel split; all-sand is our choice and does not move the symbol.
    assert uscs(53.5, 53.5 - 31.6, fines=54.3, sand=45.7, gravel=0.0).symbol == "MH"
    assert uscs(53.5, 53.5 - 31.6).symbol == "MH"  # from the chart alone


def test_worked_example_86_percent_fines_ll_55_pi_28_is_ch() -> None:
    # REFERENCES.md "Published worked examples" (USCS): 86 % fines, LL 55, PI 28 -> CH. With 14 %
    # retained on 75 µm (< 15 %) the name has no modifier (ASTM D2487 Fig. 1a, REFERENCES.md).
    assert uscs(55.0, 28.0, fines=86.0, sand=12.0, gravel=2.0) == Uscs("CH", "Fat clay")


@pytest.mark.parametrize(
    ("fines", "ll", "pi", "expected"),
    [
        (58.0, 30.0, 10.0, Aashto("A-4", 3)),  # Das, worked example (REFERENCES.md): A-4(3)
        (54.3, 53.5, 21.9, Aashto("A-7-5", 10)),  # Das, worked example (REFERENCES.md): A-7-5(10)
        (21.9, 34.1, 17.6, Aashto("A-2-6", 1)),  # Das, worked example (REFERENCES.md): A-2-6(1)
        (34.13, 23.0, 15.0, Aashto("A-2-6", 1)),  # Das, worked example (REFERENCES.md): A-2-6(1)
    ],
)
def test_worked_aashto_examples_give_the_published_group_and_index(
    fines: float, ll: float, pi: float, expected: Aashto
) -> None:
    # PI > 6 rules out A-1 and A-3 (M 145 Table 2), so no 2 mm / 0.425 mm data are needed.
    assert aashto(fines, ll, pi) == expected


def test_a_7_5_worked_example_reads_as_a_7_5_10_on_a_report() -> None:
    # Das, worked example (REFERENCES.md): written A-7-5(10).
    assert aashto(54.3, 53.5, 21.9).label == "A-7-5 (10)"


# ==================================================================================================
# USCS: fine-grained soils
# ==================================================================================================


@pytest.mark.parametrize(
    ("ll", "pi", "symbol", "name"),
    [
        (41.0, 19.0, "CL", "Lean clay"),  # ASTM D2487 Fig. 1a: PI > 7, on or above A-line
        (22.0, 5.0, "CL-ML", "Silty clay"),  # D2487 Fig. 1a: 4 <= PI <= 7 on or above A-line
        (35.0, 5.0, "ML", "Silt"),  # D2487 Fig. 1a: below the A-line
        (20.0, 3.0, "ML", "Silt"),  # D2487 Fig. 1a: PI < 4
        (70.0, 45.0, "CH", "Fat clay"),  # D2487 Fig. 1a: LL >= 50, on or above A-line
        (70.0, 30.0, "MH", "Elastic silt"),  # D2487 Fig. 1a: LL >= 50, below A-line
        (50.0, 25.0, "CH", "Fat clay"),  # REFERENCES.md: LL >= 50 is high; A-line at 50 is 21.9
        (30.0, 7.3, "CL", "Lean clay"),  # REFERENCES.md: "on or above" -- 0.73 (30 - 20) = 7.3
    ],
)
def test_fine_grained_soils_take_their_symbol_and_name_from_the_chart(
    ll: float, pi: float, symbol: str, name: str
) -> None:
    # Group names: ASTM D2487 Fig. 1a (from memory); 100 % fines, so no modifier.
    assert uscs(ll, pi, fines=100.0, sand=0.0, gravel=0.0) == Uscs(symbol, name)


def test_soil_with_exactly_50_percent_fines_is_fine_grained() -> None:
    # REFERENCES.md / ASTM D2487: fine-grained when >= 50 % passes 75 µm.
    assert uscs(41.0, 19.0, fines=50.0, sand=40.0, gravel=10.0).symbol == "CL"
    assert uscs(41.0, 19.0, fines=49.9, sand=40.1, gravel=10.0).symbol == "SC"


@pytest.mark.parametrize(
    ("sand", "gravel", "name"),
    [
        (14.9, 0.0, "Lean clay"),  # < 15 % retained: no modifier (REFERENCES.md)
        (15.0, 0.0, "Lean clay with sand"),  # 15-29 %, sand predominant (REFERENCES.md)
        (8.0, 12.0, "Lean clay with gravel"),  # 15-29 %, gravel predominant (REFERENCES.md)
        (10.0, 10.0, "Lean clay with sand"),  # sand >= gravel counts as sand (REFERENCES.md)
        (29.9, 0.0, "Lean clay with sand"),  # still below 30 % (REFERENCES.md)
        (30.0, 0.0, "Sandy lean clay"),  # >= 30 %, sand predominant (REFERENCES.md)
        (25.0, 14.9, "Sandy lean clay"),  # other fraction < 15 %: no "with" (REFERENCES.md)
        (25.0, 15.0, "Sandy lean clay with gravel"),  # other fraction >= 15 % (REFERENCES.md)
        (10.0, 30.0, "Gravelly lean clay"),  # >= 30 %, gravel predominant (REFERENCES.md)
        (15.0, 25.0, "Gravelly lean clay with sand"),  # (REFERENCES.md)
    ],
)
def test_group_name_of_a_lean_clay_follows_its_sand_and_gravel(sand: float, gravel: float, name: str) -> None:
    fines = 100.0 - sand - gravel
    assert uscs(41.0, 19.0, fines=fines, sand=sand, gravel=gravel) == Uscs("CL", name)


# -- DESIGN.md section 8 conventions at their exact values ------------------------------------------


@pytest.mark.parametrize(
    ("fines", "sand", "gravel", "name"),
    [
        # ASTM D2487-17 Fig. 1 (fine-grained; from memory) with DESIGN.md section 8 at the end points.
        (85.0, 15.0, 0.0, "Lean clay with sand"),  # exactly 15 % retained: "with sand"
        (85.0, 0.0, 15.0, "Lean clay with gravel"),  # exactly 15 % retained, gravel: "with gravel"
        (85.0, 7.5, 7.5, "Lean clay with sand"),  # equal sand and gravel count as sand
        (70.0, 30.0, 0.0, "Sandy lean clay"),  # exactly 30 % retained: "sandy"
        (70.0, 0.0, 30.0, "Gravelly lean clay"),  # exactly 30 % retained, gravel: "gravelly"
        (70.0, 15.0, 15.0, "Sandy lean clay with gravel"),  # equal: sand; second fraction 15 %: "with"
        (55.0, 30.0, 15.0, "Sandy lean clay with gravel"),  # second fraction exactly 15 %
        (55.0, 15.0, 30.0, "Gravelly lean clay with sand"),  # second fraction exactly 15 %
        (55.1, 30.0, 14.9, "Sandy lean clay"),  # second fraction below 15 %: no "with"
    ],
)
def test_fine_soil_names_at_exactly_15_and_30_percent(
    fines: float, sand: float, gravel: float, name: str
) -> None:
    assert uscs(41.0, 19.0, fines=fines, sand=sand, gravel=gravel) == Uscs("CL", name)


def test_a_fraction_one_float_step_off_15_percent_counts_as_15() -> None:
    # DESIGN.md section 8 "exactly 15 %": a computed 85.00000000000001 % fines leaves 14.99999999999999 %
    # retained, which is 15 % typed as 15 (binary noise, classification.EXACT; common practice).
    fines = math.nextafter(85.0, 100.0)
    assert uscs(41.0, 19.0, fines=fines, sand=100.0 - fines, gravel=0.0).name == "Lean clay with sand"
    gravel = math.nextafter(15.0, 0.0)
    soil = uscs(41.0, 19.0, fines=20.0, sand=80.0 - gravel, gravel=gravel)
    assert soil == Uscs("SC", "Clayey sand with gravel")  # ASTM D2487 Fig. 3: gravel 15 % -> "with gravel"


@pytest.mark.parametrize(
    ("fines", "sand", "gravel", "symbol", "name"),
    [
        # ASTM D2487-17 Fig. 3 (coarse-grained; from memory) with DESIGN.md section 8 at the end points.
        (20.0, 65.0, 15.0, "SC", "Clayey sand with gravel"),  # second fraction exactly 15 %
        (20.0, 65.1, 14.9, "SC", "Clayey sand"),  # below 15 %
        (20.0, 15.0, 65.0, "GC", "Clayey gravel with sand"),  # sand exactly 15 %
        (20.0, 40.0, 40.0, "SC", "Clayey sand with gravel"),  # equal sand and gravel: sand
    ],
)
def test_coarse_soil_names_at_exactly_15_percent_and_equal_fractions(
    fines: float, sand: float, gravel: float, symbol: str, name: str
) -> None:
    assert uscs(41.0, 19.0, fines=fines, sand=sand, gravel=gravel) == Uscs(symbol, name)


# -- what a group name still needs ----------------------------------------------------------------


@pytest.mark.parametrize(
    ("fines", "sand", "gravel", "cu", "cc", "missing"),
    [
        (None, None, None, None, None, ("fines", "sand", "gravel")),  # no grading at all
        (None, 10.0, None, None, None, ("fines",)),  # the split is partly there
        (90.0, None, None, None, None, ()),  # Fig. 1: under 15 % retained needs no split
        (60.0, None, None, None, None, ("sand", "gravel")),  # Fig. 1: 40 % retained, sandy or gravelly?
        (30.0, None, None, None, None, ("sand", "gravel")),  # Fig. 3: gravel or sand?
        (30.0, 50.0, None, None, None, ()),  # gravel is the remainder
        (8.0, None, None, None, None, ("sand", "gravel", "cu", "cc")),  # Fig. 3: split and grading
        (8.0, 80.0, 12.0, None, None, ("cu", "cc")),  # Fig. 3: 5-12 % fines, well or poorly graded
        (8.0, 80.0, 12.0, 7.0, 1.3, ()),
    ],
)
def test_uscs_missing_names_every_input_the_group_name_still_needs(
    fines: float | None,
    sand: float | None,
    gravel: float | None,
    cu: float | None,
    cc: float | None,
    missing: tuple[str, ...],
) -> None:
    assert uscs_missing(41.0, 19.0, fines=fines, sand=sand, gravel=gravel, cu=cu, cc=cc) == missing
    if fines is not None and not missing:  # nothing missing: uscs names it
        assert uscs(41.0, 19.0, fines=fines, sand=sand, gravel=gravel, cu=cu, cc=cc).name


def test_group_name_prefix_is_written_in_lower_case_inside_the_name() -> None:
    # ASTM D2487 Fig. 1a (from memory): "Sandy fat clay", "Gravelly elastic silt with sand".
    assert uscs(70.0, 45.0, fines=60.0, sand=35.0, gravel=5.0).name == "Sandy fat clay"
    assert uscs(70.0, 30.0, fines=55.0, sand=15.0, gravel=30.0).name == "Gravelly elastic silt with sand"
    assert uscs(22.0, 5.0, fines=75.0, sand=20.0, gravel=5.0).name == "Silty clay with sand"


def test_nonplastic_fine_soil_is_a_silt() -> None:
    # ASTM D4318: NP when no plastic limit; DESIGN.md section 8: nonplastic fines are ML.
    assert uscs(None, None, nonplastic=True, fines=90.0, sand=10.0, gravel=0.0) == Uscs("ML", "Silt")
    assert uscs(30.0, 0.0, fines=90.0, sand=10.0, gravel=0.0).symbol == "ML"  # PI 0 is nonplastic
    # DESIGN.md section 8: ML whatever the liquid limit, though a point at PI 0 with LL 55 would
    # read MH off the chart (ASTM D2487 Fig. 4); geolysis does read MH (test_classification_crosscheck).
    assert uscs(55.0, None, nonplastic=True, fines=90.0, sand=10.0, gravel=0.0) == Uscs("ML", "Silt")
    assert uscs(55.0, None, nonplastic=True, fines=60.0, sand=40.0, gravel=0.0) == Uscs("ML", "Sandy silt")


def test_fines_not_given_classify_from_the_chart_alone() -> None:
    # The brief's contract: with fines None, fine-grained, from the chart (ASTM D2487 Fig. 4).
    assert uscs(41.0, 19.0) == Uscs("CL", "Lean clay")


# -- organic soils ---------------------------------------------------------------------------------


def test_oven_dried_liquid_limit_below_three_quarters_makes_the_soil_organic() -> None:
    # ASTM D2487 (REFERENCES.md): organic when LL(oven-dried)/LL(not dried) < 0.75.
    assert is_organic(40.0, 29.9) is True
    assert is_organic(40.0, 30.0) is False  # exactly 0.75 is not below 0.75
    assert is_organic(40.0, None) is False


@pytest.mark.parametrize(
    ("ll", "pi", "symbol", "name"),
    [
        (41.0, 19.0, "OL", "Organic clay"),  # D2487 Fig. 1a: PI >= 4, on or above the A-line
        (22.0, 5.0, "OL", "Organic clay"),  # in the CL-ML band: still on or above (PI >= 4)
        (40.0, 8.0, "OL", "Organic silt"),  # D2487 Fig. 1a: below the A-line
        (20.0, 3.0, "OL", "Organic silt"),  # D2487 Fig. 1a: PI < 4
        (70.0, 45.0, "OH", "Organic clay"),  # D2487 Fig. 1a: LL >= 50, on or above the A-line
        (70.0, 30.0, "OH", "Organic silt"),  # D2487 Fig. 1a: LL >= 50, below the A-line
    ],
)
def test_organic_soils_are_ol_or_oh_wherever_they_plot(ll: float, pi: float, symbol: str, name: str) -> None:
    # ASTM D2487 Fig. 1a (group names from memory): the organic test comes before the chart.
    assert uscs(ll, pi, fines=95.0, sand=5.0, gravel=0.0, ll_oven_dried=0.6 * ll) == Uscs(symbol, name)


def test_organic_sandy_clay_keeps_its_modifiers() -> None:
    # ASTM D2487 Fig. 1a (from memory): "Sandy organic clay".
    soil = uscs(41.0, 19.0, fines=60.0, sand=40.0, gravel=0.0, ll_oven_dried=20.0)
    assert soil.name == "Sandy organic clay"


def test_peat_is_pt() -> None:
    # ASTM D2487 Table 1: highly organic soils, PT (identified by eye, D2488; from memory).
    assert uscs(None, None, peat=True) == Uscs("PT", "Peat")


# ==================================================================================================
# USCS: coarse-grained soils
# ==================================================================================================


@pytest.mark.parametrize(
    ("fines", "sand", "gravel", "cu", "cc", "symbol", "name"),
    [
        # Clean (< 5 % fines). Criteria: REFERENCES.md; names: ASTM D2487 Fig. 1b (from memory).
        (3.0, 20.0, 77.0, 5.0, 2.0, "GW", "Well-graded gravel with sand"),
        (3.0, 10.0, 87.0, 3.9, 2.0, "GP", "Poorly graded gravel"),  # Cu < 4
        (3.0, 87.0, 10.0, 6.0, 1.0, "SW", "Well-graded sand"),  # Cu 6 and Cc 1: inclusive
        (3.0, 87.0, 10.0, 5.9, 2.0, "SP", "Poorly graded sand"),  # sand needs Cu >= 6
        (3.0, 67.0, 30.0, 8.0, 3.0, "SW", "Well-graded sand with gravel"),  # Cc 3: inclusive
        (3.0, 67.0, 30.0, 8.0, 3.1, "SP", "Poorly graded sand with gravel"),  # Cc > 3
        (4.9, 47.55, 47.55, 8.0, 2.0, "SW", "Well-graded sand with gravel"),  # gravel = sand: sand
    ],
)
def test_clean_coarse_soils_are_named_by_grading(
    fines: float, sand: float, gravel: float, cu: float, cc: float, symbol: str, name: str
) -> None:
    assert uscs(None, None, fines=fines, sand=sand, gravel=gravel, cu=cu, cc=cc) == Uscs(symbol, name)


@pytest.mark.parametrize(
    ("ll", "pi", "fines", "sand", "gravel", "symbol", "name"),
    [
        # 5-12 % fines: dual symbols (REFERENCES.md); names ASTM D2487 Fig. 1b (from memory).
        (30.0, 3.0, 5.0, 80.0, 15.0, "SW-SM", "Well-graded sand with silt and gravel"),
        (41.0, 19.0, 8.0, 82.0, 10.0, "SW-SC", "Well-graded sand with clay"),
        (22.0, 5.0, 12.0, 20.0, 68.0, "GW-GC", "Well-graded gravel with silty clay and sand"),
        (70.0, 30.0, 10.0, 10.0, 80.0, "GW-GM", "Well-graded gravel with silt"),
    ],
)
def test_coarse_soils_with_5_to_12_percent_fines_get_dual_symbols(
    ll: float, pi: float, fines: float, sand: float, gravel: float, symbol: str, name: str
) -> None:
    assert uscs(ll, pi, fines=fines, sand=sand, gravel=gravel, cu=10.0, cc=2.0) == Uscs(symbol, name)


def test_poorly_graded_dual_symbol_uses_p() -> None:
    # ASTM D2487 Table 1 (REFERENCES.md): Cu < 6 for a sand is poorly graded.
    assert uscs(41.0, 19.0, fines=8.0, sand=82.0, gravel=10.0, cu=3.0, cc=1.0) == Uscs(
        "SP-SC", "Poorly graded sand with clay"
    )


@pytest.mark.parametrize(
    ("ll", "pi", "fines", "sand", "gravel", "symbol", "name"),
    [
        # > 12 % fines (REFERENCES.md); names ASTM D2487 Fig. 1b (from memory).
        (30.0, 3.0, 12.1, 80.0, 7.9, "SM", "Silty sand"),
        (41.0, 19.0, 30.0, 50.0, 20.0, "SC", "Clayey sand with gravel"),
        (22.0, 5.0, 20.0, 60.0, 20.0, "SC-SM", "Silty, clayey sand with gravel"),
        (22.0, 5.0, 20.0, 10.0, 70.0, "GC-GM", "Silty, clayey gravel"),
        (70.0, 30.0, 40.0, 15.0, 45.0, "GM", "Silty gravel with sand"),
        (70.0, 45.0, 40.0, 14.0, 46.0, "GC", "Clayey gravel"),
    ],
)
def test_coarse_soils_with_more_than_12_percent_fines_follow_their_fines(
    ll: float, pi: float, fines: float, sand: float, gravel: float, symbol: str, name: str
) -> None:
    assert uscs(ll, pi, fines=fines, sand=sand, gravel=gravel) == Uscs(symbol, name)


def test_coarse_soil_with_nonplastic_fines_is_silty() -> None:
    # Nonplastic fines classify as ML, so GM / SM (common practice; D2487 Table 1: ML fines -> M).
    assert uscs(None, None, nonplastic=True, fines=20.0, sand=70.0, gravel=10.0) == Uscs("SM", "Silty sand")


def test_coarse_soil_with_organic_fines_says_so_in_its_name() -> None:
    # ASTM D2487 Table 1 footnote (from memory): "If fines are organic, add 'with organic fines'".
    assert uscs(41.0, 19.0, fines=20.0, sand=75.0, gravel=5.0, ll_oven_dried=25.0) == Uscs(
        "SC", "Clayey sand with organic fines"
    )


def test_missing_sand_or_gravel_is_the_remainder() -> None:
    # Fines + sand + gravel = 100 % of the soil finer than 75 mm (D2487 cl. 1.2, from memory).
    assert uscs(41.0, 19.0, fines=30.0, sand=50.0) == uscs(41.0, 19.0, fines=30.0, sand=50.0, gravel=20.0)


def test_clean_coarse_soil_without_cu_and_cc_cannot_be_classified() -> None:
    # ASTM D2487 Table 1 (REFERENCES.md): well or poorly graded needs Cu and Cc.
    with pytest.raises(MissingInput) as caught:
        uscs(None, None, fines=3.0, sand=90.0, gravel=7.0)
    assert caught.value.fields == ("cu", "cc")


def test_coarse_soil_without_sand_and_gravel_cannot_be_classified() -> None:
    # ASTM D2487 Table 1 (REFERENCES.md): gravel or sand is decided by the coarse fractions.
    with pytest.raises(MissingInput) as caught:
        uscs(41.0, 19.0, fines=30.0)
    assert caught.value.fields == ("sand", "gravel")


def test_fine_soil_with_a_large_coarse_part_needs_the_split_to_be_named() -> None:
    # ASTM D2487 Fig. 1a (REFERENCES.md): 30 % or more retained -> "sandy" or "gravelly".
    with pytest.raises(MissingInput):
        uscs(41.0, 19.0, fines=60.0)


def test_refuses_a_percentage_above_100() -> None:
    with pytest.raises(ValueError, match="fines"):
        uscs(41.0, 19.0, fines=101.0)


# -- borderline symbols ----------------------------------------------------------------------------


def test_liquid_limit_near_50_gives_a_cl_ch_borderline() -> None:
    # ASTM D2487 Note 1 (confirmed, public copy of the scope): "CL/CH", the standard's symbol first.
    assert uscs_borderline(49.0, 25.0, fines=90.0, sand=10.0, gravel=0.0) == "CL/CH"


def test_clear_cut_soil_has_no_borderline() -> None:
    # ASTM D2487 Note 1: borderline symbols only when close to another group.
    assert uscs_borderline(70.0, 45.0, fines=95.0, sand=5.0, gravel=0.0) is None


def test_gravel_and_sand_nearly_equal_give_a_gm_sm_borderline() -> None:
    # ASTM D2487 Note 1 (confirmed): "GM/SM" is one of its examples.
    assert uscs_borderline(30.0, 3.0, fines=20.0, sand=39.5, gravel=40.5) == "GM/SM"


# ==================================================================================================
# AASHTO
# ==================================================================================================


@pytest.mark.parametrize(
    ("fines", "ll", "pi", "p2", "p0425", "nonplastic", "group"),
    [
        # AASHTO M 145 Table 2, read left to right (limits from memory; REFERENCES.md).
        (10.0, 20.0, 4.0, 40.0, 20.0, False, "A-1-a"),
        (20.0, 20.0, 5.0, 70.0, 45.0, False, "A-1-b"),
        (8.0, None, None, 100.0, 70.0, True, "A-3"),  # NP, > 50 % passing 0.425 mm
        (8.0, None, None, 40.0, 25.0, True, "A-1-a"),  # A-1-a comes before A-3
        (30.0, 35.0, 8.0, None, None, False, "A-2-4"),
        (30.0, 45.0, 8.0, None, None, False, "A-2-5"),
        (30.0, 35.0, 12.0, None, None, False, "A-2-6"),
        (30.0, 45.0, 12.0, None, None, False, "A-2-7"),
        (60.0, 45.0, 8.0, None, None, False, "A-5"),
        (60.0, 35.0, 12.0, None, None, False, "A-6"),
        (60.0, 50.0, 20.0, None, None, False, "A-7-5"),  # PI <= LL - 30 (REFERENCES.md)
        (60.0, 50.0, 20.1, None, None, False, "A-7-6"),  # PI > LL - 30 (REFERENCES.md)
        (35.0, 40.0, 10.0, None, None, False, "A-2-4"),  # 35 % is granular, LL 40 and PI 10 max
        (35.1, 40.1, 10.0, None, None, False, "A-5"),
    ],
)
def test_aashto_groups_by_left_to_right_elimination(
    fines: float,
    ll: float | None,
    pi: float | None,
    p2: float | None,
    p0425: float | None,
    nonplastic: bool,
    group: str,
) -> None:
    result = aashto(fines, ll, pi, passing_2mm=p2, passing_0425mm=p0425, nonplastic=nonplastic)
    assert result.group == group


def test_granular_soil_that_may_be_a_1_needs_the_2mm_and_0425mm_sieves() -> None:
    # AASHTO M 145 Table 2: A-1-a limits passing 2 mm and 0.425 mm (from memory).
    with pytest.raises(MissingInput) as caught:
        aashto(10.0, 20.0, 4.0)
    assert caught.value.fields == ("percent_passing_2mm", "percent_passing_0_425mm")


def test_a_plastic_granular_soil_needs_no_sieve_data() -> None:
    # PI > 6 rules out A-1; not NP rules out A-3 (M 145 Table 2, from memory).
    assert aashto(20.0, 35.0, 12.0).group == "A-2-6"


def test_nonplastic_silt_without_a_liquid_limit_cannot_be_placed_in_a_4_or_a_5() -> None:
    # AASHTO M 145 Table 2: A-4 is LL 40 max, A-5 LL 41 min; the group index of a silt-clay
    # group needs LL (M 145 GI formula), so the NP reading below is not extended to fine soils.
    with pytest.raises(MissingInput) as caught:
        aashto(60.0, None, None, nonplastic=True)
    assert caught.value.fields == ("liquid_limit",)


@pytest.mark.parametrize(
    ("fines", "p2", "p0425", "group"),
    [
        # AASHTO M 145 Table 2 (limits from memory; REFERENCES.md), NP with no liquid limit.
        (30.0, None, None, "A-2-4"),  # over 25 % fines: past A-1; NP read as "LL 40 max" -> A-2-4
        (35.0, None, None, "A-2-4"),  # 35 % is still granular ("35 max")
        (20.0, 80.0, 60.0, "A-2-4"),  # 0.425 mm 60 > 50: not A-1-b; fines 20 > 10: not A-3
        (20.0, 80.0, 45.0, "A-1-b"),  # A-1-b needs no liquid limit (PI 6 max; NP meets it)
        (8.0, 100.0, 70.0, "A-3"),  # A-3 is "NP" and needs no liquid limit
    ],
)
def test_nonplastic_granular_soil_without_a_liquid_limit_is_placed(
    fines: float, p2: float | None, p0425: float | None, group: str
) -> None:
    result = aashto(fines, None, None, passing_2mm=p2, passing_0425mm=p0425, nonplastic=True)
    assert (result.group, result.group_index) == (group, 0)  # GI 0 for these groups (REFERENCES.md)
    # Only the placement that rests on reading NP as "LL 40 max" carries the note.
    assert result.note == (NP_READING if group == "A-2-4" else None)
    if result.note:
        assert "the laboratory's reading" in result.note and "LL 40 max" in result.note


def test_group_index_of_the_granular_groups_is_zero() -> None:
    # REFERENCES.md, A-2-4, A-2-5 have GI 0.
    assert aashto(34.0, 60.0, 8.0) == Aashto("A-2-5", 0)
    assert aashto(10.0, 20.0, 4.0, passing_2mm=40.0, passing_0425mm=20.0) == Aashto("A-1-a", 0)
    assert group_index(10.0, 20.0, 4.0, group="A-1-a") == 0


def test_group_index_of_a_2_6_uses_only_the_plasticity_term() -> None:
    # REFERENCES.md: A-2-6 and A-2-7 use only 0.01 (F - 15)(PI - 10).
    assert group_index_value(30.0, 38.0, 30.0, group="A-2-6") == pytest.approx(0.01 * 15.0 * 20.0)
    assert group_index(30.0, 38.0, 30.0, group="A-2-6") == 3


def test_negative_group_index_is_reported_as_zero() -> None:
    # REFERENCES.md: negative GI is 0. (36 - 35)(0.2 - 0.1) + 0.01 (21)(-8) = -1.58.
    assert group_index_value(36.0, 20.0, 2.0) == pytest.approx(-1.58)
    assert aashto(36.0, 20.0, 2.0).group_index == 0


def test_group_index_is_rounded_half_up() -> None:
    # REFERENCES.md: round half up. (37.5 - 35)(0.2) + 0 = 0.5 -> 1; 2.5 -> 3.
    assert aashto(37.5, 40.0, 10.0).group_index == 1
    assert aashto(47.5, 40.0, 10.0).group_index == 3


def test_group_index_is_not_capped() -> None:
    # REFERENCES.md: the old form that caps GI at 20 is not the current one.
    # (90 - 35)(0.2 + 0.005 x 40) + 0.01 (75)(40) = 22 + 30 = 52; PI 50 <= LL - 30 -> A-7-5.
    assert aashto(90.0, 80.0, 50.0) == Aashto("A-7-5", 52)


@given(
    fines=st.floats(0.0, 100.0),
    ll=st.floats(0.0, 300.0),
    pi=st.floats(0.0, 300.0),
    group=st.sampled_from([None, "A-1-a", "A-2-4", "A-2-6", "A-2-7", "A-4", "A-6", "A-7-5", "A-7-6"]),
)
def test_group_index_is_never_negative(fines: float, ll: float, pi: float, group: str | None) -> None:
    # REFERENCES.md / AASHTO M 145: negative GI is reported as 0.
    assert group_index(fines, ll, pi, group=group) >= 0


@given(
    fines=st.floats(0.0, 100.0),
    ll=st.floats(1.0, 300.0),
    pi=st.floats(0.0, 300.0),
    p0425=st.floats(0.0, 100.0),
)
def test_every_soil_with_sieve_data_gets_one_aashto_group_with_a_non_negative_index(
    fines: float, ll: float, pi: float, p0425: float
) -> None:
    # AASHTO M 145 Table 2 covers every soil (left to right, the last column A-7-6 takes the rest).
    result = aashto(fines, ll, pi, passing_2mm=100.0, passing_0425mm=max(p0425, fines))
    assert result.group_index >= 0
    assert result.group.startswith("A-")


# ==================================================================================================
# The classification method
# ==================================================================================================

LEAN_CLAY = {
    "liquid_limit": 41.0,
    "plastic_limit": 22.0,
    "nonplastic": False,
    "fines": 86.0,
    "sand": 12.0,
    "gravel": 2.0,
}


def test_classifies_the_lean_clay_of_the_readings_example() -> None:
    # ASTM D2487 Fig. 1a: LL 41, PI 19 above the A-line (15.3) -> CL; 14 % coarse, no modifier.
    # AASHTO M 145: LL 41 > 40, PI 19 > LL - 30 -> A-7-6; GI (51)(0.205) + 0.01 (71)(9) = 16.8 -> 17.
    ev = calculate("classification", LEAN_CLAY)
    assert ev.results["uscs_symbol"] == "CL"
    assert ev.results["uscs_name"] == "Lean clay"
    assert ev.results["aashto_group"] == "A-7-6"
    assert ev.results["group_index"] == 17
    assert ev.results["plasticity_index"] == 19.0
    assert ev.results["nonplastic"] is False
    assert ev.results["plasticity_chart"]["symbol"] == "CL"
    assert ev.results["uscs_borderline"] is None
    assert ev.flags == []
    json.dumps(ev.to_dict())  # results are JSON-serialisable (DESIGN.md section 3)


def test_classifies_the_published_mh_example_through_the_method() -> None:
    # REFERENCES.md worked examples: 54.3 % fines, LL 53.5, PL 31.6 -> MH; A-7-5(10) (Das).
    ev = calculate(
        "classification",
        {"liquid_limit": 53.5, "plastic_limit": 31.6, "fines": 54.3, "sand": 45.7, "gravel": 0.0},
    )
    assert (ev.results["uscs_symbol"], ev.results["aashto_group"], ev.results["group_index"]) == (
        "MH",
        "A-7-5",
        10,
    )


def test_plastic_limit_above_the_liquid_limit_is_nonplastic_not_an_error() -> None:
    # ASTM D4318 (REFERENCES.md): report NP when PL >= LL.
    ev = calculate("classification", {**LEAN_CLAY, "plastic_limit": 45.0})
    assert ev.results["nonplastic"] is True
    assert ev.results["uscs_symbol"] == "ML"
    assert ev.results["plasticity_chart"] is None
    assert [f.code for f in ev.flags] == ["plastic-limit-not-below-liquid-limit"]


def test_plasticity_index_may_be_given_instead_of_the_plastic_limit() -> None:
    ev = calculate(
        "classification",
        {"liquid_limit": 55.0, "plasticity_index": 28.0, "fines": 86.0, "sand": 12.0, "gravel": 2.0},
    )
    assert ev.results["uscs_symbol"] == "CH"  # REFERENCES.md worked example


def test_dual_symbol_soil_from_grain_diameters() -> None:
    # Cu = 0.7 / 0.1 = 7, Cc = 0.3^2 / (0.1 x 0.7) = 1.29 -> well graded sand (REFERENCES.md).
    ev = calculate(
        "classification",
        {
            "liquid_limit": 24.0,
            "plastic_limit": 21.0,
            "fines": 7.0,
            "sand": 80.0,
            "gravel": 13.0,
            "d10_mm": 0.1,
            "d30_mm": 0.3,
            "d60_mm": 0.7,
            "percent_passing_2mm": 85.0,
            "percent_passing_0_425mm": 40.0,
        },
    )
    assert ev.results["uscs_symbol"] == "SW-SM"
    assert ev.results["uscs_name"] == "Well-graded sand with silt"
    assert ev.results["aashto_group"] == "A-1-b"  # F <= 25, 0.425 mm <= 50, PI 3 <= 6 (M 145)


def test_nonplastic_granular_soil_without_a_liquid_limit_gets_a_2_4_and_the_note() -> None:
    # AASHTO M 145 Table 2: over 25 % fines rules out A-1; NP read as "LL 40 max" (our reading) -> A-2-4.
    # ASTM D2487 Fig. 3: nonplastic (ML) fines over 12 % -> SM; gravel 10 % < 15 % -> no "with gravel".
    ev = calculate("classification", {"nonplastic": True, "fines": 30.0, "sand": 60.0, "gravel": 10.0})
    assert (ev.results["uscs_symbol"], ev.results["uscs_name"]) == ("SM", "Silty sand")
    assert (ev.results["aashto_group"], ev.results["group_index"]) == ("A-2-4", 0)
    assert ev.results["aashto_note"] == NP_READING
    assert ev.flags == []


def test_aashto_note_is_absent_when_the_table_is_read_as_written() -> None:
    assert "aashto_note" not in calculate("classification", LEAN_CLAY).results


def test_organic_soil_reports_the_ratio() -> None:
    # ASTM D2487: 41 / 62 = 0.66 < 0.75 -> organic; below the A-line at LL 62 (30.7) -> OH silt.
    readings = {
        "liquid_limit": 62.0,
        "plastic_limit": 38.0,
        "liquid_limit_oven_dried": 41.0,
        "fines": 93.0,
        "sand": 7.0,
        "gravel": 0.0,
    }
    ev = calculate("classification", readings)
    assert ev.results["uscs_symbol"] == "OH"
    assert ev.results["uscs_name"] == "Organic silt"
    assert ev.results["organic"] is True
    assert ev.results["oven_dried_ll_ratio"] == pytest.approx(41.0 / 62.0)


def test_peat_needs_no_other_reading() -> None:
    ev = calculate("classification", {"peat": True})
    assert (ev.results["uscs_symbol"], ev.results["uscs_name"]) == ("PT", "Peat")


def test_missing_aashto_sieves_leave_the_aashto_group_out_with_a_warning() -> None:
    # M 145: PI 3 <= 6 with 7 % fines could be A-1 -> needs 2 mm and 0.425 mm; USCS does not.
    ev = calculate(
        "classification",
        {
            "liquid_limit": 40.0,
            "plastic_limit": 37.0,
            "fines": 7.0,
            "sand": 80.0,
            "gravel": 13.0,
            "cu": 6.0,
            "cc": 1.5,
        },
    )
    assert ev.results["uscs_symbol"] == "SW-SM"
    assert "aashto_group" not in ev.results
    assert [f.code for f in ev.flags] == ["aashto-not-classified"]


def test_flags_a_point_beyond_the_u_line() -> None:
    # ASTM D2487 Fig. 4: U-line PI = 0.9 (LL - 8) = 37.8 at LL 50.
    ev = calculate(
        "classification",
        {"liquid_limit": 50.0, "plastic_limit": 10.0, "fines": 95.0, "sand": 5.0, "gravel": 0.0},
    )
    assert "above-u-line" in [f.code for f in ev.flags]
    assert ev.results["plasticity_chart"]["beyond_u_line"] is True


def test_flags_a_result_near_a_group_boundary() -> None:
    # ASTM D2487 Note 1 (confirmed): CL/CH for a clay with LL close to 50.
    ev = calculate("classification", {**LEAN_CLAY, "liquid_limit": 49.0, "plastic_limit": 24.0})
    assert ev.results["uscs_borderline"] == "CL/CH"
    assert [f.code for f in ev.flags] == ["near-classification-boundary"]


def test_missing_gravel_is_the_remainder_in_the_method() -> None:
    ev = calculate(
        "classification", {"liquid_limit": 41.0, "plastic_limit": 22.0, "fines": 60.0, "sand": 25.0}
    )
    assert ev.results["uscs_name"] == "Sandy lean clay with gravel"  # gravel 15 % (REFERENCES.md)


# -- refusals --------------------------------------------------------------------------------------


def _locs(readings: Mapping[str, object]) -> list[tuple[str | int, ...]]:
    return [e.loc for e in evaluate("classification", readings).errors]


def test_refuses_fractions_that_do_not_add_up_to_100() -> None:
    ev = evaluate("classification", {**LEAN_CLAY, "sand": 7.0})
    assert [e.loc for e in ev.errors] == [("readings", "gravel")]
    assert "add up to 95 %" in ev.errors[0].message
    assert "uscs_symbol" not in ev.results


def test_accepts_fractions_within_one_point_of_100() -> None:
    assert calculate("classification", {**LEAN_CLAY, "sand": 12.9}).results["uscs_symbol"] == "CL"


def test_refuses_a_negative_percentage() -> None:
    assert _locs({**LEAN_CLAY, "sand": -2.0}) == [("readings", "sand")]


def test_refuses_percent_passing_0075_that_differs_from_the_fines() -> None:
    assert _locs({**LEAN_CLAY, "percent_passing_0_075mm": 80.0}) == [("readings", "percent_passing_0_075mm")]


def test_accepts_percent_passing_0075_in_place_of_the_fines() -> None:
    readings = {k: v for k, v in LEAN_CLAY.items() if k != "fines"}
    ev = calculate("classification", {**readings, "percent_passing_0_075mm": 86.0})
    assert ev.results["uscs_symbol"] == "CL"


def test_refuses_a_finer_sieve_passing_more_than_a_coarser_one() -> None:
    assert _locs({**LEAN_CLAY, "percent_passing_2mm": 90.0, "percent_passing_0_425mm": 95.0}) == [
        ("readings", "percent_passing_0_425mm")
    ]
    assert _locs({**LEAN_CLAY, "percent_passing_0_425mm": 80.0}) == [("readings", "percent_passing_0_425mm")]


def test_refuses_more_passing_2mm_than_is_finer_than_475mm() -> None:
    # The 2 mm sieve is finer than 4.75 mm, so it passes at most 100 % - gravel (common practice).
    assert _locs({**LEAN_CLAY, "gravel": 12.0, "sand": 2.0, "percent_passing_2mm": 95.0}) == [
        ("readings", "percent_passing_2mm")
    ]


def test_refuses_a_plasticity_index_that_contradicts_the_limits() -> None:
    assert _locs({**LEAN_CLAY, "plasticity_index": 25.0}) == [("readings", "plasticity_index")]


def test_refuses_a_liquid_limit_without_a_plastic_limit() -> None:
    readings = {k: v for k, v in LEAN_CLAY.items() if k != "plastic_limit"}
    assert _locs(readings) == [("readings", "plastic_limit")]


def test_refuses_a_fine_soil_without_limits() -> None:
    assert _locs({"fines": 86.0, "sand": 12.0, "gravel": 2.0}) == [("readings", "liquid_limit")]


def test_clean_sand_needs_no_limits_but_needs_its_grading() -> None:
    ev = evaluate("classification", {"fines": 3.0, "sand": 90.0, "gravel": 7.0})
    assert [e.loc for e in ev.errors] == [("readings", "cu")]
    ok = calculate("classification", {"fines": 3.0, "sand": 90.0, "gravel": 7.0, "cu": 2.0, "cc": 1.0})
    assert ok.results["uscs_symbol"] == "SP"


def test_refuses_a_coarse_soil_without_sand_and_gravel() -> None:
    assert _locs({"liquid_limit": 41.0, "plastic_limit": 22.0, "fines": 30.0}) == [("readings", "sand")]


def test_refuses_a_nonplastic_mark_that_is_not_true_or_false() -> None:
    assert _locs({**LEAN_CLAY, "nonplastic": "maybe"}) == [("readings", "nonplastic")]


def test_refuses_grain_diameters_out_of_order() -> None:
    readings = {"fines": 3.0, "sand": 90.0, "gravel": 7.0, "d10_mm": 0.3, "d30_mm": 0.2, "d60_mm": 0.5}
    assert _locs(readings) == [("readings", "d30_mm")]


def test_refuses_cu_that_contradicts_the_grain_diameters() -> None:
    readings = {
        "fines": 3.0,
        "sand": 90.0,
        "gravel": 7.0,
        "d10_mm": 0.1,
        "d30_mm": 0.2,
        "d60_mm": 0.5,
        "cu": 8.0,
        "cc": 0.8,
    }
    assert _locs(readings) == [("readings", "cu")]


def test_refuses_an_oven_dried_liquid_limit_without_the_liquid_limit() -> None:
    assert _locs(
        {"nonplastic": True, "liquid_limit_oven_dried": 20.0, "fines": 90.0, "sand": 10.0, "gravel": 0.0}
    ) == [("readings", "liquid_limit")]


def test_names_every_bad_field_at_once() -> None:
    locs = _locs(
        {
            "liquid_limit": "forty",
            "plastic_limit": 22.0,
            "fines": 86.0,
            "sand": 12.0,
            "gravel": 2.0,
            "cu": 0.5,
        }
    )
    assert locs == [("readings", "liquid_limit"), ("readings", "cu")]


def _documented_examples() -> list[dict[str, Any]]:
    """The JSON examples of the method's documentation (classification_methods module docstring)."""
    doc = classification_methods.__doc__ or ""
    blocks = [b for b in doc.split("\n\n") if b.startswith("    {")]
    return [json.loads(b) for b in blocks]


def test_documented_readings_examples_are_accepted() -> None:
    examples = [e for e in _documented_examples() if "uscs_symbol" not in e]
    assert len(examples) == 5
    for readings in examples:
        assert "uscs_symbol" in calculate("classification", readings).results


def test_documented_results_example_is_what_the_first_readings_example_gives() -> None:
    first, *_ = _documented_examples()
    results = next(e for e in _documented_examples() if "uscs_symbol" in e)
    got = calculate("classification", first).results
    assert _rounded({k: got[k] for k in results}) == results


def _rounded(value: Any) -> Any:
    """Floats to the two decimals the documentation shows, inside dicts."""
    if isinstance(value, dict):
        return {k: _rounded(v) for k, v in value.items()}
    if isinstance(value, float):
        return round(value, 2)
    return value
