"""Grading by sieving (``sieve``) and sieving with sedimentation (``grading``)."""

from __future__ import annotations

import math
from typing import Any

import pytest
from hypothesis import given
from hypothesis import strategies as st

from server.engine import InputError, calculate, evaluate
from server.engine.grading import (
    boundary_percent,
    curvature_coefficient,
    percent_at_size,
    size_at_percent,
    uniformity_coefficient,
)

# Das, Principles of Geotechnical Engineering, grain-size problem set: masses retained on the
# No. 4, 10, 20, 40, 60, 100 and 200 sieves and in the pan, 421.2 g in all (dry sieving).
DAS_SIZES = [4.75, 2.0, 0.85, 0.425, 0.25, 0.15, 0.075]
DAS_RETAINED = [0.0, 18.5, 53.2, 90.5, 81.8, 92.2, 58.5]
DAS_PAN = 26.5


def das_readings(**extra: Any) -> dict[str, Any]:
    return {
        "dry_mass_g": 421.2,
        "sieves": [{"size_mm": d, "retained_g": m} for d, m in zip(DAS_SIZES, DAS_RETAINED, strict=True)],
        "pan_g": DAS_PAN,
        **extra,
    }


def codes(ev: Any) -> list[str]:
    return [f.code for f in ev.flags]


def test_percent_passing_of_the_das_sieve_problem() -> None:
    # P = 100 (M - C)/M (ASTM D6913), by hand: C = 0, 18.5, 71.7, 162.2, 244.0, 336.2, 394.7 g of 421.2 g.
    ev = calculate("sieve", das_readings())
    passing = [p["percent_passing"] for p in ev.results["grading_curve"]]
    assert passing == pytest.approx([100.0, 95.6078, 82.9772, 61.4910, 42.0703, 20.1804, 6.2915], abs=1e-4)
    assert [p["size_mm"] for p in ev.results["grading_curve"]] == DAS_SIZES


def test_d_values_are_read_on_log_size_between_neighbouring_sieves() -> None:
    # Semi-log interpolation (common practice), by hand: D = exp(ln d1 + (p - p1)/(p2 - p1) ln(d2/d1)).
    # D10 between 0.075 mm (6.2915 %) and 0.150 mm (20.1804 %): 0.090248 mm.
    # D30 between 0.150 mm (20.1804 %) and 0.250 mm (42.0703 %): 0.188630 mm.
    # D60 between 0.250 mm (42.0703 %) and 0.425 mm (61.4910 %): 0.408034 mm.
    # Das reads D10 about 0.09 mm and D60 about 0.41 mm off his plotted curve (from memory).
    ev = calculate("sieve", das_readings())
    assert ev.results["d10_mm"] == pytest.approx(0.090248, abs=1e-6)
    assert ev.results["d30_mm"] == pytest.approx(0.188630, abs=1e-6)
    assert ev.results["d60_mm"] == pytest.approx(0.408034, abs=1e-6)
    # Cu = D60/D10 and Cc = D30^2/(D10 D60) (ASTM D2487-17 section 3), by hand from the above.
    assert ev.results["cu"] == pytest.approx(4.52124, abs=1e-5)
    assert ev.results["cc"] == pytest.approx(0.96624, abs=1e-5)


def test_gravel_sand_and_fines_split_at_4_75_mm_and_75_um() -> None:
    # ASTM D2487-17 section 3: gravel retained on 4.75 mm, fines passing 75 µm; Das data, by hand.
    ev = calculate("sieve", das_readings())
    assert ev.results["gravel"] == pytest.approx(0.0)
    assert ev.results["fines"] == pytest.approx(6.2915, abs=1e-4)
    assert ev.results["sand"] == pytest.approx(100.0 - 6.2915, abs=1e-4)
    assert ev.results["percent_passing_2mm"] == pytest.approx(95.6078, abs=1e-4)
    assert ev.results["percent_passing_0_425mm"] == pytest.approx(61.4910, abs=1e-4)
    assert ev.flags == []


