"""Undrained strength: laboratory vane, fall cone, unconfined compression, and sensitivity."""

from __future__ import annotations

import math
from typing import Any

import pytest
from hypothesis import given
from hypothesis import strategies as st

from server.engine import InputError, calculate, evaluate
from server.engine.strength import failure, fall_cone_strength_kpa, stress_strain, vane_strength_kpa

G = 9.80665  # standard gravity, CGPM 1901


def codes(ev: Any) -> list[str]:
    return [f.code for f in ev.flags]


# -- vane ----------------------------------------------------------------------------------------
def test_vane_twice_as_tall_as_wide_gives_6t_over_7_pi_d_cubed() -> None:
    # REFERENCES.md (confirmed): cu = T / [pi D^2 (H/2 + D/6)], for H = 2D cu = 6T / (7 pi D^3);
    # T = 0.0142 N·m, D = 12.7 mm: 6 x 0.0142 / (7 pi 0.0127^3) = 1891.39 Pa, by hand.
    expected = 6 * 0.0142 / (7 * math.pi * 0.0127**3) / 1000.0
    assert expected == pytest.approx(1.89139, abs=1e-5)
    assert vane_strength_kpa(0.0142, 12.7, 25.4) == pytest.approx(expected, rel=1e-12)


def test_vane_as_tall_as_wide_gives_3t_over_2_pi_d_cubed() -> None:
    # The same formula with H = D: pi D^2 (D/2 + D/6) = 2 pi D^3 / 3, so cu = 3T / (2 pi D^3) = 3.30993 kPa.
    ev = calculate("vane", {"diameter_mm": 12.7, "height_mm": 12.7, "undisturbed": {"torque_nm": 0.0142}})
    assert ev.results["undrained_strength_kpa"] == pytest.approx(3.30993, abs=1e-5)
    assert "sensitivity" not in ev.results
    assert ev.flags == []


def test_vane_gives_sensitivity_and_its_class() -> None:
    # St = 0.0142 / 0.0035 = 4.057 (same vane), "sensitive" in Skempton & Northey (1952), 4 to 8.
    ev = calculate(
        "vane",
        {
            "diameter_mm": 12.7,
            "height_mm": 25.4,
            "undisturbed": {"torque_nm": 0.0142},
            "remoulded": {"torque_nm": 0.0035},
        },
    )
    cu_r = 6 * 0.0035 / (7 * math.pi * 0.0127**3) / 1000  # the H = 2D form again
    assert ev.results["remoulded_strength_kpa"] == pytest.approx(cu_r)
    assert ev.results["sensitivity"] == pytest.approx(0.0142 / 0.0035)
    assert ev.results["sensitivity_class"] == "sensitive"


def test_vane_flags_a_remoulded_specimen_stronger_than_the_undisturbed_one() -> None:
    ev = calculate(
        "vane",
        {
            "diameter_mm": 12.7,
            "height_mm": 12.7,
            "undisturbed": {"torque_nm": 0.003},
            "remoulded": {"torque_nm": 0.004},
        },
    )
    assert codes(ev) == ["remoulded-stronger"]
    assert ev.results["sensitivity_class"] == "insensitive"  # St up to 1 (Skempton & Northey 1952)


def test_vane_uncertainty_follows_first_order_propagation() -> None:
    # GUM eq. 10 by central differences of the formula (JCGM 100:2008 cl. 5.1.3 note 2) against the
    # engine's analytic sensitivities; resolutions 0.0001 N·m and 0.01 mm, u = resolution / sqrt(12).
    t, d, h = 0.0142, 12.7, 25.4
    u_t, u_l = 0.0001 / math.sqrt(12), 0.01 / math.sqrt(12)
    eps = 1e-7

    def partial(i: int) -> float:
        x = [t, d, h]
        up, down = list(x), list(x)
        up[i] += eps
        down[i] -= eps
        return (vane_strength_kpa(*up) - vane_strength_kpa(*down)) / (2 * eps)

    expected = math.sqrt((partial(0) * u_t) ** 2 + (partial(1) * u_l) ** 2 + (partial(2) * u_l) ** 2)
    ev = calculate(
        "vane",
        {
            "diameter_mm": d,
            "height_mm": h,
            "undisturbed": {"torque_nm": t},
            "torque_resolution_nm": 0.0001,
            "length_resolution_mm": 0.01,
        },
    )
    assert ev.results["uncertainty"]["undrained_strength_kpa"]["u"] == pytest.approx(expected, rel=1e-6)


