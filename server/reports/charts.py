"""Charts as small, deterministic SVG strings, for web pages and the PDF alike.

Why our own module and not a plotting library: the report must be vector, the same input must
give the same bytes (the PDF's SHA-256 is recorded), and every text must be escaped because
sample labels are typed by users. So the module only formats numbers with fixed decimals,
escapes every text it writes, and reads no clock, file or random source.

One style for all charts: black lines on white, light grey grid, fixed pixel sizes, DejaVu
Sans; series differ by marker shape and dash pattern, never by colour alone, so a chart reads
the same on a black-and-white print.

The soil lines come from the engine (``server.engine.plasticity_chart``), never restated here.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from html import escape

from server.engine.descriptors import activity_class
from server.engine.grading import CLAY_SILT_MM, GRAVEL_SAND_MM, SAND_FINES_MM
from server.engine.plasticity_chart import a_line, u_line
from server.engine.rounding import reported

__all__ = [
    "Axis",
    "ProfileRow",
    "Series",
    "activity_chart_svg",
    "compaction_chart_svg",
    "depth_profile_svg",
    "flow_curve_svg",
    "grading_chart_svg",
    "plasticity_chart_svg",
    "xy_chart",
]

FONT = "DejaVu Sans, Liberation Sans, Arial, sans-serif"
FONT_SIZE = 10.0
SMALL = 8.5
INK = "#000"
GRID = "#c8c8c8"
SHADE = "#e0e0e0"
MARGIN_LEFT = 54.0
MARGIN_RIGHT = 18.0
MARGIN_TOP = 26.0
MARGIN_BOTTOM = 46.0

# ASTM D2487 Fig. 4 draws the U-line vertical at LL = 16 up to PI = 7, the A-line horizontal at
# PI = 4 from there, and the hatched CL-ML band between PI = 4 and PI = 7 (confirmed, REFERENCES.md).
U_LINE_VERTICAL_LL = 16.0
CL_ML_BAND = (4.0, 7.0)
HIGH_LIMIT_LL = 50.0
# Where the zone names may go, (LL, PI) spots well inside each zone, tried in this order.
ZONE_SPOTS: tuple[tuple[str, tuple[tuple[float, float], ...]], ...] = (
    ("CL", ((37.0, 19.0), (30.0, 16.0), (44.0, 26.0))),
    ("CH", ((72.0, 47.0), (62.0, 40.0), (80.0, 52.0))),
    ("ML", ((40.0, 6.0), (33.0, 3.0), (46.0, 10.0))),
    ("MH", ((77.0, 22.0), (88.0, 30.0), (66.0, 14.0))),
)


def _n(value: float) -> str:
    """A coordinate as fixed text: two decimals, trailing zeros dropped, never '-0'."""
    text = f"{value:.2f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def _t(text: object) -> str:
    """Escape any text written into the SVG (labels are untrusted)."""
    return escape(str(text), quote=True)


def _tick_text(value: float) -> str:
    """A tick label: up to four significant decimals, no float noise (0.30000000000000004)."""
    rounded = round(value, 6)
    if rounded == 0:
        return "0"
    return f"{rounded:g}"


# -- axes ---------------------------------------------------------------------------------


def _nice_step(span: float, target: int = 6) -> float:
    """A round step (1, 2, 2.5 or 5 times a power of ten) giving about ``target`` intervals."""
    raw = span / target if span > 0 else 1.0
    mag = 10.0 ** math.floor(math.log10(raw))
    for m in (1.0, 2.0, 2.5, 5.0, 10.0):
        if m * mag >= raw * (1 - 1e-9):
            return m * mag
    return 10.0 * mag  # pragma: no cover - the loop always returns


def nice_range(lo: float, hi: float, target: int = 6) -> tuple[float, float, float]:
    """Round ends enclosing [lo, hi] and the tick step between them."""
    if hi < lo:
        lo, hi = hi, lo
    if hi - lo < 1e-9:
        lo, hi = lo - 1.0, hi + 1.0
    step = _nice_step(hi - lo, target)
    return math.floor(lo / step + 1e-9) * step, math.ceil(hi / step - 1e-9) * step, step


def _floor125(value: float) -> float:
    k = math.floor(math.log10(value))
    for m in (5.0, 2.0, 1.0):
        if m * 10.0**k <= value * (1 + 1e-9):
            return m * 10.0**k
    return 10.0**k  # pragma: no cover


def _ceil125(value: float) -> float:
    k = math.floor(math.log10(value))
    for m in (1.0, 2.0, 5.0, 10.0):
        if m * 10.0**k >= value * (1 - 1e-9):
            return m * 10.0**k
    return 10.0 ** (k + 1)  # pragma: no cover


def log_range(lo: float, hi: float) -> tuple[float, float]:
    """Ends of a log axis on the 1-2-5 series enclosing [lo, hi] (both above zero)."""
    a, b = _floor125(lo), _ceil125(hi)
    if b / a < 2.0 - 1e-9:
        b = _ceil125(a * 2.0)
    return a, b


@dataclass(frozen=True)
class Axis:
    """Maps data values to pixels along one direction, linear or logarithmic (base 10)."""

    lo: float
    hi: float
    px_lo: float
    px_hi: float
    log: bool = False
    step: float = 0.0

    def _f(self, v: float) -> float:
        return math.log10(v) if self.log else v

    def to_px(self, value: float) -> float:
        a, b = self._f(self.lo), self._f(self.hi)
        return self.px_lo + (self._f(value) - a) / (b - a) * (self.px_hi - self.px_lo)

    def contains(self, value: float) -> bool:
        if self.log and value <= 0:
            return False
        return self.lo - 1e-9 <= value <= self.hi + 1e-9

    def ticks(self) -> list[tuple[float, bool]]:
        """(value, labelled) for every grid line, in increasing order."""
        if not self.log:
            if self.step <= 0:
                return [(self.lo, True), (self.hi, True)]
            count = round((self.hi - self.lo) / self.step)
            return [(round(self.lo + i * self.step, 9), True) for i in range(count + 1)]
        decades = math.log10(self.hi / self.lo)
        if decades > 2.0 + 1e-9:
            labelled: tuple[float, ...] = (1.0,)
        elif decades > 1.0 + 1e-9:
            labelled = (1.0, 2.0, 5.0)
        else:
            labelled = (1.0, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0)
        out: list[tuple[float, bool]] = []
        k = math.floor(math.log10(self.lo) + 1e-9)
        while 10.0**k <= self.hi * (1 + 1e-9):
            mantissas = sorted({1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0, *labelled})
            for m in mantissas:
                v = round(m * 10.0**k, 9)
                if self.contains(v):
                    out.append((v, m in labelled))
            k += 1
        return out


def linear_axis(lo: float, hi: float, px_lo: float, px_hi: float, target: int = 6) -> Axis:
    a, b, step = nice_range(lo, hi, target)
    return Axis(a, b, px_lo, px_hi, False, step)


def log_axis(lo: float, hi: float, px_lo: float, px_hi: float) -> Axis:
    a, b = log_range(lo, hi)
    return Axis(a, b, px_lo, px_hi, True)


# -- drawing helpers ------------------------------------------------------------------------


class _Svg:
    """Collects SVG elements in order; every attribute value and text is escaped here."""

    def __init__(self, width: float, height: float, title: str):
        self.width = width
        self.height = height
        self.title = title
        self.parts: list[str] = []

    def add(self, tag: str, text: str | None = None, /, **attrs: object) -> None:
        body = " ".join(f'{k.rstrip("_").replace("_", "-")}="{_t(v)}"' for k, v in attrs.items())
        if text is None:
            self.parts.append(f"<{tag} {body}/>")
        else:
            self.parts.append(f"<{tag} {body}>{_t(text)}</{tag}>")

    def line(self, x1: float, y1: float, x2: float, y2: float, **attrs: object) -> None:
        self.add("line", x1=_n(x1), y1=_n(y1), x2=_n(x2), y2=_n(y2), **attrs)

    def polyline(self, points: Iterable[tuple[float, float]], **attrs: object) -> None:
        pts = " ".join(f"{_n(x)},{_n(y)}" for x, y in points)
        self.add("polyline", points=pts, fill="none", **attrs)

    def text(self, x: float, y: float, text: str, **attrs: object) -> None:
        self.add("text", text, x=_n(x), y=_n(y), **attrs)

    def render(self) -> str:
        w, h = _n(self.width), _n(self.height)
        head = (
            f'<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}" '
            f'role="img" aria-label="{_t(self.title)}" class="cb-chart" '
            f'font-family="{_t(FONT)}" font-size="{_n(FONT_SIZE)}">'
        )
        return "".join([head, f"<title>{_t(self.title)}</title>", *self.parts, "</svg>"])


def _marker(svg: _Svg, shape: str, x: float, y: float, size: float = 3.6) -> None:
    """A point marker; shapes differ so series read apart in black and white."""
    if shape == "circle":
        svg.add("circle", cx=_n(x), cy=_n(y), r=_n(size), fill=INK, stroke=INK)
    elif shape == "open-circle":
        svg.add("circle", cx=_n(x), cy=_n(y), r=_n(size), fill="#fff", stroke=INK, stroke_width="1.2")
    elif shape == "square":
        s = size * 0.9
        svg.add("rect", x=_n(x - s), y=_n(y - s), width=_n(2 * s), height=_n(2 * s), fill="#fff",
                stroke=INK, stroke_width="1.2")
    elif shape == "triangle":
        s = size * 1.15
        pts = f"{_n(x)},{_n(y - s)} {_n(x + s)},{_n(y + s * 0.8)} {_n(x - s)},{_n(y + s * 0.8)}"
        svg.add("polygon", points=pts, fill="#fff", stroke=INK, stroke_width="1.2")
    elif shape == "diamond":
        s = size * 1.2
        pts = f"{_n(x)},{_n(y - s)} {_n(x + s)},{_n(y)} {_n(x)},{_n(y + s)} {_n(x - s)},{_n(y)}"
        svg.add("polygon", points=pts, fill=INK, stroke=INK)
    elif shape == "cross":
        s = size
        svg.line(x - s, y - s, x + s, y + s, stroke=INK, stroke_width="1.4")
        svg.line(x - s, y + s, x + s, y - s, stroke=INK, stroke_width="1.4")


def _frame(svg: _Svg, xa: Axis, ya: Axis, x_label: str, y_label: str) -> None:
    """Grid, tick labels, the plot border and the axis titles (with units)."""
    left, right = xa.px_lo, xa.px_hi
    bottom, top = max(ya.px_lo, ya.px_hi), min(ya.px_lo, ya.px_hi)  # a depth axis runs downward
    for v, labelled in xa.ticks():
        px = xa.to_px(v)
        svg.line(px, top, px, bottom, stroke=GRID, stroke_width="0.8" if labelled else "0.5")
        if labelled:
            svg.text(px, bottom + 13, _tick_text(v), text_anchor="middle", font_size=_n(SMALL),
                     class_="x-tick")
    for v, labelled in ya.ticks():
        py = ya.to_px(v)
        svg.line(left, py, right, py, stroke=GRID, stroke_width="0.8" if labelled else "0.5")
        if labelled:
            svg.text(left - 5, py + 3, _tick_text(v), text_anchor="end", font_size=_n(SMALL), class_="y-tick")
    svg.add("rect", x=_n(left), y=_n(top), width=_n(right - left), height=_n(bottom - top), fill="none",
            stroke=INK, stroke_width="1")
    svg.text((left + right) / 2, bottom + 32, x_label, text_anchor="middle")
    cy = (top + bottom) / 2
    svg.text(14, cy, y_label, text_anchor="middle", transform=f"rotate(-90 14 {_n(cy)})")


def _box(width: float, height: float) -> tuple[float, float, float, float]:
    """Plot area (left, right, bottom, top) in pixels for a chart of this size."""
    return MARGIN_LEFT, width - MARGIN_RIGHT, height - MARGIN_BOTTOM, MARGIN_TOP


def _num(value: object) -> float | None:
    """A finite float from a result value, or None (bools and text are not numbers)."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        return None
    f = float(value)
    return f if math.isfinite(f) else None