def test_cumulative_masses_give_the_same_curve_as_masses_retained() -> None:
    cumulative = [sum(DAS_RETAINED[: i + 1]) for i in range(len(DAS_RETAINED))]
    readings = das_readings()
    readings["sieves"] = [
        {"size_mm": d, "cumulative_retained_g": c} for d, c in zip(DAS_SIZES, cumulative, strict=True)
    ]
    a = calculate("sieve", das_readings()).results
    b = calculate("sieve", readings).results
    assert b["grading_curve"] == pytest.approx(a["grading_curve"])
    assert b["d60_mm"] == pytest.approx(a["d60_mm"])


def test_sieves_may_be_typed_in_any_order() -> None:
    readings = das_readings()
    readings["sieves"] = list(reversed(readings["sieves"]))
    ev = calculate("sieve", readings)
    assert [p["size_mm"] for p in ev.results["grading_curve"]] == DAS_SIZES


def test_washed_fines_count_as_passing_every_sieve() -> None:
    # 500 g dry, washed on 75 µm leaving 300 g; 100 g on 2 mm and 190 g on 75 µm, 10 g in the pan.
    # P(2 mm) = 100 (500 - 100)/500 = 80 %, P(75 µm) = 100 (500 - 290)/500 = 42 % (ASTM D6913, by hand).
    ev = calculate(
        "sieve",
        {
            "dry_mass_g": 500.0,
            "washed_dry_mass_g": 300.0,
            "pan_g": 10.0,
            "sieves": [
                {"size_mm": 4.75, "retained_g": 0.0},
                {"size_mm": 2.0, "retained_g": 100.0},
                {"size_mm": 0.425, "retained_g": 95.0},
                {"size_mm": 0.075, "retained_g": 95.0},
            ],
        },
    )
    assert ev.results["fines"] == pytest.approx(42.0)
    assert ev.results["percent_passing_2mm"] == pytest.approx(80.0)
    assert ev.results["sieve_mass_loss_pct"] == pytest.approx(0.0, abs=1e-12)
    assert ev.flags == []


def test_flags_mass_lost_from_the_sieve_stack() -> None:
    # 421.2 g put on the stack, 417.2 g recovered: 0.95 % lost, above the 0.3 % limit (D6913, from memory).
    ev = calculate("sieve", das_readings(pan_g=22.5))
    assert ev.results["sieve_mass_loss_pct"] == pytest.approx(100.0 * 4.0 / 421.2)
    assert "sieve-mass-loss" in codes(ev)


def test_fines_carry_a_standard_uncertainty_from_the_balance() -> None:
    # GUM first order: u(P)^2 = u_m^2 [n (100/M)^2 + (100 C/M^2)^2], u_m = 0.1/sqrt(12) g, n = 7
    # weighings down to 75 µm, C = 394.7 g, M = 421.2 g; by hand u = 0.0192368 %.
    ev = calculate("sieve", das_readings(balance={"resolution_g": 0.1, "calibration_u_g": 0.0}))
    u_m = 0.1 / math.sqrt(12.0)
    expected = u_m * math.sqrt(7 * (100 / 421.2) ** 2 + (100 * 394.7 / 421.2**2) ** 2)
    assert expected == pytest.approx(0.0192368, abs=1e-7)
    assert ev.results["uncertainty"]["fines"] == pytest.approx({"u": expected, "U": 2 * expected, "k": 2.0})


def test_no_d10_when_the_curve_stays_above_10_percent() -> None:
    readings = das_readings()
    readings["sieves"] = readings["sieves"][:-1]  # stop at 150 µm, 20.2 % passing
    ev = calculate("sieve", readings)
    assert ev.results["d10_mm"] is None
    assert ev.results["cu"] is None and ev.results["cc"] is None
    assert ev.results["d60_mm"] == pytest.approx(0.408034, abs=1e-6)
    # no 75 µm sieve and 20 % still passing 150 µm: the fines are not known, so D2487 may need Cu
    assert "grading-diameter-unavailable" in codes(ev)
    assert "boundary-sieve-missing" in codes(ev)
    assert ev.results["fines"] is None


