"""Particle density and specific gravity by the small pycnometer (ASTM D854, BS 1377-2 cl. 8.3)."""

from __future__ import annotations

import math
from typing import Any

import pytest
from iapws import IAPWS95

from server.engine import calculate, evaluate
from server.engine.particle_density import Pycnometer, specific_gravity_20c

ATMOSPHERE_MPA = 0.101325

# A fictional determination: m1 30.12, m2 40.15, m3 86.45, m4 80.17 g at 21.0 °C.
DET = {
    "pycnometer_g": 30.12,
    "pycnometer_soil_g": 40.15,
    "pycnometer_soil_water_g": 86.45,
    "pycnometer_water_g": 80.17,
    "temperature_c": 21.0,
}


def _rho_w_iapws95(t: float) -> float:
    """Density of water at one atmosphere in Mg/m³, IAPWS-95 through the `iapws` reference library."""
    return float(IAPWS95(T=t + 273.15, P=ATMOSPHERE_MPA).rho) / 1000.0


def _codes(ev: Any) -> dict[str, str]:
    return {f.code: f.severity for f in ev.flags}


def test_particle_density_is_the_specific_gravity_at_t_times_the_water_density_at_t() -> None:
    # hand-worked from ASTM D854-14 eq. 1: ms = 40.15 - 30.12 = 10.03 g; Gt = 10.03 / (10.03 + 80.17 - 86.45)
    # = 10.03 / 3.75 = 2.674667; rho_w(21 °C) = 0.9979955 Mg/m³ (IAPWS-95 at 0.101325 MPa, `iapws`).
    gt = 10.03 / 3.75
    assert gt == pytest.approx(2.674667, abs=1e-6)
    ev = calculate("particle-density", {"determinations": [DET]})
    assert ev.results["particle_density_determinations"] == [
        pytest.approx(gt * _rho_w_iapws95(21.0), abs=5e-6)
    ]
    assert ev.results["particle_density_mg_m3"] == pytest.approx(2.669306, abs=5e-6)
    # ASTM D854-14 eq. 2: G20 = Gt rho_w(T) / rho_w(20 °C); rho_w(20 °C) = 0.9982072 Mg/m³ (IAPWS-95, `iapws`)
    assert ev.results["specific_gravity"] == pytest.approx(
        gt * _rho_w_iapws95(21.0) / _rho_w_iapws95(20.0), abs=5e-6
    )
    assert ev.flags == []


@pytest.mark.parametrize(("t", "k"), [(20.0, 1.00000), (21.0, 0.99979), (25.0, 0.99884)])
def test_the_temperature_coefficient_matches_astm_d854_table_2(t: float, k: float) -> None:
    # K = rho_w(T) / rho_w(20 °C): ASTM D854-14 Table 2 gives 1.00000, 0.99979, 0.99884 (from memory)
    p = Pycnometer(30.0, 40.0, 86.0, 80.0, t)  # Gt = 10 / (10 + 80 - 86) = 2.5
    assert specific_gravity_20c(p.particle_density_mg_m3) / p.specific_gravity_at_t == pytest.approx(
        k, abs=6e-6
    )


def test_the_mean_of_determinations_is_reported_and_each_is_kept_in_input_order() -> None:
    second = {
        **DET,
        "pycnometer_g": 29.80,
        "pycnometer_soil_g": 39.92,
        "pycnometer_soil_water_g": 86.19,
        "pycnometer_water_g": 79.85,
        "temperature_c": 21.5,
    }
    ev = calculate("particle-density", {"determinations": [second, DET]})
    # hand-worked from ASTM D854-14 eq. 1: Gt = 10.12 / (10.12 + 79.85 - 86.19) = 2.677249 at 21.5 °C
    rho_2 = 10.12 / 3.78 * _rho_w_iapws95(21.5)
    rho_1 = 10.03 / 3.75 * _rho_w_iapws95(21.0)
    assert ev.results["particle_density_determinations"] == [
        pytest.approx(rho_2, abs=5e-6),
        pytest.approx(rho_1, abs=5e-6),
    ]
    assert ev.results["particle_density_mg_m3"] == pytest.approx((rho_1 + rho_2) / 2, abs=5e-6)
    g20 = [rho / _rho_w_iapws95(20.0) for rho in (rho_1, rho_2)]
    assert ev.results["specific_gravity"] == pytest.approx(sum(g20) / 2, abs=5e-6)
    assert "particle-density-spread" not in _codes(ev)  # 0.0023 Mg/m³ apart