# -- flow curve ---------------------------------------------------------------------------


def flow_curve_svg(
    trials: Sequence[Mapping[str, object]],
    fit: Mapping[str, object] | None,
    *,
    width: float = 330.0,
    height: float = 235.0,
) -> str:
    """The flow curve (cup: w against blows on a log axis) or cone curve (w against penetration).

    ``trials`` are the engine's ``liquid_limit_trials`` rows ({"blows" or "penetration_mm",
    "water_content"}); ``fit`` is its ``flow_curve`` ({"x", "log_x", "slope", "intercept", "r2",
    "target_x"}), or None when no line was fitted (one-point method): then only the points show.
    The line is w = intercept + slope * f(x), with f = log10 when ``log_x`` (ASTM D4318 Method A;
    BS 1377-2:1990 cl. 4.3 for the cone), and the liquid limit is marked at ``target_x``
    (25 blows; 20 mm for the 80 g cone).
    """
    x_key = "blows"
    if fit is not None and fit.get("x") == "penetration_mm":
        x_key = "penetration_mm"
    elif any("penetration_mm" in t for t in trials):
        x_key = "penetration_mm"
    cone = x_key == "penetration_mm"
    log_x = bool(fit.get("log_x", not cone)) if fit is not None else not cone

    pts: list[tuple[float, float]] = []
    for t in trials:
        x, w = _num(t.get(x_key)), _num(t.get("water_content"))
        if x is not None and w is not None and (x > 0 or not log_x):
            pts.append((x, w))

    slope = _num(fit.get("slope")) if fit is not None else None
    intercept = _num(fit.get("intercept")) if fit is not None else None
    target = _num(fit.get("target_x")) if fit is not None else None
    line_ok = slope is not None and intercept is not None and target is not None and (target > 0 or not log_x)

    def w_at(x: float) -> float:
        assert slope is not None and intercept is not None
        return intercept + slope * (math.log10(x) if log_x else x)

    title = "Cone curve" if cone else "Flow curve"
    svg = _Svg(width, height, title)
    left, right, bottom, top = _box(width, height)

    xs = [p[0] for p in pts]
    if line_ok and target is not None:
        xs.append(target)
    if not xs:
        xs = [20.0] if cone else [25.0]
    if log_x:
        xa = log_axis(min(xs), max(xs), left, right)
    else:
        xa = linear_axis(min(xs) - 1.0, max(xs) + 1.0, left, right)

    # The fitted line spans the trials and the target, a little beyond each end.
    span: tuple[float, float] | None = None
    if line_ok:
        lo_x, hi_x = min(xs), max(xs)
        if log_x:
            pad = (math.log10(hi_x) - math.log10(lo_x)) * 0.08 + 0.02
            a, b = 10 ** (math.log10(lo_x) - pad), 10 ** (math.log10(hi_x) + pad)
        else:
            pad = (hi_x - lo_x) * 0.08 + 0.3
            a, b = lo_x - pad, hi_x + pad
        span = (max(a, xa.lo), min(b, xa.hi))

    ws = [p[1] for p in pts]
    if span is not None:
        ws += [w_at(span[0]), w_at(span[1])]
    if not ws:
        ws = [0.0, 10.0]
    ya = linear_axis(min(ws) - 0.5, max(ws) + 0.5, bottom, top, target=5)

    x_label = "Cone penetration (mm)" if cone else "Number of blows, N"
    if log_x:
        x_label += " (log scale)"
    _frame(svg, xa, ya, x_label, "Water content, w (%)")

    if span is not None and target is not None:
        ll = w_at(target)
        tx, ty = xa.to_px(target), ya.to_px(ll)
        ends = [(xa.to_px(x), ya.to_px(w_at(x))) for x in span]
        svg.polyline(ends, stroke=INK, stroke_width="1.3", class_="fit")
        svg.polyline([(tx, bottom), (tx, ty), (left, ty)], stroke=INK, stroke_width="0.9",
                     stroke_dasharray="4 3", class_="ll-marker")
        at = f"{_tick_text(target)} mm" if cone else f"N = {_tick_text(target)}"
        label = f"LL = {reported('liquid_limit', ll)} at {at}"
        # Beside the marker, on the side of the dashed horizontal that the fitted line leaves free:
        # left of it when there is room, else right of it.
        assert slope is not None
        below, above = 11.0, -5.0
        if tx - 4 - len(label) * SMALL * 0.6 >= left:
            svg.text(tx - 4, ty + (below if slope < 0 else above), label, text_anchor="end",
                     font_size=_n(SMALL), class_="ll-label")
        else:
            svg.text(tx + 5, ty + (above if slope < 0 else below), label, font_size=_n(SMALL),
                     class_="ll-label")
        r2 = _num(fit.get("r2")) if fit is not None else None
        if r2 is not None:
            svg.text(right - 4, top + 12, f"fitted line, r\u00b2 = {r2:.3f}", text_anchor="end",
                     font_size=_n(SMALL))
    for x, w in pts:
        _marker(svg, "circle", xa.to_px(x), ya.to_px(w))
    if not pts:
        svg.text((left + right) / 2, (top + bottom) / 2, "no trials to plot", text_anchor="middle")
    svg.text(left, top - 9, title, font_weight="bold")
    return svg.render()


