"""Standard uncertainty by the GUM law of propagation (JCGM 100:2008), and where it appears."""

from __future__ import annotations

import math

import pytest

from server.engine import calculate, evaluate
from server.engine.uncertainty import Balance, u_index, u_mean, u_water_content
from server.engine.water_content import water_content

T17 = (15.20, 45.62, 38.11)  # DESIGN.md example determination: tare, wet+tare, dry+tare (g)


def test_default_balance_reading_uncertainty_combines_resolution_and_calibration() -> None:
    # JCGM 100:2008 cl. F.2.2.1: a resolution of 0.01 g gives 0.01/sqrt(12) g; with a 0.005 g
    # calibration uncertainty, u = sqrt(0.01^2/12 + 0.005^2) = 0.0057735 g (computed).
    assert Balance().u_mass == pytest.approx(0.0057735, abs=1e-7)


def test_water_content_uncertainty_matches_a_numerical_propagation() -> None:
    # JCGM 100:2008 cl. 5.1.3: sensitivity coefficients may be found numerically. Central
    # differences of the ASTM D2216 formula, each mass moved by 1 mg.
    u_m = 0.02
    h = 0.001
    coeffs = []
    for i in range(3):
        up = list(T17)
        dn = list(T17)
        up[i] += h
        dn[i] -= h
        coeffs.append((water_content(*up) - water_content(*dn)) / (2 * h))
    expected = u_m * math.sqrt(sum(c * c for c in coeffs))
    assert u_water_content(*T17, u_m) == pytest.approx(expected, rel=1e-6)


def test_water_content_uncertainty_of_the_design_example() -> None:
    # Worked by hand: a = 7.51 g water, b = 22.91 g dry soil; coefficients 4.3649, 5.7957, 1.4308
    # per gram; with u = 0.0057735 g per reading, u(w) = 0.04270 % (computed).
    assert u_water_content(*T17, Balance().u_mass) == pytest.approx(0.04270, abs=5e-5)


def test_mean_of_two_equal_uncertainties_is_smaller_by_root_two() -> None:
    # JCGM 100:2008 eq. 10 for y = (x1 + x2)/2.
    assert u_mean([0.1, 0.1]) == pytest.approx(0.1 / math.sqrt(2))


def test_index_uncertainty_matches_a_numerical_propagation() -> None:
    # LI = (w - PL)/(LL - PL); central differences of the definition (JCGM 100:2008 cl. 5.1.3).
    w, ll, pl = 35.2, 40.0, 21.0
    uw, ull, upl = 0.05, 0.4, 0.1

    def li(a: float, b: float, c: float) -> float:
        return (a - c) / (b - c)

    h = 1e-4
    cw = (li(w + h, ll, pl) - li(w - h, ll, pl)) / (2 * h)
    cl = (li(w, ll + h, pl) - li(w, ll - h, pl)) / (2 * h)
    cp = (li(w, ll, pl + h) - li(w, ll, pl - h)) / (2 * h)
    expected = math.sqrt((cw * uw) ** 2 + (cl * ull) ** 2 + (cp * upl) ** 2)
    assert u_index(w, ll, pl, uw, ull, upl) == pytest.approx(expected, rel=1e-6)


def det(w: float, dry_soil_g: float = 20.0, tare_g: float = 10.0) -> dict[str, float]:
    return {
        "tare_g": tare_g,
        "dry_tare_g": tare_g + dry_soil_g,
        "wet_tare_g": tare_g + dry_soil_g * (1 + w / 100),
    }


def test_every_reported_value_of_a_full_set_carries_its_uncertainty_with_k_2() -> None:
    readings = {
        "water_content": {"determinations": [det(35.0)]},
        "liquid_limit": {
            "method": "ll-cup-multipoint",
            "trials": [{"blows": 15, **det(42.0)}, {"blows": 20, **det(40.8)}, {"blows": 28, **det(39.1)}],
        },
        "plastic_limit": {"determinations": [det(21.0), det(21.3)]},
        "clay_fraction": 31.0,
    }
    r = calculate("atterberg", readings).results
    keys = {
        "water_content",
        "liquid_limit",
        "flow_index",
        "plastic_limit",
        "plasticity_index",
        "liquidity_index",
        "consistency_index",
        "activity",
    }
    assert set(r["uncertainty"]) == keys
    for key in keys:
        entry = r["uncertainty"][key]
        assert entry["k"] == 2  # JCGM 100:2008 cl. 6.3.3, about 95 % coverage
        assert entry["U"] == pytest.approx(2 * entry["u"]) and entry["u"] > 0


def test_a_fitted_limit_includes_the_scatter_of_the_flow_curve() -> None:
    # Das (problem set) trials scatter about their line; on an exact line the fit adds nothing.
    scatter = calculate(
        "ll-cup-multipoint",
        {"trials": [{"blows": 15, **det(42.0)}, {"blows": 20, **det(40.8)}, {"blows": 28, **det(39.1)}]},
    ).results
    exact = calculate(
        "ll-cup-multipoint",
        {"trials": [{"blows": n, **det(40.0 - 10.0 * math.log10(n / 25))} for n in (15, 20, 28)]},
    ).results
    assert scatter["uncertainty"]["liquid_limit"]["u"] > 2 * exact["uncertainty"]["liquid_limit"]["u"]


def test_a_coarser_balance_gives_a_larger_uncertainty() -> None:
    fine = calculate("water-content", {"determinations": [det(30.0)]}).results
    coarse = calculate(
        "water-content",
        {"determinations": [det(30.0)], "balance": {"resolution_g": 0.1, "calibration_u_g": 0.05}},
    ).results
    ratio = coarse["uncertainty"]["water_content"]["u"] / fine["uncertainty"]["water_content"]["u"]
    assert ratio == pytest.approx(10.0)  # every component scaled by ten (JCGM 100:2008 eq. 10)


def test_refuses_a_balance_resolution_of_zero() -> None:
    ev = evaluate("water-content", {"determinations": [det(30.0)], "balance": {"resolution_g": 0}})
    assert [e.loc for e in ev.errors] == [("readings", "balance", "resolution_g")]
