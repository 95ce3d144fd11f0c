"""Charts: points and lines where the maths puts them, every text escaped, the same input the same SVG."""

from __future__ import annotations

import math
import xml.etree.ElementTree as ET

import pytest

from server.reports.charts import (
    MARGIN_BOTTOM,
    MARGIN_LEFT,
    MARGIN_RIGHT,
    MARGIN_TOP,
    ProfileRow,
    Series,
    activity_boundaries,
    activity_chart_svg,
    depth_profile_svg,
    flow_curve_svg,
    grading_chart_svg,
    plasticity_chart_svg,
    xy_chart,
)

NS = "{http://www.w3.org/2000/svg}"
HOSTILE = "<script>alert(1)</script> & <b>"

# Das, Principles of Geotechnical Engineering, problem set: N 15/20/28, w 42.0/40.8/39.1 %;
# least squares in log10 N gives LL 39.67 at 25 blows (REFERENCES.md, computed fit below).
DAS_TRIALS = [
    {"blows": 15, "water_content": 42.0},
    {"blows": 20, "water_content": 40.8},
    {"blows": 28, "water_content": 39.1},
]
DAS_FIT = {
    "x": "blows",
    "log_x": True,
    "slope": -10.72468960148271,
    "intercept": 54.662225750847284,
    "r2": 0.9970743789609344,
    "target_x": 25,
}
# Fictional cone test of our own; least-squares line computed: LL 54.98 at 20 mm (BS 1377-2:1990 cl. 4.3).
CONE_TRIALS = [
    {"penetration_mm": d, "water_content": w}
    for d, w in ((15.8, 48.3), (18.1, 52.1), (20.9, 56.4), (23.6, 60.6))
]
CONE_FIT = {
    "x": "penetration_mm",
    "log_x": False,
    "slope": 1.5715532286212919,
    "intercept": 23.54755671902268,
    "r2": 0.999776532937812,
    "target_x": 20.0,
}


def parse(svg: str) -> ET.Element:
    return ET.fromstring(svg)


def by_class(root: ET.Element, tag: str, cls: str) -> list[ET.Element]:
    return [e for e in root.iter(f"{NS}{tag}") if e.get("class") == cls]


def points_of(polyline: ET.Element) -> list[tuple[float, float]]:
    return [(float(a), float(b)) for a, b in (p.split(",") for p in polyline.get("points", "").split())]


def y_on(points: list[tuple[float, float]], x: float) -> float:
    """The y of a polyline at x, by linear interpolation on the segment that spans x."""
    for (x1, y1), (x2, y2) in zip(points, points[1:], strict=False):
        if min(x1, x2) <= x <= max(x1, x2) and x1 != x2:
            return y1 + (y2 - y1) * (x - x1) / (x2 - x1)
    raise AssertionError(f"x={x} is outside the polyline")


def texts(root: ET.Element) -> list[str]:
    return [e.text or "" for e in root.iter(f"{NS}text")]


class Frame:
    """Pixel frame of a chart of the module's fixed margins, for a linear axis from lo to hi."""

    def __init__(self, width: float, height: float):
        self.left, self.right = MARGIN_LEFT, width - MARGIN_RIGHT
        self.bottom, self.top = height - MARGIN_BOTTOM, MARGIN_TOP

    def x(self, value: float, lo: float, hi: float) -> float:
        return self.left + (value - lo) / (hi - lo) * (self.right - self.left)

    def y(self, value: float, lo: float, hi: float) -> float:
        return self.bottom - (value - lo) / (hi - lo) * (self.bottom - self.top)


CHART = Frame(560.0, 370.0)  # plasticity_chart_svg's default size; axes LL 0-100, PI 0-60


def test_a_line_passes_through_ll_50_at_pi_21_9() -> None:
    root = parse(plasticity_chart_svg([]))
    (a_line,) = by_class(root, "polyline", "a-line")
    # ASTM D2487 Fig. 4: PI = 0.73 (LL - 20) = 21.9 at LL = 50.
    y = y_on(points_of(a_line), CHART.x(50, 0, 100))
    assert y == pytest.approx(CHART.y(21.9, 0, 60), abs=0.02)


