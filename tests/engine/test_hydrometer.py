"""Sedimentation (hydrometer) analysis: Stokes diameters, percent finer, clay fraction, refusals."""

from __future__ import annotations

import math
from typing import Any

import pytest
from hypothesis import given
from hypothesis import strategies as st
from iapws import IAPWS95

from server.engine import InputError, calculate, evaluate
from server.engine.hydrometer import HYDROMETER_152H, gs_factor, percent_finer, stokes_diameter_mm

G = 9.80665  # standard gravity, CGPM 1901


def water(t_c: float) -> tuple[float, float]:
    """Viscosity (Pa·s) and density (kg/m³) of water at 1 atm from the `iapws` package (IAPWS-95/2008)."""
    w = IAPWS95(T=t_c + 273.15, P=0.101325)
    return w.mu, w.rho


def stokes_mm(depth_mm: float, minutes: float, t_c: float, gs: float) -> float:
    """Stokes (1851): D = sqrt(18 eta L / ((Gs - 1) rho_w g t)), written out independently in SI units."""
    mu, rho = water(t_c)
    return 1000.0 * math.sqrt(18.0 * mu * depth_mm / 1000.0 / ((gs - 1.0) * rho * G * minutes * 60.0))


TIMES_READINGS = [
    (1, 40.0),
    (2, 36.0),
    (5, 31.0),
    (15, 26.0),
    (30, 23.0),
    (60, 20.0),
    (250, 15.0),
    (1440, 10.0),
]


def base(**extra: Any) -> dict[str, Any]:
    """A fictional 50 g specimen of Gs 2.65 (so a = 1) read at 20 °C, zero reading 5 g/L."""
    return {
        "dry_mass_g": 50.0,
        "specific_gravity": 2.65,
        "meniscus_correction": 1.0,
        "zero_readings": [{"temperature_c": 20.0, "reading": 5.0}],
        "readings": [{"minutes": m, "reading": r, "temperature_c": 20.0} for m, r in TIMES_READINGS],
        **extra,
    }


def codes(ev: Any) -> list[str]:
    return [f.code for f in ev.flags]


# -- the formulas --------------------------------------------------------------------------------
def test_152h_effective_depth_follows_its_calibration_line() -> None:
    # ASTM D422 Table 2 / textbooks: L = 16.3 - 0.1641 R cm; at R = 0, 16.3 cm; at R = 50, 8.1 cm
    # (the table's value, from memory; the line gives 8.095 cm).
    assert HYDROMETER_152H.effective_depth_mm(0.0) == pytest.approx(163.0)
    assert HYDROMETER_152H.effective_depth_mm(50.0) == pytest.approx(80.95)


@pytest.mark.parametrize(("gs", "a"), [(2.50, 1.04), (2.60, 1.01), (2.65, 1.00), (2.70, 0.99), (2.80, 0.97)])
def test_specific_gravity_factor_matches_the_d422_table(gs: float, a: float) -> None:
    # ASTM D422 Table 1, correction factor a for the 152H, to two decimals (from memory).
    assert round(gs_factor(gs), 2) == a


def test_percent_finer_is_the_corrected_reading_over_the_dry_mass() -> None:
    # ASTM D422 cl. 14.3: P = a (R - Cc)/W x 100; Gs 2.65 (a = 1), R 40, Cc 6, W 50 g: 68 % by hand.
    assert percent_finer(40.0, 6.0, 50.0, 2.65) == pytest.approx(68.0)


@pytest.mark.parametrize(
    ("depth", "minutes", "t_c", "gs"),
    [(100.0, 30.0, 22.0, 2.70), (140.0, 0.5, 12.0, 2.55), (95.0, 1440.0, 28.5, 2.80)],
)
def test_diameter_follows_stokes_law_with_iapws_water(
    depth: float, minutes: float, t_c: float, gs: float
) -> None:
    # Stokes' law with viscosity and density of water from `iapws` (IAPWS 2008 / IAPWS-95).
    assert stokes_diameter_mm(depth, minutes, t_c, gs) == pytest.approx(
        stokes_mm(depth, minutes, t_c, gs), rel=5e-6
    )


