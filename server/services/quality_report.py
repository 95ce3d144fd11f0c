"""The Quality page's charts and the quality report PDF (reference soil charts, duplicate
verdicts, proficiency rounds), drawn with ``server.reports.charts`` and rendered by
``server.reports.pdf`` like every other printed document.

A control chart is the chart module's xy chart: the results joined in hand-in order, and each
line (mean, ±2σ warning, ±3σ action) as the limits stood for each point, so a line steps where a
new result joined the history (a point judged against its history is drawn against it too).
Lines are told apart by dash pattern, never colour alone.

The report carries its own time as printed; the PDF's bytes follow from its content and that
time (``SOURCE_DATE_EPOCH`` from it), not from the clock of the render.
"""

from __future__ import annotations

import calendar
from dataclasses import dataclass
from datetime import datetime

from markupsafe import Markup

from server.db.session import Database
from server.db.tables import ReferenceSoil
from server.reports import charts
from server.reports.pdf import html_to_pdf, render_template
from server.services import (
    quality_charts,
    quality_duplicates,
    quality_proficiency,
    quality_references,
    registers,
)

TEMPLATE = "reports/quality.html"

_LINES = (  # (σ multiple, label, dash)
    (0, "Mean", "8 3 2 3"),
    (2, "±2σ warning", "6 3"),
    (3, "±3σ action", "2 2"),
)


def label_of(key: str) -> str:
    return key.replace("_", " ")


def control_chart_svg(chart: quality_charts.Chart) -> str | None:
    """The chart as SVG, or None without a point to draw."""
    if not chart.points:
        return None
    series = [
        charts.Series(
            "Results", [(i + 1.0, p.value) for i, p in enumerate(chart.points)], marker="circle", dash=""
        )
    ]
    for k, label, dash in _LINES:
        for sign in (1, -1) if k else (1,):
            pts = [
                (i + 1.0, p.judged.limits.line(sign * k))
                for i, p in enumerate(chart.points)
                if p.judged.limits is not None
            ]
            if pts:
                shown = label if sign == 1 else ""
                series.append(charts.Series(shown or f"{label} (lower)", pts, marker="none", dash=dash))
    action = [(i + 1.0, p.value) for i, p in enumerate(chart.points) if p.judged.zone == "action"]
    if action:
        series.append(charts.Series("Beyond the action limit", action, line=False, marker="cross"))
    who = f" — {chart.technician.full_name}" if chart.technician else ""
    return charts.xy_chart(
        series,
        title=f"{chart.soil.code}: {chart.method}, {label_of(chart.key)}{who}",
        x_label="Result number, in the order handed in",
        y_label=f"{label_of(chart.key).capitalize()} (%)",
        width=560.0,
        height=300.0,
    )


@dataclass
class SoilCharts:
    soil: ReferenceSoil
    charts: list[tuple[quality_charts.Chart, Markup | None]]


def soil_charts(db: Database) -> list[SoilCharts]:
    """Every active soil's laboratory charts (every technician together)."""
    out = []
    for soil in quality_references.soils(db, active_only=True):
        found = []
        for method, key in quality_charts.chart_choices(db, soil.id or 0):
            chart = quality_charts.chart(db, soil.id or 0, method, key)
            svg = control_chart_svg(chart)
            found.append((chart, Markup(svg) if svg else None))  # our own escaped SVG (reports.charts)
        out.append(SoilCharts(soil, found))
    return out


def report_pdf(db: Database, printed_at: datetime) -> bytes:
    """The quality report as A4 PDF bytes, as at ``printed_at`` (timezone-aware)."""
    lab = registers.laboratory(db)
    html = render_template(
        TEMPLATE,
        lab=lab,
        printed_at=printed_at,
        soils=soil_charts(db),
        pairs=quality_duplicates.pairs(db),
        rounds=quality_proficiency.rounds(db),
        label_of=label_of,
    )
    return html_to_pdf(html, calendar.timegm(printed_at.utctimetuple()))