def test_determinations_more_than_0_03_apart_get_a_warning() -> None:
    # BS 1377-2:1990 cl. 8.3 (from memory): repeat when two results differ by more than 0.03 Mg/m³.
    # Gt = 10.03 / (10.03 + 80.17 - 86.60) = 2.786 against 2.675: about 0.11 Mg/m³ apart
    far = {**DET, "pycnometer_soil_water_g": 86.60}
    ev = calculate("particle-density", {"determinations": [DET, far]})
    assert _codes(ev) == {"particle-density-spread": "warning"}
    # 86.46 g: Gt = 10.03 / 3.74 = 2.681818, 0.0071 apart: no flag (hand-worked)
    near = {**DET, "pycnometer_soil_water_g": 86.46}
    assert calculate("particle-density", {"determinations": [DET, near]}).flags == []


def test_uncertainty_follows_first_order_propagation_of_the_four_weighings() -> None:
    # JCGM 100:2008 eq. 10; sensitivities checked here by central differences of the D854 formula
    def gt(m1: float, m2: float, m3: float, m4: float) -> float:
        return (m2 - m1) / ((m2 - m1) + m4 - m3)

    masses = [30.12, 40.15, 86.45, 80.17]
    u_mass = math.sqrt(
        0.01**2 / 12 + 0.005**2
    )  # the default balance: 0.01 g readability, 0.005 g calibration
    h = 1e-6
    parts = []
    for i in range(4):
        up, down = list(masses), list(masses)
        up[i] += h
        down[i] -= h
        parts.append((gt(*up) - gt(*down)) / (2 * h) * u_mass)
    u = math.sqrt(sum(p * p for p in parts)) * _rho_w_iapws95(21.0)
    unc = calculate("particle-density", {"determinations": [DET]}).results["uncertainty"]
    assert unc["particle_density_mg_m3"]["u"] == pytest.approx(u, rel=1e-5)
    assert unc["particle_density_mg_m3"]["U"] == pytest.approx(2 * u, rel=1e-5)
    assert unc["specific_gravity"]["u"] == pytest.approx(u / _rho_w_iapws95(20.0), rel=1e-5)


@pytest.mark.parametrize(
    ("change", "field", "words"),
    [
        ({"pycnometer_soil_water_g": 80.00}, "pycnometer_soil_water_g", "lighter than water"),
        ({"pycnometer_soil_water_g": 80.17}, "pycnometer_soil_water_g", "lighter than water"),
        ({"pycnometer_soil_g": 30.12}, "pycnometer_soil_g", "no dry soil"),
        ({"pycnometer_water_g": 30.00}, "pycnometer_water_g", "not above the pycnometer"),
        ({"pycnometer_soil_water_g": 40.00}, "pycnometer_soil_water_g", "not above pycnometer and soil"),
        ({"pycnometer_soil_water_g": 90.20}, "pycnometer_soil_water_g", "displace no water"),
        ({"temperature_c": 45.0}, "temperature_c", "above 40 °C"),  # the water-density formula's range
        ({"pycnometer_g": -1.0}, "pycnometer_g", "below 0 g"),
    ],
)
def test_impossible_weighings_are_refused_at_their_field(
    change: dict[str, Any], field: str, words: str
) -> None:
    ev = evaluate("particle-density", {"determinations": [DET, {**DET, **change}]})
    (error,) = ev.errors
    assert error.loc == ("readings", "determinations", 1, field) and words in error.message
    assert ev.results["particle_density_determinations"][1] is None  # the other row is still computed
    assert ev.results["particle_density_determinations"][0] == pytest.approx(2.669306, abs=5e-6)
    assert "particle_density_mg_m3" not in ev.results


def test_no_determination_is_missing_not_wrong() -> None:
    (error,) = evaluate("particle-density", {}).errors
    assert error.loc == ("readings", "determinations") and error.kind == "missing"
    ev = evaluate("particle-density", {"determinations": [{**DET, "temperature_c": None}]})
    assert [(e.loc[-1], e.kind) for e in ev.errors] == [("temperature_c", "missing")]