def test_vane_gives_no_uncertainty_without_a_torque_resolution() -> None:
    ev = calculate("vane", {"diameter_mm": 12.7, "height_mm": 12.7, "undisturbed": {"torque_nm": 0.0142}})
    assert "uncertainty" not in ev.results


def test_vane_refuses_a_zero_torque_but_keeps_the_other_specimen() -> None:
    ev = evaluate(
        "vane",
        {
            "diameter_mm": 12.7,
            "height_mm": 12.7,
            "undisturbed": {"torque_nm": 0},
            "remoulded": {"torque_nm": 0.0035},
        },
    )
    assert [e.loc for e in ev.errors] == [("readings", "undisturbed", "torque_nm")]
    assert ev.errors[0].message == "undisturbed specimen: peak torque (0 N·m) must be above 0 N·m"
    assert "undrained_strength_kpa" not in ev.results and "sensitivity" not in ev.results
    assert ev.results["remoulded_strength_kpa"] > 0


def test_vane_refuses_a_bad_resolution_but_still_gives_the_strength() -> None:
    ev = evaluate(
        "vane",
        {
            "diameter_mm": 12.7,
            "height_mm": 12.7,
            "undisturbed": {"torque_nm": 0.0142},
            "torque_resolution_nm": 0.0001,
            "length_resolution_mm": -0.01,
        },
    )
    assert [e.loc for e in ev.errors] == [("readings", "length_resolution_mm")]
    assert ev.results["undrained_strength_kpa"] == pytest.approx(3.30993, abs=1e-5)  # 3T/(2 pi D^3), above
    assert "uncertainty" not in ev.results


def test_vane_refuses_a_missing_undisturbed_specimen() -> None:
    with pytest.raises(InputError, match="undisturbed specimen readings are required"):
        calculate("vane", {"diameter_mm": 12.7, "height_mm": 12.7})


@pytest.mark.parametrize("key", ["diameter_mm", "height_mm"])
def test_vane_refuses_a_blade_size_that_is_not_positive(key: str) -> None:
    readings: dict[str, Any] = {"diameter_mm": 12.7, "height_mm": 12.7, "undisturbed": {"torque_nm": 0.01}}
    readings[key] = -12.7
    ev = evaluate("vane", readings)
    assert [e.loc for e in ev.errors] == [("readings", key)]
    assert "undrained_strength_kpa" not in ev.results


# -- fall cone -----------------------------------------------------------------------------------
def test_fall_cone_follows_hansbo() -> None:
    # Hansbo (1957): cu = c m g / i^2; 80 g, 30°, c = 0.8, i = 10 mm: 0.8 x 0.08 x 9.80665 / 0.01^2
    # = 6276.26 Pa; 60 g, 60°, c = 0.27: 1588.68 Pa (by hand).
    assert fall_cone_strength_kpa(80.0, 10.0, 0.8) == pytest.approx(6.27626, abs=1e-5)
    assert fall_cone_strength_kpa(60.0, 10.0, 0.27) == pytest.approx(1.58868, abs=1e-5)


def test_fall_cone_at_the_liquid_limit_penetration_is_near_the_remoulded_strength_at_ll() -> None:
    # 80 g / 30° cone at 20 mm (the BS 1377 liquid limit): 0.8 x 0.08 x 9.80665 / 0.02^2 = 1.57 kPa,
    # near the 1.7 kPa that Wroth & Wood (1978) give at the liquid limit (REFERENCES.md, from memory).
    assert fall_cone_strength_kpa(80.0, 20.0, 0.8) == pytest.approx(1.7, rel=0.1)


