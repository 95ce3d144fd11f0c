"""The charts of a report: each test's own curve, and the report's figures (pure).

Every chart is our own SVG (``server.reports.charts``); here the results are turned into its
points and captions: the flow or cone curve, the compaction curve, the grading and stress-strain
curves of one test, and the plasticity chart, depth profiles, grading curves and activity chart
of the whole report.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from server.engine.plasticity_chart import chart_symbol
from server.reports.charts import (
    ProfileRow,
    Series,
    compaction_chart_svg,
    depth_profile_svg,
    flow_curve_svg,
    grading_chart_svg,
    xy_chart,
)
from server.reports.data import TestEntry
from server.reports.formatting import finite, number, show
from server.reports.quantities import particle_density_used
from server.reports.summary import merge, nonplastic, rank


@dataclass(frozen=True)
class ChartPoint:
    label: str
    sample: str
    liquid_limit: str
    plasticity_index: str
    symbol: str


@dataclass(frozen=True)
class ActivityPoint:
    label: str
    sample: str
    clay_fraction: str
    plasticity_index: str
    activity: str


@dataclass(frozen=True)
class Figure:
    """A chart as printed: its heading, the SVG, a caption."""

    title: str
    svg: str
    caption: str = ""


def grading_points(results: Mapping[str, Any]) -> list[tuple[float, float]]:
    """(size in mm, percent passing) of a test's grading, largest size first: the combined sieve
    and sedimentation curve, else the sieve curve, else the hydrometer points."""
    for key, x_key, y_key in (
        ("combined_curve", "size_mm", "percent_passing"),
        ("grading_curve", "size_mm", "percent_passing"),
        ("hydrometer_points", "diameter_mm", "percent_finer"),
    ):
        rows = results.get(key)
        if not isinstance(rows, list):
            continue
        pts = []
        for row in rows:
            if isinstance(row, Mapping):
                x, y = finite(row.get(x_key)), finite(row.get(y_key))
                if x is not None and y is not None and x > 0:
                    pts.append((x, y))
        if pts:
            return sorted(pts, reverse=True)
    return []


def _flow_curve(results: Mapping[str, Any]) -> tuple[str, str]:
    trials = results.get("liquid_limit_trials")
    if not isinstance(trials, list) or not trials:
        return "", ""
    rows = [t for t in trials if isinstance(t, Mapping)]
    fit = results.get("flow_curve")
    fit = fit if isinstance(fit, Mapping) else None
    svg = flow_curve_svg(rows, fit)
    if fit is None:
        return svg, "The trials as tested; no line is fitted to them (one-point method)."
    slope, intercept = finite(fit.get("slope")), finite(fit.get("intercept"))
    cone = fit.get("x") == "penetration_mm"
    fx = ("log10 d" if fit.get("log_x") else "d") if cone else "log10 N"
    where = "d the cone penetration in mm" if cone else "N the number of blows"
    if slope is None or intercept is None:
        return svg, ""
    sign = "−" if slope < 0 else "+"
    caption = f"Least-squares line: w = {intercept:.2f} {sign} {abs(slope):.2f} {fx}, {where}"
    r2 = finite(fit.get("r2"))
    if r2 is not None:
        caption += f" (r² = {r2:.3f})"
    return svg, caption + "."


def _stress_strain(results: Mapping[str, Any]) -> tuple[str, str]:
    series = []
    for key, label in (("stress_strain", "undisturbed"), ("remoulded_stress_strain", "remoulded")):
        rows = results.get(key)
        if isinstance(rows, list):
            pts = [
                (finite(row.get("strain_pct")), finite(row.get("stress_kpa")))
                for row in rows
                if isinstance(row, Mapping)
            ]
            series.append(Series(label, [(x, y) for x, y in pts if x is not None and y is not None]))
    if not series:
        return "", ""
    svg = xy_chart(
        series,
        title="Stress against strain",
        x_label="Axial strain (%)",
        y_label="Axial stress, corrected area (kPa)",
        width=330.0,
        height=235.0,
    )
    qu, at = results.get("unconfined_strength_kpa"), results.get("strain_at_failure_pct")
    caption = ""
    if finite(qu) is not None and finite(at) is not None:
        caption = (
            f"qu = {show('unconfined_strength_kpa', qu)} kPa at {show('strain_at_failure_pct', at)} % "
            f"strain ({results.get('failure_criterion') or 'peak'})."
        )
    return svg, caption


def _compaction_curve(results: Mapping[str, Any], readings: Mapping[str, Any]) -> tuple[str, str]:
    """Dry density against water content, the curve through the peak and the air-voids lines."""
    points = _xy(results.get("compaction_points"), "water_content", "dry_density_mg_m3")
    w_opt = finite(results.get("optimum_water_content"))
    rho_max = finite(results.get("maximum_dry_density_mg_m3"))
    peak = (w_opt, rho_max) if w_opt is not None and rho_max is not None else None
    three: list[tuple[float, float]] = []
    if peak is not None and len(points) >= 3:
        # the highest point and its neighbours: the three the maximum is the parabola's vertex of
        # (DESIGN.md section 8); with a maximum claimed the highest point is never an end one
        top = max(range(1, len(points) - 1), key=lambda i: points[i][1])
        three = points[top - 1 : top + 2]
    lines_in = results.get("air_voids_lines")
    lines = {
        str(va): _xy(pts, "water_content", "dry_density_mg_m3")
        for va, pts in (lines_in.items() if isinstance(lines_in, Mapping) else ())
    }
    svg = compaction_chart_svg(points, peak=peak, peak_points=three, air_voids=lines)
    caption = "Dry density against water content, the points in order of water content."
    if peak is not None:
        caption += (
            " Through the highest point and its neighbours the curve is the parabola whose vertex"
            " gives the maximum dry density and the optimum water content (marked)."
        )
    else:
        caption += " No maximum is marked: the highest point is the driest or the wettest."
    rho_s = particle_density_used(results)
    if lines and rho_s is not None:
        caption += (
            f" Air-voids lines at {', '.join(f'{va} %' for va in lines)} for a particle density of"
            f" {rho_s[0]} Mg/m³ ({rho_s[1]}) and ρw = 1.00 Mg/m³."
        )
    return svg, caption


def _xy(rows: Any, x_key: str, y_key: str) -> list[tuple[float, float]]:
    """(x, y) of a list of result objects, leaving out any without both numbers."""
    out = []
    for row in rows if isinstance(rows, list) else []:
        if isinstance(row, Mapping):
            x, y = finite(row.get(x_key)), finite(row.get(y_key))
            if x is not None and y is not None:
                out.append((x, y))
    return out


def curve(results: Mapping[str, Any], readings: Mapping[str, Any]) -> tuple[str, str]:
    """The chart of one test's own page: flow or cone curve, compaction curve, grading curve, or
    stress-strain."""
    if results.get("liquid_limit_trials"):
        return _flow_curve(results)
    if results.get("compaction_points"):
        return _compaction_curve(results, readings)
    pts = grading_points(results)
    if pts:
        return (
            grading_chart_svg([("this sample", pts)], title="Grading curve", width=330.0, height=235.0),
            "Percent passing against particle size; fraction boundaries at 2 µm, 75 µm and 4.75 mm.",
        )
    return _stress_strain(results)


def chart_points(groups: list[list[TestEntry]]) -> list[tuple[ChartPoint, float, float]]:
    """Every plastic sample with LL and PI, labelled by its code (with the location when codes repeat)."""
    plotted: list[tuple[TestEntry, dict[str, Any]]] = []
    for tests in groups:
        r = merge(tests)
        ll, pi = finite(r.get("liquid_limit")), finite(r.get("plasticity_index"))
        if not nonplastic(r) and ll is not None and pi is not None:
            plotted.append((tests[0], r))
    codes = [t.sample_code for t, _ in plotted]
    out = []
    for t, r in plotted:
        label = _label(t, codes)
        ll, pi = float(r["liquid_limit"]), float(r["plasticity_index"])
        pos = r.get("plasticity_chart")
        symbol = pos.get("symbol") if isinstance(pos, Mapping) else None
        point = ChartPoint(
            label,
            f"{t.location_code} / {t.sample_code}",
            number("liquid_limit", ll),
            number("plasticity_index", pi),
            str(symbol or chart_symbol(ll, pi)),
        )
        out.append((point, ll, pi))
    return out


def _label(t: TestEntry, codes: Sequence[str]) -> str:
    """A sample's label on a chart: its code, with the location when codes repeat."""
    return t.sample_code if codes.count(t.sample_code) == 1 else f"{t.location_code}/{t.sample_code}"