def test_no_flag_for_a_missing_d10_when_fines_exceed_12_percent() -> None:
    # ASTM D2487-17: Cu and Cc only matter for coarse soils with 12 % fines or less.
    ev = calculate(
        "sieve",
        {
            "dry_mass_g": 100.0,
            "sieves": [
                {"size_mm": 4.75, "retained_g": 0.0},
                {"size_mm": 2.0, "retained_g": 20.0},
                {"size_mm": 0.425, "retained_g": 30.0},
                {"size_mm": 0.075, "retained_g": 20.0},
            ],
        },
    )
    assert ev.results["fines"] == pytest.approx(30.0)
    assert ev.results["d10_mm"] is None
    assert "grading-diameter-unavailable" not in codes(ev)


def test_flags_material_retained_on_the_coarsest_sieve() -> None:
    ev = calculate(
        "sieve",
        {
            "dry_mass_g": 100.0,
            "sieves": [
                {"size_mm": 19.0, "retained_g": 5.0},
                {"size_mm": 4.75, "retained_g": 20.0},
                {"size_mm": 2.0, "retained_g": 20.0},
                {"size_mm": 0.075, "retained_g": 50.0},
            ],
        },
    )
    assert "coarsest-sieve-retains" in codes(ev)
    assert ev.results["gravel"] == pytest.approx(25.0)


def test_flags_too_few_sieves() -> None:
    ev = calculate(
        "sieve",
        {
            "dry_mass_g": 100.0,
            "sieves": [{"size_mm": 4.75, "retained_g": 0.0}, {"size_mm": 0.075, "retained_g": 60.0}],
        },
    )
    assert "too-few-sieves" in codes(ev)
    assert ev.results["fines"] == pytest.approx(40.0)


def test_a_boundary_without_its_sieve_is_interpolated_and_flagged() -> None:
    # P(4.75 mm) between 9.5 mm (90 %) and 2 mm (70 %) on log size, by hand:
    # 70 + 20 ln(4.75/2)/ln(9.5/2) = 70 + 20 x 0.865 / 1.558 = 81.1029 %.
    ev = calculate(
        "sieve",
        {
            "dry_mass_g": 100.0,
            "sieves": [
                {"size_mm": 19.0, "retained_g": 0.0},
                {"size_mm": 9.5, "retained_g": 10.0},
                {"size_mm": 2.0, "retained_g": 20.0},
                {"size_mm": 0.075, "retained_g": 65.0},
            ],
        },
    )
    assert ev.results["gravel"] == pytest.approx(100.0 - 81.1029, abs=1e-4)
    assert codes(ev) == ["boundary-sieve-missing"]


def test_a_fine_set_that_passes_whole_proves_there_is_no_gravel() -> None:
    ev = calculate(
        "sieve",
        {
            "dry_mass_g": 100.0,
            "sieves": [
                {"size_mm": 2.0, "retained_g": 0.0},
                {"size_mm": 0.425, "retained_g": 30.0},
                {"size_mm": 0.15, "retained_g": 30.0},
                {"size_mm": 0.075, "retained_g": 30.0},
            ],
        },
    )
    assert ev.results["gravel"] == 0.0
    assert "boundary-sieve-missing" not in codes(ev)


# -- refusals ------------------------------------------------------------------------------------
def test_refuses_a_negative_mass_retained() -> None:
    readings = das_readings()
    readings["sieves"][2]["retained_g"] = -3.0
    ev = evaluate("sieve", readings)
    assert [e.loc for e in ev.errors] == [("readings", "sieves", 2, "retained_g")]
    assert "sieve 3: mass retained (-3 g) is below 0 g" in ev.errors[0].message
    # sieves coarser than the refused one still show; nothing that needs the whole set does
    assert [p["size_mm"] for p in ev.results["grading_curve"]] == [4.75, 2.0]
    assert "d60_mm" not in ev.results and "fines" not in ev.results