# -- plasticity chart -------------------------------------------------------------------------


def _solve(f: Callable[[float], float], y: float, x1: float, x2: float) -> float:
    """The x where a straight-line f reaches y, from two samples on that straight part."""
    y1, y2 = f(x1), f(x2)
    return x1 + (y - y1) * (x2 - x1) / (y2 - y1)


def a_line_break() -> float:
    """The LL where the A-line leaves its horizontal part (found on the engine's a_line)."""
    floor = a_line(U_LINE_VERTICAL_LL)
    lo, hi = U_LINE_VERTICAL_LL, 100.0
    for _ in range(60):
        mid = (lo + hi) / 2
        if a_line(mid) > floor + 1e-12:
            hi = mid
        else:
            lo = mid
    return hi


def _overlap(a: tuple[float, float, float, float], b: tuple[float, float, float, float]) -> float:
    w = min(a[2], b[2]) - max(a[0], b[0])
    h = min(a[3], b[3]) - max(a[1], b[1])
    return w * h if w > 0 and h > 0 else 0.0


def _along(line: Sequence[tuple[float, float]], step: float = 5.0) -> list[tuple[float, float, float, float]]:
    """Small boxes every ``step`` pixels along a polyline, for label placement to avoid."""
    boxes = []
    for (x1, y1), (x2, y2) in zip(line, line[1:], strict=False):
        n = max(1, int(math.hypot(x2 - x1, y2 - y1) / step))
        for i in range(n + 1):
            x, y = x1 + (x2 - x1) * i / n, y1 + (y2 - y1) * i / n
            boxes.append((x - 1.5, y - 1.5, x + 1.5, y + 1.5))
    return boxes