def test_a_line_is_flat_at_pi_4_until_ll_25_5() -> None:
    root = parse(plasticity_chart_svg([]))
    pts = points_of(by_class(root, "polyline", "a-line")[0])
    # ASTM D2487 Fig. 4: horizontal at PI = 4 from the U-line (LL 16) to LL = 25.5 (20 + 4/0.73 = 25.48).
    assert pts[0] == pytest.approx((CHART.x(16, 0, 100), CHART.y(4, 0, 60)), abs=0.01)
    assert pts[1] == pytest.approx((CHART.x(20 + 4 / 0.73, 0, 100), CHART.y(4, 0, 60)), abs=0.02)


def test_u_line_rises_from_ll_16_and_passes_through_ll_50_at_pi_37_8() -> None:
    root = parse(plasticity_chart_svg([]))
    pts = points_of(by_class(root, "polyline", "u-line")[0])
    # ASTM D2487 Fig. 4: vertical at LL = 16 up to PI = 7, then PI = 0.9 (LL - 8) = 37.8 at LL = 50.
    assert pts[0][0] == pytest.approx(CHART.x(16, 0, 100), abs=0.01)
    assert pts[1][0] == pytest.approx(CHART.x(16, 0, 100), abs=0.01)
    assert y_on(pts[1:], CHART.x(50, 0, 100)) == pytest.approx(CHART.y(37.8, 0, 60), abs=0.02)


def test_plots_each_point_where_its_liquid_limit_and_plasticity_index_fall() -> None:
    # REFERENCES.md examples: LL 40 / PI 19 (Das and Liu & Evett) and LL 55 / PI 28 (USCS example, CH).
    root = parse(plasticity_chart_svg([("S1", 40.0, 19.0), ("S3", 55.0, 28.0)]))
    circles = by_class(root, "circle", "point")
    got = [(float(c.get("cx", "nan")), float(c.get("cy", "nan"))) for c in circles]
    assert got[0] == pytest.approx((CHART.x(40, 0, 100), CHART.y(19, 0, 60)), abs=0.01)
    assert got[1] == pytest.approx((CHART.x(55, 0, 100), CHART.y(28, 0, 60)), abs=0.01)


def test_labels_every_point_and_names_every_zone() -> None:
    labels = [f"BH{i}" for i in range(12)]
    root = parse(plasticity_chart_svg([(lab, 30.0 + i, 12.0 + i / 2) for i, lab in enumerate(labels)]))
    assert sorted(e.text or "" for e in by_class(root, "text", "point-label")) == sorted(labels)
    assert {e.text for e in by_class(root, "text", "zone")} == {"CL", "CH", "ML", "MH", "CL-ML"}


def test_keeps_point_labels_apart_when_points_crowd() -> None:
    root = parse(plasticity_chart_svg([("A", 40.0, 19.0), ("B", 40.5, 19.2), ("C", 41.0, 19.0)]))
    spots = {(e.get("x"), e.get("y"), e.get("text-anchor")) for e in by_class(root, "text", "point-label")}
    assert len(spots) == 3


def test_grows_the_axes_for_a_point_beyond_ll_100() -> None:
    root = parse(plasticity_chart_svg([("S9", 118.0, 75.0)]))
    frame = Frame(560.0, 370.0)
    (c,) = by_class(root, "circle", "point")
    assert frame.left <= float(c.get("cx", "nan")) <= frame.right
    assert frame.top <= float(c.get("cy", "nan")) <= frame.bottom
    assert "130" in texts(root) and "90" in texts(root)  # LL + 8 and PI + 6 rounded up to tens


def test_escapes_untrusted_labels_in_the_plasticity_chart() -> None:
    svg = plasticity_chart_svg([(HOSTILE, 40.0, 19.0)])
    assert "<script>" not in svg and "<b>" not in svg
    assert "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &lt;b&gt;" in svg
    (label,) = by_class(parse(svg), "text", "point-label")
    assert label.text == HOSTILE


def test_same_points_give_the_same_svg() -> None:
    pts = [("S1", 40.0, 19.0), ("S3", 55.0, 28.0), ("S7", 33.3, 9.9)]
    assert plasticity_chart_svg(pts) == plasticity_chart_svg(list(pts))


def test_marks_the_liquid_limit_at_25_blows_on_a_log_axis() -> None:
    svg = flow_curve_svg(DAS_TRIALS, DAS_FIT)
    root = parse(svg)
    frame = Frame(330.0, 235.0)
    ticks = [e.text for e in by_class(root, "text", "x-tick")]
    assert ticks[0] == "10" and ticks[-1] == "50"  # blows 15-28 on a 10-50 log axis
    (marker,) = by_class(root, "polyline", "ll-marker")
    corner = points_of(marker)[1]
    x25 = frame.left + (math.log10(25) - 1) / (math.log10(50) - 1) * (frame.right - frame.left)
    assert corner[0] == pytest.approx(x25, abs=0.02)
    (fit,) = by_class(root, "polyline", "fit")
    assert y_on(points_of(fit), corner[0]) == pytest.approx(corner[1], abs=0.02)
    assert by_class(root, "text", "ll-label")[0].text == "LL = 40 at N = 25"  # 39.67 -> 40 (Das)