def test_refuses_cumulative_retained_above_the_dry_mass() -> None:
    ev = evaluate(
        "sieve",
        {
            "dry_mass_g": 100.0,
            "sieves": [
                {"size_mm": 2.0, "cumulative_retained_g": 40.0},
                {"size_mm": 0.075, "cumulative_retained_g": 100.5},
            ],
        },
    )
    assert [e.loc for e in ev.errors] == [("readings", "sieves", 1, "cumulative_retained_g")]
    assert "(100.5 g) is above the dry mass (100 g)" in ev.errors[0].message


def test_refuses_retained_masses_that_add_up_above_the_dry_mass_after_washing() -> None:
    ev = evaluate(
        "sieve",
        {
            "dry_mass_g": 100.0,
            "washed_dry_mass_g": 50.0,
            "sieves": [{"size_mm": 2.0, "retained_g": 30.0}, {"size_mm": 0.075, "retained_g": 25.0}],
        },
    )
    assert [e.loc for e in ev.errors] == [("readings", "sieves", 1, "retained_g")]
    assert "above the dry mass after washing (50 g)" in ev.errors[0].message


def test_refuses_a_cumulative_mass_that_falls_on_a_finer_sieve() -> None:
    ev = evaluate(
        "sieve",
        {
            "dry_mass_g": 100.0,
            "sieves": [
                {"size_mm": 4.75, "cumulative_retained_g": 45.2},
                {"size_mm": 2.0, "cumulative_retained_g": 40.1},
            ],
        },
    )
    assert [e.loc for e in ev.errors] == [("readings", "sieves", 1, "cumulative_retained_g")]
    assert "(40.1 g) is below that on the 4.75 mm sieve (45.2 g)" in ev.errors[0].message


def test_refuses_mixing_masses_retained_with_cumulative_masses() -> None:
    ev = evaluate(
        "sieve",
        {
            "dry_mass_g": 100.0,
            "sieves": [{"size_mm": 4.75, "retained_g": 5.0}, {"size_mm": 2.0, "cumulative_retained_g": 40.1}],
        },
    )
    assert [e.loc for e in ev.errors] == [("readings", "sieves", 1, "cumulative_retained_g")]


def test_refuses_a_sieve_size_given_twice() -> None:
    ev = evaluate(
        "sieve",
        {
            "dry_mass_g": 100.0,
            "sieves": [{"size_mm": 2.0, "retained_g": 5.0}, {"size_mm": 2.0, "retained_g": 4.0}],
        },
    )
    assert [e.loc for e in ev.errors] == [("readings", "sieves", 1, "size_mm")]
    assert "grading_curve" not in ev.results


def test_refuses_a_washed_mass_above_the_dry_mass() -> None:
    ev = evaluate("sieve", das_readings(washed_dry_mass_g=500.0))
    assert ("readings", "washed_dry_mass_g") in [e.loc for e in ev.errors]


@pytest.mark.parametrize("bad", ["abc", None, -1.0, 0.0, True, float("nan")])
def test_refuses_a_dry_mass_that_is_not_a_positive_number(bad: Any) -> None:
    ev = evaluate("sieve", das_readings(dry_mass_g=bad))
    assert [e.loc for e in ev.errors] == [("readings", "dry_mass_g")]
    assert "grading_curve" not in ev.results


def test_refuses_a_sieve_without_a_mass() -> None:
    readings = das_readings()
    del readings["sieves"][0]["retained_g"]
    with pytest.raises(InputError, match="sieve 1: mass retained is required"):
        calculate("sieve", readings)


# -- properties ----------------------------------------------------------------------------------
SET = [75.0, 37.5, 19.0, 9.5, 4.75, 2.0, 0.85, 0.425, 0.25, 0.15, 0.075]


# A mass is zero or at least 1e-9 g: nearer zero is refused as no reading (readings.MIN_MAGNITUDE).
MASS = st.one_of(st.just(0.0), st.floats(min_value=1e-9, max_value=500.0))


