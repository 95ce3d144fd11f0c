"""Compaction (ASTM D698/D1557; BS 1377-4:1990 cl. 3.3-3.6): points, maximum, air-voids lines, flags."""

from __future__ import annotations

import math
import random
from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from server.engine import calculate, evaluate
from server.engine.compaction import parabola_vertex

VOLUME = 1000.0  # the BS 1377-4 one-litre mould, cm³
MOULD = 4000.0


def _dry(w: float) -> float:
    """A fictional curve that is exactly a parabola: 1.80 Mg/m³ at 15 % water content."""
    return 1.80 - 0.004 * (w - 15.0) ** 2


def _point(w: float, dry: float | None = None) -> dict[str, Any]:
    """A point whose determination gives w exactly: 100 g of dry soil holding w g of water (ASTM D2216
    formula), and whose mould and soil give rho = rho_d (1 + w/100) (BS 1377-4:1990 cl. 3.3.5)."""
    rho_d = _dry(w) if dry is None else dry
    return {
        "mould_soil_g": MOULD + VOLUME * rho_d * (1 + w / 100),
        "determinations": [{"tare_g": 15.0, "wet_tare_g": 115.0 + w, "dry_tare_g": 115.0}],
    }


def _readings(points: list[dict[str, Any]], **extra: Any) -> dict[str, Any]:
    return {"effort": "standard", "mould_volume_cm3": VOLUME, "mould_g": MOULD, "points": points, **extra}


WS = [11.0, 13.0, 15.5, 17.0, 19.0]


def _codes(ev: Any) -> dict[str, str]:
    return {f.code: f.severity for f in ev.flags}


def test_points_typed_in_any_order_are_sorted_by_water_content() -> None:
    typed = [_point(w) for w in (15.5, 19.0, 11.0, 17.0, 13.0)]
    ev = calculate("compaction", _readings(typed))
    points = ev.results["compaction_points"]
    assert [p["water_content"] for p in points] == [pytest.approx(w) for w in WS]  # DESIGN.md section 8
    assert [p["dry_density_mg_m3"] for p in points] == [pytest.approx(_dry(w)) for w in WS]
    assert set(points[0]) == {"water_content", "dry_density_mg_m3"}


def test_the_maximum_is_the_vertex_of_the_parabola_through_the_peak_and_its_neighbours() -> None:
    # hand-worked: the points lie on rho_d = 1.80 - 0.004 (w - 15)^2, so the parabola through 13, 15.5 and
    # 17 % is that curve and its vertex is 1.80 Mg/m³ at 15 % (DESIGN.md section 8 convention)
    ev = calculate("compaction", _readings([_point(w) for w in WS]))
    assert ev.results["maximum_dry_density_mg_m3"] == pytest.approx(1.80, abs=1e-9)
    assert ev.results["optimum_water_content"] == pytest.approx(15.0, abs=1e-9)
    assert ev.flags == []


def test_the_vertex_formula_against_a_hand_worked_parabola() -> None:
    # y = -2 x^2 + 8 x + 1 through x = 0, 1, 3 (y = 1, 7, 7): vertex at x = 2, y = 9 (by hand)
    assert parabola_vertex([0.0, 1.0, 3.0], [1.0, 7.0, 7.0]) == (pytest.approx(2.0), pytest.approx(9.0))
    assert parabola_vertex([0.0, 1.0, 2.0], [1.0, 2.0, 3.0]) is None  # collinear: no vertex


@pytest.mark.parametrize(
    ("ws", "end"), [([15.0, 17.0, 19.0, 21.0], "driest"), ([9.0, 11.0, 13.0, 15.0], "wettest")]
)
def test_a_peak_at_the_driest_or_wettest_point_is_flagged_and_no_maximum_is_claimed(
    ws: list[float], end: str
) -> None:
    ev = calculate("compaction", _readings([_point(w) for w in ws]))
    assert _codes(ev)["peak-not-bracketed"] == "error"
    assert end in next(f.message for f in ev.flags if f.code == "peak-not-bracketed")
    assert "maximum_dry_density_mg_m3" not in ev.results and "optimum_water_content" not in ev.results
    assert len(ev.results["compaction_points"]) == 4