def test_places_each_trial_on_the_log_blow_axis() -> None:
    root = parse(flow_curve_svg(DAS_TRIALS, DAS_FIT))
    frame = Frame(330.0, 235.0)
    xs = sorted(float(c.get("cx", "nan")) for c in root.iter(f"{NS}circle"))
    for n, x in zip((15, 20, 28), xs, strict=True):
        assert x == pytest.approx(
            frame.left + (math.log10(n) - 1) / (math.log10(50) - 1) * (frame.right - frame.left), abs=0.02
        )


def test_marks_the_cone_liquid_limit_at_20_mm_on_a_linear_axis() -> None:
    root = parse(flow_curve_svg(CONE_TRIALS, CONE_FIT))
    frame = Frame(330.0, 235.0)
    x_ticks = [float(e.text or "nan") for e in by_class(root, "text", "x-tick")]
    lo, hi = x_ticks[0], x_ticks[-1]
    assert lo <= 15.8 and hi >= 23.6
    (marker,) = by_class(root, "polyline", "ll-marker")
    assert points_of(marker)[1][0] == pytest.approx(frame.x(20.0, lo, hi), abs=0.02)
    assert by_class(root, "text", "ll-label")[0].text == "LL = 55 at 20 mm"  # 54.98 -> 55
    assert "Cone penetration (mm)" in texts(root)


def test_plots_one_point_trials_without_a_line() -> None:
    trials = [{"blows": 23, "water_content": 41.0}, {"blows": 27, "water_content": 40.1}]
    root = parse(flow_curve_svg(trials, None))
    assert not by_class(root, "polyline", "fit")
    assert len(list(root.iter(f"{NS}circle"))) == 2


def test_flow_curve_is_the_same_string_for_the_same_input() -> None:
    assert flow_curve_svg(DAS_TRIALS, DAS_FIT) == flow_curve_svg([dict(t) for t in DAS_TRIALS], dict(DAS_FIT))


def test_flow_curve_labels_its_axes_with_units() -> None:
    labels = texts(parse(flow_curve_svg(DAS_TRIALS, DAS_FIT)))
    assert "Water content, w (%)" in labels
    assert "Number of blows, N (log scale)" in labels


def test_xy_chart_places_points_on_a_log_axis() -> None:
    grading = Series("BH1 S1", [(0.075, 40.0), (1.0, 70.0), (10.0, 100.0)])
    root = parse(
        xy_chart(
            [grading],
            title="Grading",
            x_label="Particle size (mm)",
            y_label="Passing (%)",
            x_log=True,
            x_range=(0.01, 100.0),
            y_range=(0.0, 100.0),
        )
    )
    frame = Frame(480.0, 300.0)
    (line,) = by_class(root, "polyline", "series")
    for (x, y), (size, passing) in zip(points_of(line), grading.points, strict=True):
        decades = (math.log10(size) - math.log10(0.01)) / 4  # 0.01 to 100 mm: four decades
        assert x == pytest.approx(frame.left + decades * (frame.right - frame.left), abs=0.02)
        assert y == pytest.approx(frame.y(passing, 0, 100), abs=0.02)


def test_xy_chart_leaves_out_a_value_a_log_axis_cannot_show() -> None:
    root = parse(
        xy_chart(
            [Series("s", [(0.0, 5.0), (1.0, 6.0), (2.0, 7.0)])],
            title="t",
            x_label="x (mm)",
            y_label="y (kPa)",
            x_log=True,
        )
    )
    assert len(points_of(by_class(root, "polyline", "series")[0])) == 2