@given(st.lists(MASS, min_size=len(SET), max_size=len(SET)), st.floats(min_value=0.01, max_value=500.0))
def test_percent_passing_is_monotone_and_within_0_to_100(masses: list[float], pan: float) -> None:
    total = sum(masses) + pan
    sieves = [{"size_mm": d, "retained_g": m} for d, m in zip(SET, masses, strict=True)]
    ev = calculate("sieve", {"dry_mass_g": total, "sieves": sieves})
    passing = [p["percent_passing"] for p in ev.results["grading_curve"]]
    assert all(-1e-9 <= p <= 100.0 + 1e-9 for p in passing)
    assert all(a >= b - 1e-9 for a, b in zip(passing, passing[1:], strict=False))
    assert "passing-not-monotonic" not in codes(ev)
    for key in ("d10_mm", "d30_mm", "d60_mm"):
        d = ev.results[key]
        assert d is None or SET[-1] <= d <= SET[0]


@given(st.integers(min_value=0, max_value=len(SET) - 1), st.floats(max_value=-1e-6, min_value=-1e6))
def test_a_negative_mass_is_refused_where_it_was_typed(index: int, mass: float) -> None:
    sieves = [{"size_mm": d, "retained_g": 10.0} for d in SET]
    sieves[index]["retained_g"] = mass
    ev = evaluate("sieve", {"dry_mass_g": 1000.0, "sieves": sieves})
    assert [e.loc for e in ev.errors] == [("readings", "sieves", index, "retained_g")]
    assert "d10_mm" not in ev.results
    assert len(ev.results["grading_curve"]) == index


@given(
    st.lists(
        st.tuples(st.floats(min_value=0.001, max_value=100.0), st.floats(min_value=0.0, max_value=100.0)),
        # sizes at least 0.1 % apart: real sieve and Stokes sizes are far apart, and two sizes one
        # float step apart cannot hold a size between them (common practice: ASTM E11 series)
        min_size=2,
        max_size=12,
        unique_by=lambda t: round(math.log10(t[0]), 3),
    ),
    st.floats(min_value=0.0, max_value=100.0),
)
def test_a_diameter_read_off_a_monotone_curve_gives_back_its_percent(
    points: list[tuple[float, float]], percent: float
) -> None:
    # Sort the percents with the sizes so that the curve is a physical (monotone) grading curve.
    sizes = sorted(d for d, _ in points)
    percents = sorted(p for _, p in points)
    curve = list(zip(sizes, percents, strict=True))
    d = size_at_percent(curve, percent)
    if percents[0] <= percent <= percents[-1] and percents[0] < percents[-1]:
        assert d is not None
        back = percent_at_size(curve, d)
        assert back is not None and back == pytest.approx(percent, abs=1e-6)
    elif not percents[0] <= percent <= percents[-1]:
        assert d is None


def test_reading_helpers_do_not_extrapolate() -> None:
    curve = [(2.0, 90.0), (0.075, 20.0)]
    assert size_at_percent(curve, 10.0) is None
    assert percent_at_size(curve, 0.002) is None
    assert boundary_percent(curve, 4.75) is None  # 90 % passes 2 mm, so 4.75 mm is not known
    assert boundary_percent([(2.0, 100.0), (0.075, 0.0)], 0.002) == 0.0
    assert uniformity_coefficient(0.1, 0.6) == pytest.approx(6.0)  # ASTM D2487-17 definition, by hand
    assert curvature_coefficient(0.1, 0.3, 0.6) == pytest.approx(1.5)  # 0.09 / 0.06, by hand


# -- sieving with sedimentation ------------------------------------------------------------------
# A fictional clayey sand: sieving of 500 g (washed on 75 µm), the sedimentation specimen of 50 g
# taken from the material passing 2 mm (ASTM D7928-21 cl. 3.2.3), Gs = 2.65 so that a = 1.
SIEVE = {
    "dry_mass_g": 500.0,
    "washed_dry_mass_g": 230.0,
    "pan_g": 1.0,
    "sieves": [
        {"size_mm": 9.5, "retained_g": 0.0},
        {"size_mm": 4.75, "retained_g": 5.0},
        {"size_mm": 2.0, "retained_g": 15.0},
        {"size_mm": 0.425, "retained_g": 80.0},
        {"size_mm": 0.15, "retained_g": 70.0},
        {"size_mm": 0.075, "retained_g": 59.0},
    ],
}
HYDROMETER = {
    "dry_mass_g": 50.0,
    "specific_gravity": 2.65,
    "meniscus_correction": 1.0,
    "zero_readings": [{"temperature_c": 20.0, "reading": 5.0}],
    "readings": [
        {"minutes": m, "reading": r, "temperature_c": 20.0}
        for m, r in [
            (1, 29.0),
            (2, 27.0),
            (5, 24.0),
            (15, 20.0),
            (30, 17.0),
            (60, 14.5),
            (250, 11.0),
            (1440, 8.0),
        ]
    ],
}