def plasticity_chart_svg(
    points: Sequence[tuple[str, float, float]],
    *,
    width: float = 560.0,
    height: float = 370.0,
) -> str:
    """The plasticity chart of ASTM D2487 Fig. 4 with every (label, LL, PI) point plotted and labelled.

    A-line and U-line come from ``server.engine.plasticity_chart``; the zones CL, CH, ML, MH and
    the CL-ML band are named on the chart. The axes grow past LL 100 / PI 60 when a point needs it.
    Labels are placed beside their point where they overlap least, in a fixed order of tries.
    """
    clean = [(str(lab), ll, pi) for lab, ll, pi in points
             if _num(ll) is not None and _num(pi) is not None]
    max_ll = max([100.0] + [ll + 8 for _, ll, _ in clean])
    max_pi = max([60.0] + [pi + 6 for _, _, pi in clean])
    svg = _Svg(width, height, "Plasticity chart")
    left, right, bottom, top = _box(width, height)
    xa = Axis(0.0, math.ceil(max_ll / 10) * 10, left, right, False, 10.0)
    ya = Axis(0.0, math.ceil(max_pi / 10) * 10, bottom, top, False, 10.0)

    def p(ll: float, pi: float) -> tuple[float, float]:
        return xa.to_px(ll), ya.to_px(pi)

    brk = a_line_break()
    band_lo, band_hi = CL_ML_BAND
    a_at_band_hi = _solve(a_line, band_hi, brk + 1, brk + 11)
    band = [p(U_LINE_VERTICAL_LL, band_lo), p(U_LINE_VERTICAL_LL, band_hi), p(a_at_band_hi, band_hi),
            p(brk, band_lo)]
    svg.add("polygon", points=" ".join(f"{_n(x)},{_n(y)}" for x, y in band), fill=SHADE, stroke="none",
            class_="cl-ml-band")
    _frame(svg, xa, ya, "Liquid limit, LL", "Plasticity index, PI")

    # A-line: horizontal from the U-line to its break, then straight to the chart's edge.
    a_end = xa.hi if a_line(xa.hi) <= ya.hi else _solve(a_line, ya.hi, brk + 1, brk + 11)
    a_pts = [p(x, a_line(x)) for x in (U_LINE_VERTICAL_LL, brk, a_end)]
    svg.polyline(a_pts, stroke=INK, stroke_width="1.5", class_="a-line")
    # U-line: vertical at LL 16, then along the engine's u_line to the chart's edge.
    u_end = xa.hi if u_line(xa.hi) <= ya.hi else _solve(u_line, ya.hi, 20.0, 60.0)
    u_pts = [p(U_LINE_VERTICAL_LL, 0.0), *(p(x, u_line(x)) for x in (U_LINE_VERTICAL_LL, u_end))]
    svg.polyline(u_pts, stroke=INK, stroke_width="1.1", stroke_dasharray="7 4", class_="u-line")
    x50 = xa.to_px(HIGH_LIMIT_LL)
    svg.line(x50, bottom, x50, top, stroke=INK, stroke_width="0.8", stroke_dasharray="2 3", class_="ll-50")

    marks = [(lab, *p(ll, pi)) for lab, ll, pi in clean]
    taken: list[tuple[float, float, float, float]] = [(x - 4, y - 4, x + 4, y + 4) for _, x, y in marks]
    # The drawn lines count as taken too, as small boxes along them, so labels keep off them.
    for line in (a_pts, u_pts, [(x50, bottom), (x50, top)]):
        taken.extend(_along(line))
    # Each zone name goes to the first of its spots (all inside the zone) that no point covers.
    for name, spots in ZONE_SPOTS:
        boxes = [(x - 10, y - 10, x + 10, y + 2) for x, y in (p(ll, pi) for ll, pi in spots)]
        i = min(range(len(boxes)), key=lambda j: (sum(_overlap(boxes[j], r) for r in taken), j))
        bx = boxes[i]
        svg.text((bx[0] + bx[2]) / 2, bx[3] - 2, name, font_size=_n(FONT_SIZE + 1), font_weight="bold",
                 fill="#444", text_anchor="middle", class_="zone")
        taken.append(bx)
    x, y = p((U_LINE_VERTICAL_LL + brk) / 2 + 0.5, (band_lo + band_hi) / 2)
    svg.text(x, y + 3, "CL-ML", text_anchor="middle", font_size=_n(SMALL - 1), fill="#222", class_="zone")
    x, y = p(a_end - 6, a_line(a_end - 6))
    svg.text(x, y + 14, "A-line", text_anchor="middle", font_size=_n(SMALL), font_style="italic")
    x, y = p(_solve(u_line, ya.hi - 6, 20.0, 60.0), ya.hi - 6)
    svg.text(x - 6, y, "U-line", text_anchor="end", font_size=_n(SMALL), font_style="italic")

    tries = ((7.0, 3.5, "start"), (-7.0, 3.5, "end"), (0.0, -7.0, "middle"), (0.0, 13.0, "middle"),
             (6.0, -6.0, "start"), (-6.0, -6.0, "end"), (6.0, 12.0, "start"), (-6.0, 12.0, "end"),
             (0.0, -16.0, "middle"), (0.0, 22.0, "middle"), (14.0, 3.5, "start"), (-14.0, 3.5, "end"))
    for lab, x, y in marks:
        svg.add("circle", cx=_n(x), cy=_n(y), r="3.4", fill="#fff", stroke=INK, stroke_width="1.3",
                class_="point")
        svg.add("circle", cx=_n(x), cy=_n(y), r="1.1", fill=INK, stroke="none")
        w = len(lab) * SMALL * 0.6
        best: tuple[float, tuple[float, float, float, float], tuple[float, float, str]] | None = None
        for dx, dy, anchor in tries:
            x0 = x + dx if anchor == "start" else x + dx - w if anchor == "end" else x + dx - w / 2
            rect = (x0, y + dy - SMALL, x0 + w, y + dy + 1)
            score = sum(_overlap(rect, r) for r in taken)
            if rect[0] < left or rect[2] > right or rect[1] < top or rect[3] > bottom:
                score += 1e4
            if best is None or score < best[0] - 1e-9:
                best = (score, rect, (dx, dy, anchor))
        assert best is not None
        _, rect, (dx, dy, anchor) = best
        taken.append(rect)
        svg.text(x + dx, y + dy, lab, text_anchor=anchor, font_size=_n(SMALL), class_="point-label")
    svg.text(left, top - 9, "Plasticity chart (ASTM D2487)", font_weight="bold")
    return svg.render()


