"""The live charts of a bench page, drawn from the engine's results with ``reports.charts``.

Which chart a test shows follows from what its results hold, not from its method id: a flow or
cone curve wherever liquid-limit trials were computed, the plasticity chart when the set has a
point on it, a grading curve (log size) for sieving and sedimentation, and a stress-strain curve
for unconfined compression. The points are the engine's own numbers; nothing is computed here.
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


def charts_for(ev: Evaluation, label: str = "this sample") -> list[str]:
    """Every chart the results allow, as SVG strings, in the order the page shows them."""
    r = ev.results
    found = (flow_chart(r), plasticity_chart(r, label), grading_chart(r), stress_strain_chart(r))
    return [svg for svg in found if svg]