def test_a_peak_sharing_its_water_content_with_a_neighbour_makes_no_parabola_and_no_maximum() -> None:
    points = [_point(11.0), _point(15.0), _point(15.0, dry=1.79), _point(17.0), _point(19.0)]
    ev = calculate("compaction", _readings(points))
    assert _codes(ev) == {"peak-points-same-water-content": "error"}
    assert "maximum_dry_density_mg_m3" not in ev.results


def test_fewer_than_five_points_are_a_warning_and_fewer_than_three_are_missing() -> None:
    # BS 1377-4:1990 cl. 3.3 asks for at least five points; ASTM D698-12 at least four, preferably five
    # (both from memory); three still make a parabola
    ev = calculate("compaction", _readings([_point(w) for w in (13.0, 15.5, 17.0)]))
    assert _codes(ev) == {"few-compaction-points": "warning"}
    assert ev.results["maximum_dry_density_mg_m3"] == pytest.approx(1.80, abs=1e-9)
    (error,) = evaluate("compaction", _readings([_point(13.0), _point(15.5)])).errors
    assert (error.loc, error.kind) == (("readings", "points"), "missing")


def test_zero_air_voids_and_the_air_voids_lines() -> None:
    # hand-worked from BS 1377-4:1990 cl. 3.3.5 (from memory), rho_d = (1 - Va/100) / (1/rho_s + w/100),
    # rho_w = 1.00: at w = 15 %, rho_s = 2.70: 1 / (0.370370 + 0.15) = 1.921708 (0 %), 1.825623 (5 %)
    ev = calculate(
        "compaction",
        _readings([_point(w) for w in (11.0, 13.0, 15.0, 17.0, 19.0)], particle_density_mg_m3=2.70),
    )
    zav = ev.results["zero_air_voids"]
    assert len(zav) == 5 and zav[2] == pytest.approx(1.921708, abs=1e-6)
    lines = ev.results["air_voids_lines"]
    assert set(lines) == {"0", "5", "10"}
    for line in lines.values():
        assert len(line) == 11
        assert line[0]["water_content"] == pytest.approx(11.0) and line[-1]["water_content"] == pytest.approx(
            19.0
        )
    middle = {va: lines[va][5] for va in lines}  # 15 %, the middle of 11 to 19 %
    assert middle["0"]["dry_density_mg_m3"] == pytest.approx(1.921708, abs=1e-6)
    assert middle["5"]["dry_density_mg_m3"] == pytest.approx(1.825623, abs=1e-6)
    assert middle["10"]["dry_density_mg_m3"] == pytest.approx(0.9 * 1.921708, abs=1e-6)
    assert ev.flags == []


def test_without_a_particle_density_there_are_no_air_voids_results() -> None:
    ev = calculate("compaction", _readings([_point(w) for w in WS]))
    assert "zero_air_voids" not in ev.results and "air_voids_lines" not in ev.results


def test_a_point_above_the_zero_air_voids_line_is_a_warning() -> None:
    # at 19 % and rho_s 2.65 the saturation line is 1 / (1/2.65 + 0.19) = 1.764 Mg/m³ (hand-worked, as above)
    points = [_point(w) for w in WS[:-1]] + [_point(19.0, dry=1.78)]
    ev = calculate("compaction", _readings(points, particle_density_mg_m3=2.65))
    assert _codes(ev) == {"point-above-zero-air-voids": "warning"}
    assert "19.0 %" in ev.flags[0].message