def test_fall_cone_averages_the_drops_and_gives_sensitivity() -> None:
    # Means 6.2 and 14.1 mm; St = (14.1/6.2)^2 = 5.172 since cu ~ 1/i^2 (Hansbo 1957), "sensitive"
    # (Skempton & Northey 1952).
    ev = calculate(
        "fall-cone-strength",
        {
            "cone_mass_g": 80.0,
            "cone_angle_deg": 30,
            "undisturbed": {"penetration_mm": [6.1, 6.3]},
            "remoulded": {"penetration_mm": [14.2, 14.0]},
        },
    )
    res = ev.results
    assert res["cone_factor"] == 0.8
    assert res["undisturbed_penetration_mm"] == pytest.approx(6.2)
    assert res["undrained_strength_kpa"] == pytest.approx(0.8 * 0.08 * G / 0.0062**2 / 1000)
    assert res["remoulded_strength_kpa"] == pytest.approx(0.8 * 0.08 * G / 0.0141**2 / 1000)
    assert res["sensitivity"] == pytest.approx((14.1 / 6.2) ** 2)
    assert res["sensitivity_class"] == "sensitive"


def test_fall_cone_takes_the_lab_s_own_cone_factor() -> None:
    ev = calculate(
        "fall-cone-strength",
        {
            "cone_mass_g": 60.0,
            "cone_angle_deg": 60,
            "cone_factor": 0.3,
            "undisturbed": {"penetration_mm": [10.0]},
        },
    )
    assert ev.results["undrained_strength_kpa"] == pytest.approx(0.3 * 0.06 * G / 0.01**2 / 1000)


def test_fall_cone_uncertainty_combines_resolution_and_scatter() -> None:
    # u(i)^2 = u_res^2/n + s^2/n with u_res = 0.1/sqrt(12) mm, s^2 = 0.02 mm^2, n = 2 (JCGM 100:2008
    # cl. 4.2.3 and F.2.2.1); u(cu)/cu = 2 u(i)/i since cu ~ i^-2 (cl. 5.1.6).
    ev = calculate(
        "fall-cone-strength",
        {"cone_mass_g": 80.0, "cone_angle_deg": 30, "undisturbed": {"penetration_mm": [6.1, 6.3]}},
    )
    u_i = math.sqrt((0.1**2 / 12) / 2 + 0.02 / 2)
    cu = ev.results["undrained_strength_kpa"]
    assert ev.results["uncertainty"]["undrained_strength_kpa"]["u"] == pytest.approx(cu * 2 * u_i / 6.2)


def test_fall_cone_refuses_a_cone_angle_it_has_no_factor_for() -> None:
    ev = evaluate(
        "fall-cone-strength",
        {"cone_mass_g": 80.0, "cone_angle_deg": 45, "undisturbed": {"penetration_mm": [6.1]}},
    )
    assert [e.loc for e in ev.errors] == [("readings", "cone_angle_deg")]
    assert "undrained_strength_kpa" not in ev.results
    assert ev.results["undisturbed_penetration_mm"] == pytest.approx(6.1)


def test_fall_cone_refuses_a_bad_penetration_where_it_was_typed() -> None:
    ev = evaluate(
        "fall-cone-strength",
        {"cone_mass_g": 80.0, "cone_angle_deg": 30, "undisturbed": {"penetration_mm": [6.1, -6.3]}},
    )
    assert [e.loc for e in ev.errors] == [("readings", "undisturbed", "penetration_mm", 1)]
    assert ev.errors[0].message == "undisturbed specimen: penetration 2 (-6.3 mm) must be above 0 mm"