def _depth_of(t: TestEntry) -> float | None:
    """Where a sample plots on a depth profile: the middle of its depth range (common practice)."""
    if t.depth_from_m is None:
        return t.depth_to_m
    if t.depth_to_m is None:
        return t.depth_from_m
    return (t.depth_from_m + t.depth_to_m) / 2


def depth_profiles(groups: list[list[TestEntry]]) -> tuple[Figure, ...]:
    """One profile of w, LL and PL against depth for each location with any of them."""
    by_location: dict[str, list[ProfileRow]] = {}
    for tests in groups:
        first, r = tests[0], merge(tests)
        depth = _depth_of(first)
        w, ll, pl = (finite(r.get(k)) for k in ("water_content", "liquid_limit", "plastic_limit"))
        if depth is None or (w is None and ll is None and pl is None):
            continue
        if nonplastic(r):
            pl = None
        by_location.setdefault(first.location_code, []).append(
            ProfileRow(first.sample_code, depth, w, ll, pl)
        )
    return tuple(
        Figure(
            f"Location {loc}",
            depth_profile_svg(rows, title=f"{loc}: w, LL and PL against depth"),
            "Each sample at the middle of its depth range; the bar joins its plastic and liquid limits.",
        )
        for loc, rows in by_location.items()
    )