# -- generic xy chart --------------------------------------------------------------------------

_SHAPES = ("circle", "open-circle", "square", "triangle", "diamond", "cross")
_DASHES = ("", "6 3", "2 2", "8 3 2 3")


@dataclass(frozen=True)
class Series:
    """One series of an xy chart; ``marker``/``dash`` default by position so series differ in B&W."""

    label: str
    points: Sequence[tuple[float, float]]
    line: bool = True
    marker: str | None = None
    dash: str | None = None


def xy_chart(
    series: Sequence[Series],
    *,
    title: str,
    x_label: str,
    y_label: str,
    x_log: bool = False,
    x_range: tuple[float, float] | None = None,
    y_range: tuple[float, float] | None = None,
    width: float = 480.0,
    height: float = 300.0,
) -> str:
    """A plain xy chart for later curves (grading with a log size axis, stress against strain).

    Axis labels should carry units, e.g. "Particle size (mm)". Points that cannot be placed (a
    non-positive value on a log axis, a non-finite value) are left out. A legend names each
    series beside its marker and dash.
    """
    legend_h = 14.0 * len(series) if len(series) > 1 else 0.0
    svg = _Svg(width, height + legend_h, title)
    left, right, bottom, top = _box(width, height)
    clean: list[list[tuple[float, float]]] = []
    for s in series:
        pts = []
        for x, y in s.points:
            fx, fy = _num(x), _num(y)
            if fx is not None and fy is not None and (fx > 0 or not x_log):
                pts.append((fx, fy))
        clean.append(pts)
    xs = [x for pts in clean for x, _ in pts] or ([1.0, 10.0] if x_log else [0.0, 1.0])
    ys = [y for pts in clean for _, y in pts] or [0.0, 1.0]
    xlo, xhi = x_range if x_range is not None else (min(xs), max(xs))
    ylo, yhi = y_range if y_range is not None else (min(ys), max(ys))
    xa = log_axis(xlo, xhi, left, right) if x_log else linear_axis(xlo, xhi, left, right)
    ya = linear_axis(ylo, yhi, bottom, top, target=5)
    _frame(svg, xa, ya, x_label, y_label)
    for i, (s, pts) in enumerate(zip(series, clean, strict=True)):
        shape = s.marker or _SHAPES[i % len(_SHAPES)]
        dash = s.dash if s.dash is not None else _DASHES[i % len(_DASHES)]
        placed = [(xa.to_px(x), ya.to_px(y)) for x, y in pts if xa.contains(x) and ya.contains(y)]
        if s.line and len(placed) > 1:
            attrs: dict[str, object] = {"stroke": INK, "stroke_width": "1.2", "class_": "series"}
            if dash:
                attrs["stroke_dasharray"] = dash
            svg.polyline(placed, **attrs)
        if shape != "none":
            for x, y in placed:
                _marker(svg, shape, x, y, 3.0)
        if legend_h:
            ly = height + 4 + 14.0 * i
            attrs = {"stroke": INK, "stroke_width": "1.2"}
            if dash:
                attrs["stroke_dasharray"] = dash
            if s.line:
                svg.line(left, ly, left + 28, ly, **attrs)
            if shape != "none":
                _marker(svg, shape, left + 14, ly, 3.0)
            svg.text(left + 36, ly + 3.5, s.label, font_size=_n(SMALL))
    svg.text(left, top - 9, title, font_weight="bold")
    return svg.render()