# -- unconfined compression ----------------------------------------------------------------------
# A fictional 38 x 76 mm specimen (H/D = 2); A0 = pi 0.038^2 / 4 = 1.134115e-3 m².
PEAKING = [
    (0.0, 0.0),
    (0.76, 61.0),
    (1.52, 98.0),
    (2.28, 121.0),
    (3.04, 133.0),
    (3.80, 136.0),
    (4.56, 131.0),
    (5.32, 124.0),
]


def ucs(rows: list[tuple[float, float]], diameter: float = 38.0, height: float = 76.0) -> dict[str, Any]:
    return {
        "diameter_mm": diameter,
        "height_mm": height,
        "readings": [{"deformation_mm": dh, "load_n": p} for dh, p in rows],
    }


def test_stress_uses_the_area_corrected_for_strain() -> None:
    # ASTM D2166: sigma = P (1 - eps) / A0; 136 N at 5 % strain: 136 x 0.95 / 1.134115e-3 = 113.921 kPa.
    curve = stress_strain(38.0, 76.0, [(3.80, 136.0)])
    assert curve[0][0] == pytest.approx(5.0)
    assert curve[0][1] == pytest.approx(113.921, abs=1e-3)


def test_qu_is_the_peak_stress_when_it_comes_before_15_percent() -> None:
    ev = calculate("unconfined-compression", {"undisturbed": ucs(PEAKING)})
    res = ev.results
    assert res["unconfined_strength_kpa"] == pytest.approx(113.921, abs=1e-3)  # by hand, as above
    assert res["undrained_strength_kpa"] == pytest.approx(113.921 / 2, abs=1e-3)  # cu = qu / 2, D2166
    assert res["strain_at_failure_pct"] == pytest.approx(5.0)
    assert res["failure_criterion"] == "peak"
    assert len(res["stress_strain"]) == len(PEAKING)
    assert ev.flags == []


def test_qu_is_the_stress_at_15_percent_when_the_stress_keeps_rising() -> None:
    # Readings at 14 % (10.64 mm, 200 N) and 16 % (12.16 mm, 210 N): stresses 200 x 0.86 / A0 =
    # 151.661 kPa and 210 x 0.84 / A0 = 155.538 kPa; at 15 %, halfway: 153.600 kPa (by hand, D2166).
    rows = [(0.0, 0.0), (3.8, 120.0), (7.6, 170.0), (10.64, 200.0), (12.16, 210.0)]
    ev = calculate("unconfined-compression", {"undisturbed": ucs(rows)})
    assert ev.results["unconfined_strength_kpa"] == pytest.approx(153.600, abs=1e-3)
    assert ev.results["strain_at_failure_pct"] == 15.0
    assert ev.results["failure_criterion"] == "strain-15"
    assert codes(ev) == ["no-peak-before-15pct"]


def test_flags_a_test_stopped_before_the_specimen_failed() -> None:
    rows = [(0.0, 0.0), (1.52, 60.0), (3.04, 90.0), (4.56, 110.0)]
    ev = calculate("unconfined-compression", {"undisturbed": ucs(rows)})
    assert ev.results["failure_criterion"] == "end-of-test"
    assert ev.results["strain_at_failure_pct"] == pytest.approx(6.0)
    assert codes(ev) == ["stopped-before-failure"]


def test_unconfined_compression_gives_sensitivity_from_a_remoulded_specimen() -> None:
    remoulded = [(dh, p / 4.0) for dh, p in PEAKING]
    ev = calculate("unconfined-compression", {"undisturbed": ucs(PEAKING), "remoulded": ucs(remoulded)})
    assert ev.results["remoulded_unconfined_strength_kpa"] == pytest.approx(113.921 / 4, abs=1e-3)
    assert ev.results["remoulded_strength_kpa"] == pytest.approx(113.921 / 8, abs=1e-3)
    assert ev.results["sensitivity"] == pytest.approx(4.0)
    assert ev.results["sensitivity_class"] == "medium sensitivity"  # St = 4: 2-4 (Skempton & Northey 1952)