def test_the_maximum_carries_an_uncertainty_that_monte_carlo_confirms() -> None:
    # JCGM 100:2008 cl. 5.1.2 (first order) against JCGM 101:2008 (propagation of distributions), drawn
    # here with the same input uncertainties: the water content's from its masses, the bulk density's from
    # the two weighings over the volume (default balance: u = sqrt(0.01^2/12 + 0.005^2) g)
    ev = calculate("compaction", _readings([_point(w) for w in WS]))
    unc = ev.results["uncertainty"]
    u_m = math.sqrt(0.01**2 / 12 + 0.005**2)
    rng = random.Random(1557)
    xs, ys = [], []
    three = (13.0, 15.5, 17.0)
    for _ in range(20000):
        w_s, d_s = [], []
        for w in three:
            # w = 100 (wet - dry) / (dry - tare) with wet, dry and tare each drawn about their readings
            tare, wet, dry = (rng.gauss(v, u_m) for v in (15.0, 115.0 + w, 115.0))
            w_i = 100 * (wet - dry) / (dry - tare)
            rho = _dry(w) * (1 + w / 100) + rng.gauss(0.0, math.sqrt(2) * u_m / VOLUME)
            w_s.append(w_i)
            d_s.append(rho / (1 + w_i / 100))
        vertex = parabola_vertex(w_s, d_s)
        assert vertex is not None
        xs.append(vertex[0])
        ys.append(vertex[1])

    def sd(values: list[float]) -> float:
        m = sum(values) / len(values)
        return math.sqrt(sum((v - m) ** 2 for v in values) / (len(values) - 1))

    assert unc["optimum_water_content"]["u"] == pytest.approx(sd(xs), rel=0.05)
    assert unc["maximum_dry_density_mg_m3"]["u"] == pytest.approx(sd(ys), rel=0.05)
    assert unc["maximum_dry_density_mg_m3"]["k"] == 2.0


@pytest.mark.parametrize(
    ("change", "loc", "kind"),
    [
        ({"mould_volume_cm3": 0}, ("mould_volume_cm3",), "invalid"),
        ({"mould_volume_cm3": -944.0}, ("mould_volume_cm3",), "invalid"),
        ({"mould_g": None}, ("mould_g",), "missing"),
        ({"effort": "heavy"}, ("effort",), "invalid"),
        ({"particle_density_mg_m3": 1.0}, ("particle_density_mg_m3",), "invalid"),
    ],
)
def test_impossible_moulds_and_efforts_are_refused_at_their_field(
    change: dict[str, Any], loc: tuple[Any, ...], kind: str
) -> None:
    (error,) = evaluate("compaction", _readings([_point(w) for w in WS], **change)).errors
    assert (error.loc, error.kind) == (("readings", *loc), kind)


def test_a_point_lighter_than_the_mould_or_with_a_bad_determination_is_refused_at_its_field() -> None:
    points = [_point(w) for w in WS]
    points[1] = {**points[1], "mould_soil_g": 3990.0}
    points[3] = {**points[3], "determinations": [{"tare_g": 15.0, "wet_tare_g": 110.0, "dry_tare_g": 115.0}]}
    ev = evaluate("compaction", _readings(points))
    assert [e.loc for e in ev.errors] == [
        ("readings", "points", 1, "mould_soil_g"),
        ("readings", "points", 3, "determinations", 0, "dry_tare_g"),  # dry above wet (ASTM D2216)
    ]
    assert "not above the mould" in ev.errors[0].message
    assert "maximum_dry_density_mg_m3" not in ev.results
    assert len(ev.results["compaction_points"]) == 3  # the good points, for the chart while typing
    typed = ev.results["compaction_point_results"]  # in the order typed, beside each point's row
    assert typed[1] is None and typed[3] is None
    by_water = sorted((p for p in typed if p), key=lambda p: p["water_content"])
    assert by_water == ev.results["compaction_points"]


@settings(max_examples=50, deadline=None)
@given(st.permutations(WS))
def test_the_result_does_not_depend_on_the_order_the_points_are_typed(order: list[float]) -> None:
    # DESIGN.md section 8: points are taken in order of water content whatever order they are typed in
    ev = calculate("compaction", _readings([_point(w) for w in order], particle_density_mg_m3=2.70))
    assert ev.results["maximum_dry_density_mg_m3"] == pytest.approx(1.80, abs=1e-9)
    assert ev.results["zero_air_voids"][0] == pytest.approx(1 / (1 / 2.70 + 0.11))  # the driest point first