def test_diameter_of_the_das_worked_example() -> None:
    # Das, Principles of Geotechnical Engineering, worked example (from memory): Gs 2.60, 24 °C,
    # reading 43 after 60 min, L = 16.29 - 0.1641 x 43 = 9.2 cm, K = 0.0131 from the D422 table:
    # D = 0.0131 sqrt(9.2/60) = 0.0051 mm. Our K comes from IAPWS water instead of the table.
    ev = calculate(
        "hydrometer",
        {
            "dry_mass_g": 50.0,
            "specific_gravity": 2.60,
            "meniscus_correction": 0.0,
            "hydrometer": {"type": "152H", "depth_at_zero_mm": 162.9},
            "readings": [
                {"minutes": 60, "reading": 43.0, "temperature_c": 24.0, "composite_correction": 0.0}
            ],
        },
    )
    assert ev.results["hydrometer_points"][0]["diameter_mm"] == pytest.approx(0.0051, abs=1e-4)


# -- the method ----------------------------------------------------------------------------------
def test_each_reading_gets_its_diameter_and_percent_finer() -> None:
    ev = calculate("hydrometer", base())
    pts = ev.results["hydrometer_points"]
    assert [p["minutes"] for p in pts] == [m for m, _ in TIMES_READINGS]
    for p, (m, r) in zip(pts, TIMES_READINGS, strict=True):
        depth = 163.0 - 1.641 * (r + 1.0)  # meniscus-corrected reading in the 152H line
        assert p["diameter_mm"] == pytest.approx(stokes_mm(depth, m, 20.0, 2.65), rel=5e-6)
        assert p["percent_finer"] == pytest.approx((r - 5.0) / 50.0 * 100.0)  # D422 cl. 14.3, a = 1
    assert ev.flags == []


def test_clay_fraction_is_interpolated_on_log_diameter() -> None:
    # 2 µm lies between the 250 min (15 g/L, 20 %) and 1440 min (10 g/L, 10 %) readings; by hand
    # P = P1 + (P2 - P1) ln(0.002/d1)/ln(d2/d1) with d from Stokes' law and `iapws` water.
    d1 = stokes_mm(163.0 - 1.641 * 11.0, 1440.0, 20.0, 2.65)
    d2 = stokes_mm(163.0 - 1.641 * 16.0, 250.0, 20.0, 2.65)
    assert d1 < 0.002 < d2
    expected = 10.0 + (20.0 - 10.0) * math.log(0.002 / d1) / math.log(d2 / d1)
    ev = calculate("hydrometer", base())
    assert ev.results["clay_fraction"] == pytest.approx(expected, rel=1e-5)
    assert ev.results["clay"] == ev.results["clay_fraction"]


def test_clay_fraction_is_not_extrapolated_beyond_the_readings() -> None:
    readings = base()
    readings["readings"] = readings["readings"][:6]  # stop at 60 min, about 6 µm
    ev = calculate("hydrometer", readings)
    assert ev.results["clay_fraction"] is None
    assert ev.results["silt"] is None
    assert codes(ev) == ["clay-fraction-outside-readings"]
    assert "uncertainty" not in ev.results


def test_silt_is_the_fines_less_the_clay() -> None:
    ev = calculate("hydrometer", base(passing_75um_pct=71.8))
    assert ev.results["silt"] == pytest.approx(71.8 - ev.results["clay_fraction"])


def test_separation_sieve_passing_scales_the_percent_finer_to_the_whole_sample() -> None:
    # ASTM D7928-21 cl. 3.2.3: the specimen is the material passing the separation sieve; of the whole
    # sample, P = 70 % x (40 - 5)/50 x 100 / 100 = 49 % for the first reading (by hand).
    ev = calculate("hydrometer", base(separation_passing_pct=70.0))
    assert ev.results["hydrometer_points"][0]["percent_finer"] == pytest.approx(49.0)


def test_composite_correction_is_interpolated_between_zero_readings() -> None:
    # Zero readings 6.5 at 18 °C and 5.5 at 24 °C: 6.0 at 21 °C (straight line, by hand), so a reading of
    # 46 at 21 °C gives (46 - 6)/50 x 100 = 80 %.
    readings = base(
        zero_readings=[{"temperature_c": 24.0, "reading": 5.5}, {"temperature_c": 18.0, "reading": 6.5}]
    )
    readings["readings"] = [{"minutes": 1, "reading": 46.0, "temperature_c": 21.0}]
    ev = calculate("hydrometer", readings)
    assert ev.results["hydrometer_points"][0]["percent_finer"] == pytest.approx(80.0)
    assert "composite-correction-extrapolated" not in codes(ev)


def test_a_reading_s_own_composite_correction_wins_over_the_zero_readings() -> None:
    readings = base()
    readings["readings"][0]["composite_correction"] = 8.0
    ev = calculate("hydrometer", readings)
    assert ev.results["hydrometer_points"][0]["percent_finer"] == pytest.approx((40.0 - 8.0) / 50.0 * 100.0)