def test_flags_a_specimen_of_the_wrong_shape_or_size() -> None:
    # ASTM D2166/D2166M-16 section 7: H/D between 2 and 2.5 (confirmed); diameter at least 30 mm
    # (from memory).
    ev = calculate("unconfined-compression", {"undisturbed": ucs(PEAKING, diameter=25.0, height=38.0)})
    assert set(codes(ev)) == {"specimen-slenderness", "specimen-too-small"}


def test_unconfined_uncertainty_follows_first_order_propagation() -> None:
    # qu = P (1 - dH/H) / (pi D^2/4); central differences against the analytic sensitivities.
    p, dh, d, h = 136.0, 3.80, 38.0, 76.0
    u_p, u_l = 0.5 / math.sqrt(12), 0.01 / math.sqrt(12)

    def qu(p: float, dh: float, d: float, h: float) -> float:
        return p * (1 - dh / h) / (math.pi * (d / 1000) ** 2 / 4) / 1000

    x = [p, dh, d, h]
    us = [u_p, u_l, u_l, u_l]
    total = 0.0
    for i in range(4):
        up, down = list(x), list(x)
        up[i] += 1e-6
        down[i] -= 1e-6
        total += ((qu(*up) - qu(*down)) / 2e-6 * us[i]) ** 2
    ev = calculate("unconfined-compression", {"undisturbed": ucs(PEAKING), "load_resolution_n": 0.5})
    unc = ev.results["uncertainty"]
    assert unc["unconfined_strength_kpa"]["u"] == pytest.approx(math.sqrt(total), rel=1e-5)
    assert unc["undrained_strength_kpa"]["u"] == pytest.approx(math.sqrt(total) / 2, rel=1e-5)


def test_refuses_a_deformation_as_large_as_the_specimen() -> None:
    ev = evaluate("unconfined-compression", {"undisturbed": ucs(PEAKING + [(76.0, 10.0)])})
    assert [e.loc for e in ev.errors] == [("readings", "undisturbed", "readings", 8, "deformation_mm")]
    assert "unconfined_strength_kpa" not in ev.results
    assert len(ev.results["stress_strain"]) == len(PEAKING)  # the valid readings still show


def test_refuses_a_deformation_that_goes_back() -> None:
    rows = [(0.0, 0.0), (1.52, 98.0), (0.76, 61.0)]
    ev = evaluate("unconfined-compression", {"undisturbed": ucs(rows)})
    assert [e.loc for e in ev.errors] == [("readings", "undisturbed", "readings", 2, "deformation_mm")]
    assert ev.errors[0].message == (
        "undisturbed specimen, reading 3: axial deformation (0.76 mm) is below "
        "the previous reading's (1.52 mm)"
    )


def test_refuses_a_negative_load() -> None:
    ev = evaluate("unconfined-compression", {"undisturbed": ucs([(0.0, -0.5), (0.76, 61.0)])})
    assert [e.loc for e in ev.errors] == [("readings", "undisturbed", "readings", 0, "load_n")]


def test_refuses_a_single_reading() -> None:
    ev = evaluate("unconfined-compression", {"undisturbed": ucs([(0.76, 61.0)])})
    assert [e.loc for e in ev.errors] == [("readings", "undisturbed", "readings")]


@given(
    st.lists(
        st.tuples(st.floats(min_value=0.0, max_value=1.5), st.floats(min_value=0.0, max_value=500.0)),
        min_size=2,
        max_size=30,
    )
)
def test_qu_is_never_below_a_stress_reached_before_failure(steps: list[tuple[float, float]]) -> None:
    dh = 0.0
    rows = []
    for step, load in steps:
        dh += step
        rows.append((dh, load))
    curve = stress_strain(38.0, 76.0, rows)
    fail = failure(curve)
    assert fail is not None
    assert fail.strain_pct <= 15.0
    before = [s for e, s in curve if e <= fail.strain_pct]
    assert all(fail.stress_kpa >= s - 1e-9 for s in before)