def _legend(svg: _Svg, x: float, y: float, entries: Sequence[tuple[str, str, str]]) -> None:
    """A one-row legend: (marker shape, dash pattern or "" for none drawn, label) per entry."""
    for shape, dash, label in entries:
        if dash:
            attrs: dict[str, object] = {"stroke": INK, "stroke_width": "1.2"}
            if dash != "solid":
                attrs["stroke_dasharray"] = dash
            svg.line(x, y, x + 22, y, **attrs)
        if shape != "none":
            _marker(svg, shape, x + 11, y, 3.0)
        svg.text(x + 27, y + 3.2, label, font_size=_n(SMALL))
        x += 36 + len(label) * SMALL * 0.58


# -- grading curves ----------------------------------------------------------------------------

GRADING_SIZES_MM = (0.001, 100.0)


def grading_chart_svg(
    curves: Sequence[tuple[str, Sequence[tuple[float, float]]]],
    *,
    title: str = "Grading curves",
    width: float = 640.0,
    height: float = 330.0,
) -> str:
    """Percent passing against particle size (log scale), one series per sample.

    The clay/silt, silt/sand and sand/gravel boundaries (2 µm, 75 µm, 4.75 mm) are drawn from
    the engine's constants (ASTM D2487-17 section 3; Skempton 1953 for 2 µm) and named above the plot.
    """
    series = [Series(label, pts) for label, pts in curves]
    sizes = [x for _, pts in curves for x, _ in pts if _num(x) is not None and x > 0]
    lo = min([GRADING_SIZES_MM[0], *sizes])
    hi = max([GRADING_SIZES_MM[1], *sizes])
    svg_text = xy_chart(series, title=title, x_label="Particle size (mm, log scale)",
                        y_label="Percent passing (%)", x_log=True, x_range=(lo, hi), y_range=(0.0, 100.0),
                        width=width, height=height)
    # The soil-fraction boundaries go in as dashed verticals, before the closing tag.
    left, right, bottom, top = _box(width, height)
    xa = log_axis(lo, hi, left, right)
    extra = _Svg(width, height, title)
    edges = [xa.lo, CLAY_SILT_MM, SAND_FINES_MM, GRAVEL_SAND_MM, xa.hi]
    for size in edges[1:-1]:
        px = xa.to_px(size)
        extra.line(px, bottom, px, top, stroke=INK, stroke_width="0.7", stroke_dasharray="3 3",
                   class_="fraction-edge")
    for name, a, b in zip(("CLAY", "SILT", "SAND", "GRAVEL"), edges, edges[1:], strict=False):
        extra.text((xa.to_px(a) + xa.to_px(b)) / 2, top + 10, name, text_anchor="middle",
                   font_size=_n(SMALL - 0.5), fill="#444", class_="fraction-name")
    return svg_text[: -len("</svg>")] + "".join(extra.parts) + "</svg>"


# -- depth profile -----------------------------------------------------------------------------


@dataclass(frozen=True)
class ProfileRow:
    """One sample on a depth profile: its label, depth (m) and w, LL, PL (%), any may be None."""

    label: str
    depth_m: float
    water_content: float | None
    liquid_limit: float | None
    plastic_limit: float | None