def test_xy_chart_tells_series_apart_without_colour_and_escapes_legends() -> None:
    svg = xy_chart(
        [Series(HOSTILE, [(0, 0), (1, 1)]), Series("B", [(0, 1), (1, 0)])],
        title="Stress-strain",
        x_label="Axial strain (%)",
        y_label="Deviator stress (kPa)",
    )
    root = parse(svg)
    lines = by_class(root, "polyline", "series")
    assert lines[0].get("stroke-dasharray") != lines[1].get("stroke-dasharray")
    assert HOSTILE in texts(root) and "<script>" not in svg
    assert svg == xy_chart(
        [Series(HOSTILE, [(0, 0), (1, 1)]), Series("B", [(0, 1), (1, 0)])],
        title="Stress-strain",
        x_label="Axial strain (%)",
        y_label="Deviator stress (kPa)",
    )


# -- depth profile, grading and activity charts ----------------------------------------------------

PROFILE = [
    ProfileRow("U1", 1.225, 24.0, 38.0, 19.0),
    ProfileRow("U3", 4.225, 49.0, 44.0, 22.0),
    ProfileRow("D3", 3.725, 21.0, 24.0, None),
]  # fictional demo samples; D3 non-plastic (no PL)


def test_depth_profile_puts_deeper_samples_lower_with_the_plastic_range_between_pl_and_ll() -> None:
    root = parse(depth_profile_svg(PROFILE))
    bars = by_class(root, "line", "plastic-range")
    assert len(bars) == 2  # the non-plastic sample has no PL, so no range bar
    (shallow, deep) = sorted(bars, key=lambda b: float(b.get("y1", "nan")))
    assert float(shallow.get("y1", "nan")) < float(deep.get("y1", "nan"))  # depth runs downward
    x_pl, x_ll = float(shallow.get("x1", "nan")), float(shallow.get("x2", "nan"))
    assert x_pl < x_ll  # PL 19 left of LL 38 on the water-content axis
    assert "Depth below ground (m)" in texts(root) and "Water content, w, and limits (%)" in texts(root)


def test_depth_profile_labels_and_escapes_each_sample() -> None:
    svg = depth_profile_svg([ProfileRow(HOSTILE, 1.0, 30.0, 40.0, 20.0)])
    assert "<script>" not in svg
    assert [e.text for e in by_class(parse(svg), "text", "point-label")] == [HOSTILE]
    assert svg == depth_profile_svg([ProfileRow(HOSTILE, 1.0, 30.0, 40.0, 20.0)])


def test_grading_chart_marks_the_fraction_boundaries_at_2_um_75_um_and_4_75_mm() -> None:
    root = parse(grading_chart_svg([("S1", [(10.0, 100.0), (0.075, 40.0), (0.002, 12.0)])]))
    frame = Frame(640.0, 330.0)
    edges = sorted(float(e.get("x1", "nan")) for e in by_class(root, "line", "fraction-edge"))
    # ASTM D2487-17 section 3 (75 µm, 4.75 mm) and the 2 µm clay size (Skempton 1953), on a
    # 0.001-100 mm log axis: five decades.
    for x, size in zip(edges, (0.002, 0.075, 4.75), strict=True):
        decades = (math.log10(size) + 3) / 5
        assert x == pytest.approx(frame.left + decades * (frame.right - frame.left), abs=0.02)
    assert [e.text for e in by_class(root, "text", "fraction-name")] == ["CLAY", "SILT", "SAND", "GRAVEL"]


def test_activity_boundaries_are_the_engines_class_limits() -> None:
    assert activity_boundaries() == pytest.approx((0.75, 1.25), abs=1e-6)  # Skempton (1953) classes


def test_activity_chart_draws_lines_of_constant_activity_and_plots_each_sample() -> None:
    root = parse(activity_chart_svg([("U1", 24.0, 19.0)]))
    frame = Frame(560.0, 350.0)
    lines = by_class(root, "polyline", "activity-line")
    assert len(lines) == 2
    for line, a in zip(lines, (0.75, 1.25), strict=True):
        (x0, y0), (x1, y1) = points_of(line)
        assert (x0, y0) == pytest.approx((frame.x(0, 0, 60), frame.y(0, 0, 60)), abs=0.01)
        clay = (x1 - frame.left) / (frame.right - frame.left) * 60
        pi = (frame.bottom - y1) / (frame.bottom - frame.top) * 60
        assert pi / clay == pytest.approx(a, abs=1e-3)  # A = PI / clay fraction (Skempton 1953)
    (point,) = by_class(root, "circle", "point")
    assert (float(point.get("cx", "nan")), float(point.get("cy", "nan"))) == pytest.approx(
        (frame.x(24, 0, 60), frame.y(19, 0, 60)), abs=0.01
    )
    assert {e.text for e in by_class(root, "text", "zone")} == {"inactive", "normal", "active"}
