"""Bulk and dry density by linear measurement (BS 1377-2:1990 cl. 7.2; ISO 17892-2; ASTM D7263 A)."""

from __future__ import annotations

import math
from typing import Any

import pytest

from server.engine import calculate, evaluate
from server.engine import phase_relations as pr

# The DESIGN.md example determination: w = 7.51 / 22.91 x 100 = 32.780445 % (ASTM D2216-19 formula, by hand)
WATER = {"determinations": [{"tare_g": 15.20, "wet_tare_g": 45.62, "dry_tare_g": 38.11}]}
W = 7.51 / 22.91 * 100
SPECIMEN = {"mass_g": 161.20, "diameter_mm": 38.1, "height_mm": 76.2}


def _volume_cm3(d_mm: float, h_mm: float) -> float:
    return math.pi * d_mm**2 * h_mm / 4 / 1000  # a right cylinder (BS 1377-2:1990 cl. 7.2)


def test_bulk_density_is_mass_over_measured_volume_and_dry_density_follows() -> None:
    # hand-worked from BS 1377-2:1990 cl. 7.2: V = pi 38.1^2 x 76.2 / 4 = 86.8750 cm³, rho = 161.20 / 86.8750
    # = 1.855540 Mg/m³, rho_d = rho / (1 + 0.327804) = 1.397449 Mg/m³
    assert _volume_cm3(38.1, 76.2) == pytest.approx(86.8750, abs=1e-4)
    ev = calculate("density", {"specimens": [SPECIMEN], "water_content": WATER})
    assert ev.results["bulk_density_mg_m3"] == pytest.approx(1.855540, abs=2e-6)
    assert ev.results["water_content"] == pytest.approx(32.7804, abs=1e-4)
    assert ev.results["dry_density_mg_m3"] == pytest.approx(1.397449, abs=2e-6)
    for key in ("void_ratio", "porosity", "degree_of_saturation"):
        assert key not in ev.results  # without a particle density (DESIGN.md section 8)


def test_bulk_density_is_the_mean_of_the_specimens_not_pooled_mass_over_pooled_volume() -> None:
    small = {"mass_g": 70.00, "diameter_mm": 38.0, "height_mm": 38.0}  # 1.62427 Mg/m³ (hand-worked, as above)
    ev = calculate("density", {"specimens": [SPECIMEN, small], "water_content": WATER})
    rho = [161.20 / _volume_cm3(38.1, 76.2), 70.00 / _volume_cm3(38.0, 38.0)]
    assert ev.results["bulk_density_determinations"] == [pytest.approx(r) for r in rho]
    assert ev.results["bulk_density_mg_m3"] == pytest.approx(sum(rho) / 2)  # DESIGN.md section 8
    pooled = 231.20 / (_volume_cm3(38.1, 76.2) + _volume_cm3(38.0, 38.0))
    assert (
        abs(ev.results["bulk_density_mg_m3"] - pooled) > 0.03
    )  # the two conventions differ: 1.7399 vs 1.7789 (hand-worked)


def test_with_a_particle_density_void_ratio_porosity_and_saturation_are_given() -> None:
    # phase relations (Head 2006 vol. 1 ch. 3, from memory), rho_w = 1.00 Mg/m³ (DESIGN.md section 8):
    # rho 1.90, w 20 % (0.20), rho_s 2.70: rho_d = 1.583333, e = 2.70/1.583333 - 1 = 0.705263,
    # n = 0.705263/1.705263 = 0.413580, S = 20 x 2.70 / 0.705263 = 76.5672 %
    assert pr.dry_density(1.90, 20.0) == pytest.approx(1.583333, abs=1e-6)
    e = pr.void_ratio(2.70, 1.90 / 1.2)
    assert e == pytest.approx(0.705263, abs=1e-6)
    assert pr.porosity(e) == pytest.approx(0.413580, abs=1e-6)
    assert pr.degree_of_saturation(20.0, 2.70, e) == pytest.approx(76.5672, abs=1e-4)
    ev = calculate(
        "density", {"specimens": [SPECIMEN], "water_content": WATER, "particle_density_mg_m3": 2.70}
    )
    rho_d = ev.results["dry_density_mg_m3"]
    assert ev.results["void_ratio"] == pytest.approx(2.70 / rho_d - 1)
    assert ev.results["porosity"] == pytest.approx(1 - rho_d / 2.70)  # n = 1 - rho_d / rho_s (definition)
    assert ev.results["degree_of_saturation"] * ev.results["void_ratio"] == pytest.approx(
        W * 2.70
    )  # S e = w G
    assert ev.results["degree_of_saturation"] == pytest.approx(95.0, abs=0.1)  # and no flag below 100 %
    assert ev.flags == []