def depth_profile_svg(
    rows: Sequence[ProfileRow],
    *,
    title: str = "Water content and limits against depth",
    width: float = 330.0,
    height: float = 380.0,
) -> str:
    """Natural water content, liquid limit and plastic limit against depth (downward), per sample.

    Each sample's plastic and liquid limits are joined by a bar (the plastic range) with the
    natural water content on it, the usual way a borehole's index profile is drawn (common practice).
    """
    svg = _Svg(width, height + 18, title)
    left, right, bottom, top = _box(width, height)
    values = [f for r in rows for v in (r.water_content, r.liquid_limit, r.plastic_limit)
              if (f := _num(v)) is not None]
    depths = [r.depth_m for r in rows if _num(r.depth_m) is not None]
    xa = linear_axis(min(values, default=0.0) - 2.0, max(values, default=60.0) + 2.0, left, right, target=5)
    d_lo, d_hi, d_step = nice_range(0.0, max(depths, default=1.0) * 1.08 + 0.1, target=6)
    ya = Axis(0.0, d_hi, top, bottom, False, d_step)
    _frame(svg, xa, ya, "Water content, w, and limits (%)", "Depth below ground (m)")
    for r in rows:
        if _num(r.depth_m) is None or not ya.contains(r.depth_m):
            continue
        y = ya.to_px(r.depth_m)
        ll, pl, w = _num(r.liquid_limit), _num(r.plastic_limit), _num(r.water_content)
        if ll is not None and pl is not None:
            svg.line(xa.to_px(pl), y, xa.to_px(ll), y, stroke=INK, stroke_width="1.1", class_="plastic-range")
        if pl is not None:
            _marker(svg, "square", xa.to_px(pl), y, 2.8)
        if ll is not None:
            _marker(svg, "triangle", xa.to_px(ll), y, 2.8)
        if w is not None:
            _marker(svg, "circle", xa.to_px(w), y, 2.8)
        xs = [xa.to_px(v) for v in (ll, pl, w) if v is not None]
        if xs:
            svg.text(min(max(xs) + 6, right - 2), y - 4, r.label, font_size=_n(SMALL - 1),
                     text_anchor="end" if max(xs) + 6 > right - 40 else "start", class_="point-label")
    _legend(svg, left, height + 6, (("circle", "", "w"), ("triangle", "", "LL"), ("square", "", "PL"),
                                    ("none", "solid", "plastic range PL to LL")))
    svg.text(left, top - 9, title, font_weight="bold")
    return svg.render()


# -- activity chart ----------------------------------------------------------------------------


def activity_boundaries() -> tuple[float, ...]:
    """The activities where the engine's activity class changes (Skempton 1953), found by bisection
    on ``server.engine.descriptors.activity_class`` so the values are not restated here."""
    out: list[float] = []
    grid = [i / 100 for i in range(1, 501)]
    for a, b in zip(grid, grid[1:], strict=False):
        if activity_class(a) != activity_class(b):
            lo, hi = a, b
            for _ in range(50):
                mid = (lo + hi) / 2
                if activity_class(mid) == activity_class(a):
                    lo = mid
                else:
                    hi = mid
            out.append(round(hi, 6))
    return tuple(out)


def activity_chart_svg(
    points: Sequence[tuple[str, float, float]],
    *,
    width: float = 560.0,
    height: float = 350.0,
) -> str:
    """Plasticity index against clay fraction (% finer than 2 µm), each sample plotted and labelled,
    with the lines of constant activity A = PI / clay fraction where the class changes (Skempton 1953)."""
    clean = [(str(lab), c, pi) for lab, c, pi in points if _num(c) is not None and _num(pi) is not None]
    max_c = max([60.0] + [c + 6 for _, c, _ in clean])
    max_pi = max([60.0] + [pi + 6 for _, _, pi in clean])
    svg = _Svg(width, height, "Activity chart")
    left, right, bottom, top = _box(width, height)
    xa = Axis(0.0, math.ceil(max_c / 10) * 10, left, right, False, 10.0)
    ya = Axis(0.0, math.ceil(max_pi / 10) * 10, bottom, top, False, 10.0)
    _frame(svg, xa, ya, "Clay fraction, finer than 2 µm (%)", "Plasticity index, PI")
    bounds = activity_boundaries()
    names = [activity_class(bounds[0] / 2)] + [activity_class(b + 1e-6) for b in bounds]
    for i, a in enumerate(bounds):
        c_end = min(xa.hi, ya.hi / a)
        svg.polyline([(xa.to_px(0.0), ya.to_px(0.0)), (xa.to_px(c_end), ya.to_px(a * c_end))], stroke=INK,
                     stroke_width="1.1", stroke_dasharray="7 4" if i else "", class_="activity-line")
        svg.text(xa.to_px(c_end) - 4, ya.to_px(a * c_end) + (12 if a * c_end < ya.hi - 1 else 14),
                 f"A = {_tick_text(a)}", text_anchor="end", font_size=_n(SMALL), font_style="italic")
    # Class names inside their wedges, along the bisector of each wedge at 80 % of the width.
    edges: list[float | None] = [0.0, *bounds, None]
    for name, lo_a, hi_a in zip(names, edges, edges[1:], strict=False):
        assert lo_a is not None
        slope = (lo_a + hi_a) / 2 if hi_a is not None else lo_a * 1.8
        c = min(xa.hi * 0.8, ya.hi * 0.85 / slope) if slope else xa.hi * 0.8
        svg.text(xa.to_px(c), ya.to_px(slope * c) + 3, name, text_anchor="middle",
                 font_size=_n(FONT_SIZE), font_weight="bold", fill="#555", class_="zone")
    for lab, c, pi in clean:
        x, y = xa.to_px(c), ya.to_px(pi)
        svg.add("circle", cx=_n(x), cy=_n(y), r="3.2", fill="#fff", stroke=INK, stroke_width="1.3",
                class_="point")
        svg.text(x + 6, y - 4, lab, font_size=_n(SMALL), class_="point-label")
    svg.text(left, top - 9, "Activity chart (Skempton 1953)", font_weight="bold")
    return svg.render()


# -- compaction curve --------------------------------------------------------------------------


def parabola_through(three: Sequence[tuple[float, float]], x: float) -> float:
    """The value at ``x`` of the parabola through three points (Lagrange's form): the curve the
    engine's maximum is the vertex of (``server.engine.compaction``), drawn through its points."""
    (x0, y0), (x1, y1), (x2, y2) = three
    return (
        y0 * (x - x1) * (x - x2) / ((x0 - x1) * (x0 - x2))
        + y1 * (x - x0) * (x - x2) / ((x1 - x0) * (x1 - x2))
        + y2 * (x - x0) * (x - x1) / ((x2 - x0) * (x2 - x1))
    )