def test_flags_a_composite_correction_carried_beyond_the_zero_readings() -> None:
    readings = base()
    readings["readings"][3]["temperature_c"] = 23.5  # 3.5 °C from the only zero reading
    ev = calculate("hydrometer", readings)
    assert codes(ev) == ["composite-correction-extrapolated"]
    assert "23.5 °C at 15 min" in ev.flags[0].message


def test_flags_a_reading_outside_the_152h_scale() -> None:
    # The 152H is graduated from -5 to 60 g/L (ASTM E100, from memory).
    readings = base()
    readings["readings"][0]["reading"] = 62.0
    ev = calculate("hydrometer", readings)
    assert "hydrometer-reading-out-of-range" in codes(ev)
    assert "62 at 1 min" in next(f.message for f in ev.flags if f.code == "hydrometer-reading-out-of-range")


def test_flags_a_reading_that_rises_as_the_particles_settle() -> None:
    readings = base()
    readings["readings"][4]["reading"] = 27.0  # above the 15 min reading of 26
    ev = calculate("hydrometer", readings)
    assert codes(ev) == ["passing-not-monotonic"]


def test_flags_a_percent_finer_below_zero() -> None:
    readings = base()
    readings["readings"][-1]["reading"] = 4.0  # below the zero reading of 5
    ev = calculate("hydrometer", readings)
    assert "percent-finer-out-of-bounds" in codes(ev)


# -- uncertainty ---------------------------------------------------------------------------------
def _clay(readings: dict[str, Any]) -> float:
    value = calculate("hydrometer", readings).results["clay_fraction"]
    assert isinstance(value, float)
    return value


def _numeric_u(readings: dict[str, Any], paths: list[tuple[list[Any], float]]) -> float:
    """GUM eq. 10 with sensitivities by central differences (JCGM 100:2008 cl. 5.1.3 note 2)."""
    total = 0.0
    for path, u in paths:
        h = 1e-4
        values = []
        for sign in (1.0, -1.0):
            copy: Any = {
                **readings,
                "readings": [dict(x) for x in readings["readings"]],
                "zero_readings": [dict(x) for x in readings.get("zero_readings", [])],
            }
            node = copy
            for key in path[:-1]:
                node = node[key]
            node[path[-1]] = node[path[-1]] + sign * h
            values.append(_clay(copy))
        total += ((values[0] - values[1]) / (2 * h) * u) ** 2
    return math.sqrt(total)


def test_clay_fraction_uncertainty_matches_numerical_propagation() -> None:
    readings = base(reading_resolution=1.0, balance={"resolution_g": 0.01, "calibration_u_g": 0.0})
    ev = calculate("hydrometer", readings)
    u_r = 1.0 / math.sqrt(12.0)  # rectangular, JCGM 100:2008 cl. F.2.2.1
    u_m = 0.01 / math.sqrt(12.0)
    expected = _numeric_u(
        readings,
        [
            (["readings", 6, "reading"], u_r),
            (["readings", 7, "reading"], u_r),
            (["zero_readings", 0, "reading"], u_r),
            (["meniscus_correction"], u_r),
            (["dry_mass_g"], u_m),
        ],
    )
    got = ev.results["uncertainty"]["clay_fraction"]
    assert got["u"] == pytest.approx(expected, rel=1e-4)
    assert got["U"] == pytest.approx(2.0 * got["u"]) and got["k"] == 2.0


def test_clay_fraction_uncertainty_with_corrections_typed_per_reading() -> None:
    readings = base(reading_resolution=0.5, zero_readings=[])
    for row in readings["readings"]:
        row["composite_correction"] = 5.0
    ev = calculate("hydrometer", readings)
    u_r = 0.5 / math.sqrt(12.0)
    u_m = math.sqrt(0.01**2 / 12.0 + 0.005**2)  # the default balance of server.engine.uncertainty
    expected = _numeric_u(
        readings,
        [
            (["readings", 6, "reading"], u_r),
            (["readings", 7, "reading"], u_r),
            (["readings", 6, "composite_correction"], u_r),
            (["readings", 7, "composite_correction"], u_r),
            (["meniscus_correction"], u_r),
            (["dry_mass_g"], u_m),
        ],
    )
    assert ev.results["uncertainty"]["clay_fraction"]["u"] == pytest.approx(expected, rel=1e-4)