def test_grading_joins_the_sedimentation_to_the_sieving() -> None:
    ev = calculate("grading", {"sieve": SIEVE, "hydrometer": HYDROMETER})
    res = ev.results
    # fines 100 (500 - 229)/500 = 54.2 %, 2 mm passes 100 (500 - 20)/500 = 96 % (ASTM D6913, by hand)
    assert res["fines"] == pytest.approx(54.2)
    assert res["percent_passing_2mm"] == pytest.approx(96.0)
    # first reading: specimen P = a (R - Cc)/W x 100 = (29 - 5)/50 x 100 = 48 %, of the sample 48 x 0.96
    assert res["hydrometer_points"][0]["percent_finer"] == pytest.approx(48.0 * 0.96)
    sources = [p["source"] for p in res["combined_curve"]]
    assert sources == ["sieve"] * 6 + ["hydrometer"] * 8
    assert [p["size_mm"] for p in res["combined_curve"]] == sorted(
        (p["size_mm"] for p in res["combined_curve"]), reverse=True
    )
    # D10 now lies among the hydrometer points (of the sample: 1440 min gives (8 - 5)/50 x 96 = 5.76 %)
    assert res["d10_mm"] is not None and res["d10_mm"] < 0.075
    assert res["cu"] == pytest.approx(res["d60_mm"] / res["d10_mm"])
    assert res["silt"] == pytest.approx(res["fines"] - res["clay_fraction"])
    assert ev.flags == []


def test_grading_refuses_percentages_that_come_from_the_sieving() -> None:
    ev = evaluate("grading", {"sieve": SIEVE, "hydrometer": {**HYDROMETER, "separation_passing_pct": 90.0}})
    assert [e.loc for e in ev.errors] == [("readings", "hydrometer", "separation_passing_pct")]


def test_grading_refuses_a_separation_sieve_that_was_not_used() -> None:
    ev = evaluate("grading", {"sieve": SIEVE, "hydrometer": {**HYDROMETER, "separation_sieve_mm": 0.85}})
    assert [e.loc for e in ev.errors] == [("readings", "hydrometer", "separation_sieve_mm")]
    assert ev.errors[0].message.startswith("hydrometer analysis: the separation sieve (0.85 mm) is not among")
    assert "combined_curve" not in ev.results


def test_grading_flags_a_sedimentation_curve_that_sits_above_the_sieving() -> None:
    # 75 µm passes 54.2 % of the sample; a first reading of 40 g/L would put 33.6 x 2 x 0.96 = 67 % finer
    # than about 0.04 mm, which cannot be.
    hyd = {
        **HYDROMETER,
        "readings": [{"minutes": 1, "reading": 40.0, "temperature_c": 20.0}] + HYDROMETER["readings"][1:],
    }
    ev = calculate("grading", {"sieve": SIEVE, "hydrometer": hyd})
    assert codes(ev) == ["passing-not-monotonic"]
    assert "joined sieve and hydrometer curve" in ev.flags[0].message


def test_grading_keeps_the_sieving_when_the_sedimentation_is_refused() -> None:
    hyd = {**HYDROMETER, "specific_gravity": 0.9}
    ev = evaluate("grading", {"sieve": SIEVE, "hydrometer": hyd})
    assert [e.loc for e in ev.errors] == [("readings", "hydrometer", "specific_gravity")]
    assert ev.results["fines"] == pytest.approx(54.2)
    assert "clay_fraction" not in ev.results and "combined_curve" not in ev.results