def _clipped(points: Sequence[tuple[float, float]], lo: float, hi: float) -> list[tuple[float, float]]:
    """The part of a line that falls inside lo <= y <= hi, its ends cut where it crosses them.
    An air-voids line falls steadily with water content, so the part inside is one run."""
    out: list[tuple[float, float]] = []
    for (xa, ya), (xb, yb) in zip(points, points[1:], strict=False):
        for x, y, other_x, other_y in ((xa, ya, xb, yb), (xb, yb, xa, ya)):
            if lo <= y <= hi:
                if (x, y) not in out:
                    out.append((x, y))
            else:
                edge = hi if y > hi else lo
                if min(y, other_y) <= edge <= max(y, other_y) and y != other_y:
                    cut = (x + (edge - y) * (other_x - x) / (other_y - y), edge)
                    if cut not in out:
                        out.append(cut)
    return sorted(out)


AIR_VOIDS_DASHES = {"0": "", "5": "6 3", "10": "2 2"}  # 0 % solid; the others by dash, never colour


def compaction_chart_svg(
    points: Sequence[tuple[float, float]],
    *,
    peak: tuple[float, float] | None = None,
    peak_points: Sequence[tuple[float, float]] = (),
    air_voids: Mapping[str, Sequence[tuple[float, float]]] | None = None,
    width: float = 330.0,
    height: float = 250.0,
) -> str:
    """Dry density (Mg/m³) against water content (%) of a compaction test.

    ``points`` are the engine's ``compaction_points`` in order of water content; ``peak`` is its
    (optimum water content, maximum dry density), or None when no maximum is claimed: then the
    points are only joined. ``peak_points`` are the highest point and its neighbours: between them
    the curve is the parabola through the three (whose vertex is the maximum), elsewhere straight
    from point to point. ``air_voids`` maps "0", "5", "10" (% air voids) to the engine's lines
    (``air_voids_lines``), drawn clipped to the plot and labelled at their wet end (BS 1377-4:1990
    Figure 6 draws the curve with them, common practice).
    """
    lines = {va: [(x, y) for x, y in pts if _num(x) is not None and _num(y) is not None]
             for va, pts in (air_voids or {}).items()}
    clean = [(x, y) for x, y in points if _num(x) is not None and _num(y) is not None]
    svg = _Svg(width, height, "Compaction curve")
    left, right, bottom, top = _box(width, height)
    xs = [x for x, _ in clean] or [0.0, 20.0]
    # The air-voids lines fall with water content: their wet ends sit near the points, which is the
    # part a reader compares; above the points they are cut at the top of the plot.
    ys = [y for _, y in clean] + [min(y for _, y in pts) for pts in lines.values() if pts]
    if peak is not None:
        ys.append(peak[1])
    ys = ys or [1.5, 2.0]
    xa = linear_axis(min(xs) - 1.0, max(xs) + 3.5, left, right, target=6)  # room for the lines' names
    ya = linear_axis(min(ys) - 0.02, max(ys) + 0.03, bottom, top, target=5)
    _frame(svg, xa, ya, "Water content, w (%)", "Dry density, ρd (Mg/m³)")
    for va, pts in lines.items():
        shown = _clipped([p for p in pts if xa.contains(p[0])], ya.lo, ya.hi)
        if len(shown) < 2:
            continue
        attrs: dict[str, object] = {"stroke": INK, "stroke_width": "0.9", "class_": "air-voids"}
        if AIR_VOIDS_DASHES.get(va, "4 2"):
            attrs["stroke_dasharray"] = AIR_VOIDS_DASHES.get(va, "4 2")
        svg.polyline([(xa.to_px(x), ya.to_px(y)) for x, y in shown], **attrs)
        x_end, y_end = shown[-1]
        svg.text(xa.to_px(x_end) + 3, ya.to_px(y_end) + 3, f"{va} % air voids", font_size=_n(SMALL - 1),
                 class_="air-voids-label")
    curve: list[tuple[float, float]] = []
    if peak is not None and len(peak_points) == 3:
        a, b = peak_points[0][0], peak_points[2][0]
        curve += [(x, y) for x, y in clean if x < a]
        steps = [a + (b - a) * i / 24 for i in range(25)]
        curve += [(x, parabola_through(peak_points, x)) for x in steps]
        curve += [(x, y) for x, y in clean if x > b]
    else:
        curve = list(clean)
    if len(curve) > 1:
        svg.polyline([(xa.to_px(x), ya.to_px(y)) for x, y in curve], stroke=INK, stroke_width="1.3",
                     class_="compaction-curve", **({} if peak is not None else {"stroke_dasharray": "4 3"}))
    for x, y in clean:
        _marker(svg, "circle", xa.to_px(x), ya.to_px(y))
    if peak is not None:
        px, py = xa.to_px(peak[0]), ya.to_px(peak[1])
        svg.polyline([(px, bottom), (px, py), (left, py)], stroke=INK, stroke_width="0.9",
                     stroke_dasharray="4 3", class_="maximum-marker")
        _marker(svg, "cross", px, py, 3.2)
        label = (f"ρd,max = {reported('maximum_dry_density_mg_m3', peak[1])} Mg/m³, "
                 f"wopt = {reported('optimum_water_content', peak[0])} %")
    else:
        label = "no maximum: the peak is not bracketed"
    if clean:
        svg.text(right, top - 9, label, text_anchor="end", font_size=_n(SMALL), class_="maximum-label")
    svg.text(left, top - 9, "Compaction", font_weight="bold")
    return svg.render()
