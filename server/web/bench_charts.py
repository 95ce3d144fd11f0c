"""The live charts of a bench page, drawn from the engine's results with ``reports.charts``.

Which chart a test shows follows from what its results hold, not from its method id: a flow or
cone curve wherever liquid-limit trials were computed, the plasticity chart when the set has a
point on it, a grading curve (log size) for sieving and sedimentation, a stress-strain curve
for unconfined compression, and the compaction curve with its air-voids lines. The points are the
engine's own numbers; nothing is computed here but the drawing of the engine's peak parabola.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from server.engine.contract import Evaluation
from server.reports import charts


def _points(rows: Any, x: str, y: str) -> list[tuple[float, float]]:
    if not isinstance(rows, Sequence):
        return []
    out = []
    for row in rows:
        if not isinstance(row, Mapping):
            continue
        px, py = row.get(x), row.get(y)
        if isinstance(px, int | float) and isinstance(py, int | float):
            out.append((float(px), float(py)))
    return out


def flow_chart(results: Mapping[str, Any]) -> str | None:
    """Flow curve (cup) or cone curve, with the fitted line when there is one."""
    trials = results.get("liquid_limit_trials")
    if not trials:
        return None
    return charts.flow_curve_svg(trials, results.get("flow_curve"))


def plasticity_chart(results: Mapping[str, Any], label: str) -> str | None:
    position = results.get("plasticity_chart")
    if not isinstance(position, Mapping):
        return None
    ll, pi = position.get("liquid_limit"), position.get("plasticity_index")
    if not isinstance(ll, int | float) or not isinstance(pi, int | float):
        return None
    return charts.plasticity_chart_svg([(label, float(ll), float(pi))], width=480.0, height=320.0)


def grading_chart(results: Mapping[str, Any]) -> str | None:
    """Percent passing against particle size on a log axis (ASTM D6913 / D7928 presentation)."""
    series: list[charts.Series] = []
    combined = _points(results.get("combined_curve"), "size_mm", "percent_passing")
    if combined:
        series.append(charts.Series("Sieving and sedimentation", combined, marker="circle"))
    else:
        sieved = _points(results.get("grading_curve"), "size_mm", "percent_passing")
        settled = _points(results.get("hydrometer_points"), "diameter_mm", "percent_finer")
        if sieved:
            series.append(charts.Series("Sieving", sieved, marker="circle"))
        if settled:
            series.append(charts.Series("Sedimentation", settled, marker="open-circle", dash="6 3"))
    if not series:
        return None
    return charts.xy_chart(
        series,
        title="Grading curve",
        x_label="Particle size (mm, log scale)",
        y_label="Percent passing (%)",
        x_log=True,
        y_range=(0.0, 100.0),
    )


def stress_strain_chart(results: Mapping[str, Any]) -> str | None:
    series = []
    for key, name, marker in (
        ("stress_strain", "Undisturbed", "circle"),
        ("remoulded_stress_strain", "Remoulded", "open-circle"),
    ):
        pts = _points(results.get(key), "strain_pct", "stress_kpa")
        if pts:
            series.append(charts.Series(name, pts, marker=marker))
    if not series:
        return None
    return charts.xy_chart(
        series, title="Stress-strain curve", x_label="Axial strain (%)", y_label="Axial stress (kPa)"
    )


AIR_VOIDS_LINES = (
    ("0", "Zero air voids", "6 3"),
    ("5", "5 % air voids", "2 2"),
    ("10", "10 % air voids", "8 3 2 3"),
)
"""The engine's ``air_voids_lines`` keys (server/engine/compaction.py), named and dashed apart."""
PARABOLA_STEPS = 20


def _peak_parabola(
    points: list[tuple[float, float]], vertex: tuple[float, float]
) -> list[tuple[float, float]]:
    """The engine's parabola through its peak point and the neighbours either side, drawn between
    those neighbours from the vertex it gave: rho_d = rho_max + a (w - w_opt)^2.

    The peak is the engine's (server/engine/compaction.py): the highest dry density among the
    inner points, the points being in order of water content. ``a`` is taken from the neighbour
    farther from the vertex (the three points lie on the one parabola; the farther gives the
    steadier quotient).
    """
    peak = max(range(1, len(points) - 1), key=lambda i: points[i][1])
    left, right = points[peak - 1], points[peak + 1]
    w_opt, rho_max = vertex
    far = max((left, right), key=lambda p: abs(p[0] - w_opt))
    a = (far[1] - rho_max) / (far[0] - w_opt) ** 2
    step = (right[0] - left[0]) / PARABOLA_STEPS
    ws = [left[0] + i * step for i in range(PARABOLA_STEPS + 1)]
    return [(w, rho_max + a * (w - w_opt) ** 2) for w in ws]


def compaction_chart(results: Mapping[str, Any]) -> str | None:
    """Dry density against water content (BS 1377-4:1990 Figure 6 and ASTM D698 presentation,
    from memory): the compacted points, the parabola through the peak with its vertex, and the
    0, 5 and 10 % air-voids lines when the engine had a particle density."""
    points = _points(results.get("compaction_points"), "water_content", "dry_density_mg_m3")
    if not points:
        return None
    series = [charts.Series("Compacted points", points, line=False, marker="circle")]
    w_opt, rho_max = results.get("optimum_water_content"), results.get("maximum_dry_density_mg_m3")
    if isinstance(w_opt, int | float) and isinstance(rho_max, int | float) and len(points) >= 3:
        vertex = (float(w_opt), float(rho_max))
        series.append(
            charts.Series("Parabola through the peak", _peak_parabola(points, vertex), marker="none", dash="")
        )
        series.append(charts.Series("Maximum dry density", [vertex], line=False, marker="diamond"))
    lines = results.get("air_voids_lines")
    if isinstance(lines, Mapping):
        for key, name, dash in AIR_VOIDS_LINES:
            line = _points(lines.get(key), "water_content", "dry_density_mg_m3")
            if line:
                series.append(charts.Series(name, line, marker="none", dash=dash))
    return charts.xy_chart(
        series, title="Compaction curve", x_label="Water content (%)", y_label="Dry density (Mg/m³)"
    )


def charts_for(ev: Evaluation, label: str = "this sample") -> list[str]:
    """Every chart the results allow, as SVG strings, in the order the page shows them."""
    r = ev.results
    found = (
        flow_chart(r),
        plasticity_chart(r, label),
        grading_chart(r),
        stress_strain_chart(r),
        compaction_chart(r),
    )
    return [svg for svg in found if svg]