def test_a_degree_of_saturation_above_100_percent_is_a_warning() -> None:
    # a warning when the computed saturation exceeds 100 % is common practice: the result is kept
    heavy = {**SPECIMEN, "mass_g": 172.40}  # rho 1.98446, rho_d 1.49454, e 0.80657, S 109.7 % (hand-worked)
    ev = calculate("density", {"specimens": [heavy], "water_content": WATER, "particle_density_mg_m3": 2.70})
    assert ev.results["degree_of_saturation"] == pytest.approx(109.73, abs=0.01)
    assert [(f.code, f.severity) for f in ev.flags] == [("saturation-above-100", "warning")]


def test_uncertainty_of_bulk_and_dry_density() -> None:
    # JCGM 100:2008 cl. 5.1.6: u_rel(rho)^2 = (u_m/m)^2 + (2 u_D/D)^2 + (u_H/H)^2,
    # u_m from the default balance, u_L = 0.01 mm / sqrt(12); dry density adds the water content's u
    # through rho/(1 + w)^2
    u_m = math.sqrt(0.01**2 / 12 + 0.005**2)
    u_l = 0.01 / math.sqrt(12)
    rho = 161.20 / _volume_cm3(38.1, 76.2)
    u_rho = rho * math.sqrt((u_m / 161.20) ** 2 + (2 * u_l / 38.1) ** 2 + (u_l / 76.2) ** 2)
    ev = calculate("density", {"specimens": [SPECIMEN], "water_content": WATER})
    unc = ev.results["uncertainty"]
    assert unc["bulk_density_mg_m3"]["u"] == pytest.approx(u_rho, rel=1e-9)
    u_w = unc["water_content"]["u"]
    f = 1 + W / 100
    assert unc["dry_density_mg_m3"]["u"] == pytest.approx(
        math.hypot(u_rho / f, rho * u_w / 100 / f**2), rel=1e-9
    )


@pytest.mark.parametrize(
    ("change", "loc", "kind"),
    [
        ({"specimens": [{**SPECIMEN, "diameter_mm": 0}]}, ("specimens", 0, "diameter_mm"), "invalid"),
        ({"specimens": [{**SPECIMEN, "height_mm": -76.2}]}, ("specimens", 0, "height_mm"), "invalid"),
        ({"specimens": [{**SPECIMEN, "mass_g": 0}]}, ("specimens", 0, "mass_g"), "invalid"),
        ({"specimens": [{**SPECIMEN, "mass_g": None}]}, ("specimens", 0, "mass_g"), "missing"),
        ({"specimens": []}, ("specimens",), "missing"),
        ({"water_content": None}, ("water_content",), "missing"),
        ({"particle_density_mg_m3": 0.95}, ("particle_density_mg_m3",), "invalid"),  # lighter than water
        (
            {"particle_density_mg_m3": 1.30},
            ("particle_density_mg_m3",),
            "invalid",
        ),  # below rho_d 1.397: no voids
    ],
)
def test_impossible_specimens_and_densities_are_refused_at_their_field(
    change: dict[str, Any], loc: tuple[Any, ...], kind: str
) -> None:
    readings = {"specimens": [SPECIMEN], "water_content": WATER, "particle_density_mg_m3": 2.70, **change}
    (error,) = evaluate("density", readings).errors
    assert (error.loc, error.kind) == (("readings", *loc), kind)


def test_the_water_content_part_is_read_as_every_water_content_is() -> None:
    bad = {"determinations": [{"tare_g": 15.20, "wet_tare_g": 35.00, "dry_tare_g": 38.11}]}  # dry above wet
    ev = evaluate("density", {"specimens": [SPECIMEN], "water_content": bad})
    (error,) = ev.errors
    assert error.loc == ("readings", "water_content", "determinations", 0, "dry_tare_g")
    assert error.message.startswith("water content, determination 1:")
    assert "dry_density_mg_m3" not in ev.results and ev.results["bulk_density_mg_m3"] > 0