GRADING_PER_CHART = 6  # series beyond this stop reading apart in black and white (common practice)


def grading_charts(groups: list[list[TestEntry]]) -> tuple[Figure, ...]:
    """The grading curves, by location, at most ``GRADING_PER_CHART`` samples to a chart."""
    by_location: dict[str, list[tuple[str, list[tuple[float, float]]]]] = {}
    for tests in groups:
        pts: list[tuple[float, float]] = []
        for t in sorted(tests, key=lambda t: rank("clay_fraction", t.method)):
            pts = grading_points(t.results)
            if pts:
                break
        if pts:
            by_location.setdefault(tests[0].location_code, []).append((tests[0].sample_code, pts))
    out = []
    for loc, curves in by_location.items():
        for i in range(0, len(curves), GRADING_PER_CHART):
            part = curves[i : i + GRADING_PER_CHART]
            out.append(
                Figure(
                    f"Location {loc}",
                    grading_chart_svg(part, title=f"{loc}: grading curves"),
                    "Samples: " + ", ".join(label for label, _ in part) + ".",
                )
            )
    return tuple(out)


def activity_points(groups: list[list[TestEntry]]) -> list[tuple[ActivityPoint, float, float]]:
    """Every plastic sample with a PI and a clay fraction above zero."""
    found = []
    for tests in groups:
        r = merge(tests)
        pi, clay = finite(r.get("plasticity_index")), finite(r.get("clay_fraction"))
        if not nonplastic(r) and pi is not None and clay:
            found.append((tests[0], r, clay, pi))
    codes = [t.sample_code for t, _, _, _ in found]
    return [
        (
            ActivityPoint(
                _label(t, codes),
                f"{t.location_code} / {t.sample_code}",
                show("clay_fraction", clay),
                number("plasticity_index", pi),
                show("activity", r.get("activity")),
            ),
            clay,
            pi,
        )
        for t, r, clay, pi in found
    ]