# -- refusals ------------------------------------------------------------------------------------
def test_refuses_a_time_that_does_not_follow_the_previous_reading() -> None:
    readings = base()
    readings["readings"][2]["minutes"] = 2
    ev = evaluate("hydrometer", readings)
    assert [e.loc for e in ev.errors] == [("readings", "readings", 2, "minutes")]
    assert "reading 3: time (2 min) must be after the previous reading's (2 min)" == ev.errors[0].message
    # the other readings still show; the clay fraction, which needs them all, does not
    assert len(ev.results["hydrometer_points"]) == 7
    assert "clay_fraction" not in ev.results


def test_refuses_a_reading_without_a_composite_correction() -> None:
    readings = base(zero_readings=[])
    readings["readings"][0]["composite_correction"] = 5.0
    ev = evaluate("hydrometer", readings)
    assert [e.loc for e in ev.errors] == [
        ("readings", "readings", i, "composite_correction") for i in range(1, 8)
    ]


@pytest.mark.parametrize(
    ("key", "value"),
    [
        ("specific_gravity", 1.0),
        ("specific_gravity", "x"),
        ("dry_mass_g", -50.0),
        ("meniscus_correction", None),
    ],
)
def test_refuses_bad_test_wide_values(key: str, value: Any) -> None:
    ev = evaluate("hydrometer", base(**{key: value}))
    assert [e.loc for e in ev.errors] == [("readings", key)]
    assert ev.results.get("hydrometer_points", []) == []


def test_refuses_a_temperature_outside_the_water_formulas() -> None:
    readings = base()
    readings["readings"][1]["temperature_c"] = 45.0
    with pytest.raises(InputError, match=r"reading 2: temperature \(45 °C\) is above 40 °C"):
        calculate("hydrometer", readings)


def test_refuses_a_reading_beyond_the_hydrometer_stem() -> None:
    readings = base()
    readings["readings"][0]["reading"] = 99.5  # 163 - 1.641 x 100.5 < 0
    ev = evaluate("hydrometer", readings)
    assert [e.loc for e in ev.errors] == [("readings", "readings", 0, "reading")]


def test_refuses_an_unknown_hydrometer_type() -> None:
    ev = evaluate("hydrometer", base(hydrometer={"type": "151H"}))
    assert [e.loc for e in ev.errors] == [("readings", "hydrometer", "type")]


def test_refuses_two_zero_readings_at_one_temperature() -> None:
    ev = evaluate(
        "hydrometer",
        base(
            zero_readings=[{"temperature_c": 20.0, "reading": 5.0}, {"temperature_c": 20.0, "reading": 5.5}]
        ),
    )
    assert [e.loc for e in ev.errors] == [("readings", "zero_readings", 1, "temperature_c")]


def test_refuses_more_passing_75_um_than_passes_the_separation_sieve() -> None:
    ev = evaluate("hydrometer", base(separation_passing_pct=60.0, passing_75um_pct=70.0))
    assert [e.loc for e in ev.errors] == [("readings", "passing_75um_pct")]


# -- properties ----------------------------------------------------------------------------------
@given(
    st.lists(st.floats(min_value=2.0, max_value=3.0), min_size=2, max_size=8),
    st.lists(st.floats(min_value=0.0, max_value=6.0), min_size=2, max_size=8),
    st.floats(min_value=15.0, max_value=30.0),
)
def test_readings_on_a_doubling_schedule_give_ever_finer_diameters_and_never_rising_percentages(
    factors: list[float], drops: list[float], t_c: float
) -> None:
    # Each time at least twice the last (as the usual 1, 2, 5, 15 ... min schedule) and a fall of the
    # reading of at most 6 g/L: D ~ sqrt(L/t) falls by 1/sqrt(2) while L grows by at most 14 %.
    n = min(len(factors), len(drops))
    minutes, reading = 0.5, 55.0
    rows = []
    for factor, drop in zip(factors[:n], drops[:n], strict=True):
        minutes *= factor
        reading -= drop
        rows.append(
            {"minutes": minutes, "reading": reading, "temperature_c": t_c, "composite_correction": 0.0}
        )
    ev = calculate(
        "hydrometer",
        {"dry_mass_g": 60.0, "specific_gravity": 2.7, "meniscus_correction": 0.5, "readings": rows},
    )
    pts = ev.results["hydrometer_points"]
    assert all(a["diameter_mm"] > b["diameter_mm"] for a, b in zip(pts, pts[1:], strict=False))
    assert all(a["percent_finer"] >= b["percent_finer"] for a, b in zip(pts, pts[1:], strict=False))
    assert "passing-not-monotonic" not in codes(ev)
