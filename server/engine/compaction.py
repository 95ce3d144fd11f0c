"""The ``compaction`` method: dry density against water content, maximum dry density and optimum.

Readings (masses g, volume cm³, density Mg/m³)::

    {"effort": "standard", "mould_volume_cm3": 944.0, "mould_g": 4250.0,
     "particle_density_mg_m3": 2.70,
     "points": [{"mould_soil_g": 6100.0, "determinations": [determination, ...]}, ...],
     "balance": {"resolution_g": 0.01}}

``effort`` is "standard" (ASTM D698-12; BS 1377-4:1990 cl. 3.3-3.4, the 2.5 kg rammer) or
"modified" (ASTM D1557-12; BS 1377-4 cl. 3.5-3.6, the 4.5 kg rammer): recorded, it does not
change the arithmetic. ``particle_density_mg_m3`` is optional. Each point's water content comes
from its mass determinations (DESIGN.md section 3) through ``water_content``.

Conventions (DESIGN.md section 8):

- each point's bulk density rho = (m_mould+soil - m_mould) / V and dry density
  rho_d = rho / (1 + w/100) (ASTM D698-12 and BS 1377-4:1990 cl. 3.3.5 calculations);
- points are taken in order of water content whatever order they are typed in;
- the maximum is the vertex of the parabola through the point of highest dry density and its
  neighbours on either side (common practice for drawing the curve through its peak); when that
  point is the driest or the wettest, the curve has no peak inside the tested range: the result is
  flagged and no maximum is claimed;
- with a particle density, the dry density at 0 %, 5 % and 10 % air voids,
  rho_d = (1 - Va/100) / (1/rho_s + w/(100 rho_w)) with rho_w = 1.00 Mg/m³ (``phase_relations``).

Results: ``compaction_points`` [{"water_content", "dry_density_mg_m3"}] sorted by water content
(``compaction_point_results``: the same in the order typed, None where a point is refused, for
the bench and the report to show beside each point's readings),
``maximum_dry_density_mg_m3`` and ``optimum_water_content`` (when a peak is bracketed), and with a
particle density ``zero_air_voids`` (one number per point of ``compaction_points``: the dry density
at zero air voids at that point's water content) and ``air_voids_lines`` {"0": [...], "5": [...],
"10": [...]}, each AIR_VOIDS_LINE_STEPS + 1 entries {"water_content", "dry_density_mg_m3"} evenly
spread from the driest to the wettest point, for the chart. ``uncertainty`` holds the maximum dry
density and the optimum water content as {"u", "U", "k": 2}: GUM first order (JCGM 100:2008 cl.
5.1.2) through the vertex, from each of the three points' water content (its determinations'
masses) and bulk density (the two weighings; the mould volume taken as exact), by numerical
derivatives of the vertex formula.

Refused: a mould volume not above zero, a mould and soil not heavier than the mould, a point's
determination refused by ``water_content``, a particle density not above 1 Mg/m³ or above 6; fewer
than three points is "missing" (a curve needs three).

Flags: ``peak-not-bracketed`` (error: no maximum claimed), ``peak-points-same-water-content``
(error: no parabola, no maximum claimed), ``few-compaction-points`` (warning: fewer than five),
``point-above-zero-air-voids`` (warning).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from server.engine import phase_relations as pr
from server.engine.contract import Outcome, method
from server.engine.readings import Readings, fmt
from server.engine.uncertainty import Balance, expanded, read_balance, u_mean, u_water_content
from server.engine.water_content import aligned_items, mean, read_determinations

EFFORTS = ("standard", "modified")
MIN_POINTS = 3  # three points make a parabola
USUAL_POINTS = 5
"""Points a standard asks for: BS 1377-4:1990 cl. 3.3.4 at least five (from memory); ASTM D698-12 and
D1557-12 at least four, preferably five, bracketing the optimum (from memory)."""
AIR_VOIDS = (0.0, 5.0, 10.0)  # the lines BS 1377-4 Figure 6 and D698 draw with the curve (common practice)
AIR_VOIDS_LINE_STEPS = 10
MAX_MOULD_VOLUME_CM3 = 20_000.0  # above the 2305 cm³ CBR mould and the 2124 cm³ ASTM 6 in. mould


@dataclass(frozen=True, slots=True)
class Point:
    """One compacted specimen: water content (%) and bulk density (Mg/m³), each with its u."""

    water_content: float
    u_water_content: float
    bulk_density: float
    u_bulk_density: float

    @property
    def dry_density(self) -> float:
        return pr.dry_density(self.bulk_density, self.water_content)


def parabola_vertex(xs: Sequence[float], ys: Sequence[float]) -> tuple[float, float] | None:
    """The vertex (x, y) of the parabola through three points, by divided
    differences (Newton form); None when two share an x or the points are collinear (no vertex)."""
    (x0, x1, x2), (y0, y1, y2) = xs, ys
    if x0 == x1 or x1 == x2 or x0 == x2:
        return None
    s01 = (y1 - y0) / (x1 - x0)
    s12 = (y2 - y1) / (x2 - x1)
    a = (s12 - s01) / (x2 - x0)
    if a == 0.0:
        return None
    b = s01 - a * (x0 + x1)
    x = -b / (2.0 * a)
    return x, y0 + s01 * (x - x0) + a * (x - x0) * (x - x1)


def _u_vertex(points: Sequence[Point], vertex: tuple[float, float]) -> tuple[float, float]:
    """u of the vertex's x and y from each point's independent water content and bulk density.

    The vertex's sensitivities to each point's (w, rho_d) are forward differences of
    ``parabola_vertex``; the chain rule then turns them into sensitivities to w and rho, with
    d rho_d / d w = -rho_d / (100 + w) and d rho_d / d rho = 1 / (1 + w/100).
    """
    xs = [p.water_content for p in points]
    ys = [p.dry_density for p in points]
    var = [0.0, 0.0]
    for i, p in enumerate(points):
        hx = 1e-7 * max(abs(xs[i]), 1.0)
        hy = 1e-7 * max(abs(ys[i]), 1.0)
        moved_x = parabola_vertex([x + hx if k == i else x for k, x in enumerate(xs)], ys)
        moved_y = parabola_vertex(xs, [y + hy if k == i else y for k, y in enumerate(ys)])
        if moved_x is None or moved_y is None:
            continue
        d_rho_d_d_w = -ys[i] / (100.0 + xs[i])
        d_rho_d_d_rho = 1.0 / (1.0 + xs[i] / 100.0)
        for axis in (0, 1):
            by_y = (moved_y[axis] - vertex[axis]) / hy
            c_w = (moved_x[axis] - vertex[axis]) / hx + by_y * d_rho_d_d_w
            c_rho = by_y * d_rho_d_d_rho
            var[axis] += (c_w * p.u_water_content) ** 2 + (c_rho * p.u_bulk_density) ** 2
    return math.sqrt(var[0]), math.sqrt(var[1])


def read_point(r: Readings, mould_g: float | None, volume: float | None, balance: Balance) -> Point | None:
    """One point: its bulk density from the two weighings and its water content from its
    determinations (the mean, with the uncertainty ``water_content`` gives each)."""
    total = r.number("mould_soil_g", name="mould and soil", unit="g", minimum=0.0)
    dets = read_determinations(r, "determinations", noun="determination", min_items=1)
    if total is not None and mould_g is not None and total <= mould_g:
        r.refuse(
            "mould_soil_g", f"mould and soil ({fmt(total, 'g')}) is not above the mould ({fmt(mould_g, 'g')})"
        )
        return None
    if total is None or mould_g is None or volume is None or r.has_errors_under() or not dets:
        return None
    good = [d for d in dets if d is not None]
    w = mean([d.water_content for d in good])
    u_w = u_mean([u_water_content(d.tare_g, d.wet_tare_g, d.dry_tare_g, balance.u_mass) for d in good])
    rho = (total - mould_g) / volume
    return Point(w, u_w, rho, math.sqrt(2.0) * balance.u_mass / volume)


def _line(w_lo: float, w_hi: float, rho_s: float, air_voids_pct: float) -> list[dict[str, float]]:
    """The dry density at ``air_voids_pct`` % air voids, evenly spread from ``w_lo`` to ``w_hi`` %."""
    ws = [w_lo + (w_hi - w_lo) * i / AIR_VOIDS_LINE_STEPS for i in range(AIR_VOIDS_LINE_STEPS + 1)]
    return [
        {"water_content": w, "dry_density_mg_m3": pr.air_voids_dry_density(w, rho_s, air_voids_pct)}
        for w in ws
    ]


def _air_voids(out: Outcome, points: Sequence[Point], rho_s: float) -> None:
    zav = [pr.air_voids_dry_density(p.water_content, rho_s, 0.0) for p in points]
    out.results["zero_air_voids"] = zav
    lo, hi = points[0].water_content, points[-1].water_content
    out.results["air_voids_lines"] = {f"{va:g}": _line(lo, hi, rho_s, va) for va in AIR_VOIDS}
    above = [p for p, z in zip(points, zav, strict=True) if p.dry_density > z]
    if above:
        where = ", ".join(f"{p.water_content:.1f} %" for p in above)
        out.flag(
            "point-above-zero-air-voids",
            "warning",
            f"the point at {where} water content lies above the zero-air-voids line: check its masses, "
            "its water content and the particle density",
        )


def _maximum(out: Outcome, points: Sequence[Point]) -> None:
    n = len(points)
    peak = max(range(n), key=lambda i: (points[i].dry_density, 0 < i < n - 1))
    if peak in (0, n - 1):
        end = "driest" if peak == 0 else "wettest"
        out.flag(
            "peak-not-bracketed",
            "error",
            f"the highest dry density is at the {end} point: the peak lies outside the water contents "
            "tested, so no maximum dry density is given; compact more points beyond it",
        )
        return
    three = points[peak - 1 : peak + 2]
    vertex = parabola_vertex([p.water_content for p in three], [p.dry_density for p in three])
    if vertex is None:
        why = (
            "two share a water content"
            if len({p.water_content for p in three}) < 3
            else "they lie on a straight line"
        )
        out.flag(
            "peak-points-same-water-content",
            "error",
            f"the highest point and its neighbours do not make a parabola ({why}): "
            "no maximum dry density is given",
        )
        return
    out.results["optimum_water_content"], out.results["maximum_dry_density_mg_m3"] = vertex
    u_x, u_y = _u_vertex(three, vertex)
    unc = out.results.setdefault("uncertainty", {})
    unc["maximum_dry_density_mg_m3"] = expanded(u_y)
    unc["optimum_water_content"] = expanded(u_x)


@method(
    "compaction",
    title="Compaction (dry density and water content)",
    standard="ASTM D698-12; ASTM D1557-12; BS 1377-4:1990 cl. 3.3-3.6",
)
def compaction_method(r: Readings, out: Outcome) -> None:
    """Points sorted by water content, the parabola's vertex as the maximum, and air-voids lines."""
    balance = read_balance(r)
    r.choice("effort", name="compactive effort", choices=EFFORTS)
    volume = r.number(
        "mould_volume_cm3", name="mould volume", unit="cm³", above=0.0, maximum=MAX_MOULD_VOLUME_CM3
    )
    mould = r.number("mould_g", name="mould", unit="g", minimum=0.0)
    rho_s = pr.read_particle_density(r, out)
    rows = [
        None if item is None else read_point(item, mould, volume, balance)
        for item in aligned_items(r, "points", noun="point", min_items=MIN_POINTS)
    ]
    out.results["compaction_point_results"] = [
        None if p is None else {"water_content": p.water_content, "dry_density_mg_m3": p.dry_density}
        for p in rows
    ]
    points = sorted((p for p in rows if p is not None), key=lambda p: p.water_content)
    out.results["compaction_points"] = [
        {"water_content": p.water_content, "dry_density_mg_m3": p.dry_density} for p in points
    ]
    if not points:
        return
    if rho_s is not None:
        _air_voids(out, points, rho_s)
    if r.has_errors_under("points") or len(points) < MIN_POINTS:
        return
    if len(points) < USUAL_POINTS:
        out.flag(
            "few-compaction-points",
            "warning",
            f"{len(points)} points were compacted; BS 1377-4 asks for at least {USUAL_POINTS} and ASTM "
            "D698/D1557 for at least four, preferably five, bracketing the optimum",
        )
    _maximum(out, points)
