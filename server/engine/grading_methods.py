"""The grading methods: ``sieve``, ``hydrometer`` and ``grading`` (the two combined).

Formulas live in ``grading`` and ``hydrometer``; this module reads the JSON readings field by
field, refuses what cannot be right, computes what the valid parts allow, and raises the
quality flags a reviewer must see.

``sieve`` (ASTM D6913/D6913M-17, single sieve-set sieving; classes by ASTM D2487-17)::

    {"dry_mass_g": 1012.6,
     "washed_dry_mass_g": 905.3,
     "sieves": [{"size_mm": 37.5, "retained_g": 0.0},
                {"size_mm": 19.0, "retained_g": 84.1},
                {"size_mm": 4.75, "retained_g": 201.7},
                {"size_mm": 2.0, "retained_g": 150.2},
                {"size_mm": 0.425, "retained_g": 240.9},
                {"size_mm": 0.075, "retained_g": 221.5}],
     "pan_g": 6.2,
     "balance": {"resolution_g": 0.1}}

Each sieve gives the mass retained on it (``retained_g``) or the cumulative mass retained on
it and every coarser sieve (``cumulative_retained_g``), one kind for the whole set; sieves may
come in any order. ``washed_dry_mass_g`` (dry mass left after washing on 75 µm) and ``pan_g``
are optional; with ``pan_g`` the mass recovered from the stack is checked. Results:
``grading_curve`` [{"size_mm", "percent_passing"}] coarsest first, ``d10_mm``, ``d30_mm``,
``d60_mm``, ``cu``, ``cc`` (None where the curve does not reach), ``gravel``, ``sand``,
``fines`` (% by dry mass), ``percent_passing_2mm`` and ``percent_passing_0_425mm`` (for
AASHTO M 145), ``sieve_mass_loss_pct`` (with ``pan_g``) and ``uncertainty.fines``.

``hydrometer`` (sedimentation with the 152H hydrometer; see ``hydrometer`` for the clauses)::

    {"dry_mass_g": 50.0,
     "specific_gravity": 2.70,
     "hydrometer": {"type": "152H", "id": "H-04"},
     "meniscus_correction": 1.0,
     "zero_readings": [{"temperature_c": 18.0, "reading": 6.5},
                       {"temperature_c": 24.0, "reading": 5.5}],
     "separation_sieve_mm": 2.0,
     "separation_passing_pct": 96.4,
     "passing_75um_pct": 71.8,
     "readings": [{"minutes": 1, "reading": 46.0, "temperature_c": 21.0},
                  {"minutes": 2, "reading": 42.5, "temperature_c": 21.0},
                  {"minutes": 1440, "reading": 14.0, "temperature_c": 20.5,
                   "composite_correction": 6.0}],
     "reading_resolution": 1.0}

``hydrometer`` may also carry ``depth_at_zero_mm`` and ``depth_per_unit_mm`` (the lab's own
calibration line L = a - b R, defaults 163.0 and 1.641 for the 152H). A reading's own
``composite_correction`` wins over the zero readings. ``separation_passing_pct`` (default
100) scales the specimen's percent finer to the whole sample; ``passing_75um_pct`` gives the
silt. Results: ``hydrometer_points`` [{"minutes", "diameter_mm", "percent_finer"}] in reading
order (percent of the whole sample), ``clay_fraction`` and ``clay`` (% finer than 2 µm),
``silt`` (75 µm to 2 µm), ``uncertainty.clay_fraction``.

``grading`` (the two on one sample, D7928's separation sieve taken from the sieving)::

    {"sieve": {...sieve readings...},
     "hydrometer": {...hydrometer readings without separation_passing_pct or passing_75um_pct...}}

Results: everything of both, with D10, D30, D60, Cu and Cc read off ``combined_curve``
[{"size_mm", "percent_passing", "source": "sieve" or "hydrometer"}], coarsest first.

Flags: ``too-few-sieves``, ``coarsest-sieve-retains``, ``boundary-sieve-missing``,
``grading-diameter-unavailable``, ``sieve-mass-loss``, ``hydrometer-reading-out-of-range``,
``percent-finer-out-of-bounds``, ``passing-not-monotonic``, ``clay-fraction-outside-readings``,
``composite-correction-extrapolated``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from server.engine import grading as g
from server.engine import hydrometer as hy
from server.engine.contract import Outcome, method
from server.engine.readings import Readings, fmt
from server.engine.uncertainty import expanded, read_balance
from server.engine.water_properties import MAX_TEMPERATURE_C, MIN_TEMPERATURE_C

MIN_SIEVES = 4  # fewer sieves leave too few points to read D10..D60 from (our own threshold)
# Mass recovered from the stack may differ from the mass put on it by at most 0.3 % of the dry
# mass (ASTM D6913, from memory).
SIEVE_LOSS_LIMIT_PCT = 0.3
# Distance in °C from the nearest zero reading beyond which a composite correction counts as
# extrapolated (our own tolerance).
ZERO_READING_TOLERANCE_C = 1.0
DEFAULT_SEPARATION_SIEVE_MM = 2.0  # No. 10, ASTM D7928-21 cl. 3.2.3 (sedimentation sample)
# 152H scale divisions are 1 g/L (ASTM E100, from memory); u = resolution / sqrt(12).
DEFAULT_READING_RESOLUTION = 1.0
NEEDS_CU_BELOW_FINES = 12.0  # ASTM D2487-17: Cu and Cc decide the symbol when fines <= 12 %

_RETAINED = "retained_g"
_CUMULATIVE = "cumulative_retained_g"


def _mm(value: float) -> str:
    return fmt(value, "mm")


# -- sieving -------------------------------------------------------------------------------------
@dataclass
class SieveData:
    """What the sieving gave: the curve (coarsest first) and whether every field was valid."""

    curve: list[tuple[float, float]]
    complete: bool


SieveRow = tuple[Readings, float | None, float | None]


def _sieve_rows(r: Readings) -> tuple[list[SieveRow] | None, str | None]:
    """Each sieve row with its size and mass (None where refused), and the kind of mass given.

    The rows are None when one of them is not an object (its place on the curve is unknown).
    """
    items = r.items("sieves", noun="sieve", min_items=1)
    raw = r.data.get("sieves")
    if not isinstance(raw, list | tuple) or len(items) != len(raw):
        return None, None
    kind: str | None = None
    first_row = 0
    seen: dict[float, int] = {}
    rows: list[SieveRow] = []
    for i, row in enumerate(items):
        size = row.number("size_mm", name="sieve size", unit="mm", above=0.0, maximum=1000.0)
        if size is not None:
            if size in seen:
                row.refuse("size_mm", f"sieve size {_mm(size)} is already given for sieve {seen[size] + 1}")
                size = None
            else:
                seen[size] = i
        has_ret, has_cum = row.present(_RETAINED), row.present(_CUMULATIVE)
        mass: float | None = None
        if has_ret and has_cum:
            row.refuse(_CUMULATIVE, "give the mass retained on the sieve or the cumulative mass "
                                    "retained, not both")
        elif not has_ret and not has_cum:
            row.refuse(_RETAINED, "mass retained is required")
        else:
            key = _RETAINED if has_ret else _CUMULATIVE
            name = "mass retained" if has_ret else "cumulative mass retained"
            if kind is None:
                kind, first_row = key, i
            if key != kind:
                given = "masses retained" if kind == _RETAINED else "cumulative masses retained"
                row.refuse(key, f"sieve {first_row + 1} gives {given}: use one kind for every sieve")
            else:
                mass = row.number(key, name=name, unit="g", minimum=0.0)
        rows.append((row, size, mass))
    return rows, kind


def read_sieve(r: Readings, out: Outcome) -> SieveData | None:
    """Read a sieve analysis, write its own results and flags, and hand back its curve."""
    dry = r.number("dry_mass_g", name="dry mass", unit="g", above=0.0)
    washed = r.number("washed_dry_mass_g", name="dry mass after washing", unit="g", required=False,
                      above=0.0)
    if dry is not None and washed is not None and washed > dry:
        r.refuse("washed_dry_mass_g", f"dry mass after washing ({fmt(washed, 'g')}) is above the dry "
                                      f"mass ({fmt(dry, 'g')})")
        washed = None
    pan = r.number("pan_g", name="mass in the pan", unit="g", required=False, minimum=0.0)
    balance = read_balance(r)
    rows, kind = _sieve_rows(r)
    if rows is None or dry is None or any(size is None for _, size, _ in rows):
        return None
    rows.sort(key=lambda t: -(t[1] or 0.0))
    stack = washed if washed is not None else dry
    stack_name = "the dry mass after washing" if washed is not None else "the dry mass"
    curve: list[tuple[float, float]] = []
    running = 0.0
    previous: tuple[float, float] | None = None  # (size, cumulative) of the last valid row
    for row, size, mass in rows:
        assert size is not None
        if mass is None:
            if kind == _RETAINED:
                break  # every finer sieve depends on this one
            continue
        if kind == _CUMULATIVE:
            if previous is not None and mass < previous[1]:
                row.refuse(_CUMULATIVE, f"cumulative mass retained ({fmt(mass, 'g')}) is below that on "
                                        f"the {_mm(previous[0])} sieve ({fmt(previous[1], 'g')})")
                continue
            cum = mass
        else:
            cum = running + mass
        if cum > stack * (1.0 + 1e-12):
            key = kind or _RETAINED
            row.refuse(key, f"cumulative mass retained down to the {_mm(size)} sieve ({fmt(cum, 'g')}) "
                            f"is above {stack_name} ({fmt(stack, 'g')})")
            break
        running = cum
        previous = (size, cum)
        curve.append((size, 100.0 * (dry - cum) / dry))
    complete = not r.has_errors_under()
    out.results["grading_curve"] = [{"size_mm": d, "percent_passing": p} for d, p in curve]
    if not complete:
        return SieveData(curve, False)

    if len(curve) < MIN_SIEVES:
        out.flag("too-few-sieves", "warning",
                 f"only {len(curve)} sieves: at least {MIN_SIEVES} are needed to draw a grading curve")
    if curve[0][1] < 100.0:
        out.flag("coarsest-sieve-retains", "warning",
                 f"{fmt(100.0 - curve[0][1])} % is retained on the coarsest sieve ({_mm(curve[0][0])}): "
                 "add a coarser sieve so that the curve starts at 100 % passing")
    if pan is not None:
        loss_pct = 100.0 * (stack - running - pan) / dry
        out.results["sieve_mass_loss_pct"] = loss_pct
        if abs(loss_pct) > SIEVE_LOSS_LIMIT_PCT:
            out.flag("sieve-mass-loss", "warning",
                     f"the sieves and pan hold {fmt(running + pan, 'g')} of the {fmt(stack, 'g')} put on "
                     f"the stack: {fmt(round(loss_pct, 2))} % of the dry mass is unaccounted for "
                     f"(limit {fmt(SIEVE_LOSS_LIMIT_PCT)} %)")
    _write_fractions(curve, out)
    sizes = [d for d, _ in curve]
    if g.SAND_FINES_MM in sizes:
        i = sizes.index(g.SAND_FINES_MM)
        cum = dry * (1.0 - curve[i][1] / 100.0)
        n = i + 1 if kind == _RETAINED else 1
        u = g.u_percent_passing(dry, cum, n, balance.u_mass)
        out.results.setdefault("uncertainty", {})["fines"] = expanded(u)
    return SieveData(curve, True)


def _write_fractions(curve: list[tuple[float, float]], out: Outcome) -> None:
    """Gravel, sand and fines by the 4.75 mm and 75 µm boundaries (ASTM D2487-17 section 3)."""
    sizes = {d for d, _ in curve}
    p_gravel = g.boundary_percent(curve, g.GRAVEL_SAND_MM)
    p_fines = g.boundary_percent(curve, g.SAND_FINES_MM)
    for size, value in ((g.GRAVEL_SAND_MM, p_gravel), (g.SAND_FINES_MM, p_fines)):
        if size in sizes:
            continue
        if value is None:
            out.flag("boundary-sieve-missing", "warning",
                     f"no {_mm(size)} sieve and the curve does not reach it: the split at {_mm(size)} "
                     "is not reported")
        elif g.percent_at_size(curve, size) is not None:  # else proven 0 or 100 % beyond the ends
            out.flag("boundary-sieve-missing", "warning",
                     f"no {_mm(size)} sieve: percent passing {_mm(size)} is interpolated on log size "
                     f"({fmt(round(value, 1))} %)")
    out.results["gravel"] = None if p_gravel is None else 100.0 - p_gravel
    out.results["sand"] = None if p_gravel is None or p_fines is None else p_gravel - p_fines
    out.results["fines"] = p_fines
    # AASHTO M 145 also reads the 2 mm (No. 10) and 425 µm (No. 40) sieves, by these keys
    out.results["percent_passing_2mm"] = g.boundary_percent(curve, 2.0)
    out.results["percent_passing_0_425mm"] = g.boundary_percent(curve, 0.425)


def write_characteristics(curve: list[tuple[float, float]], out: Outcome, fines: float | None) -> None:
    """D10, D30, D60, Cu and Cc read off a curve; flag when D2487 needs one that is missing."""
    d10 = g.size_at_percent(curve, 10.0)
    d30 = g.size_at_percent(curve, 30.0)
    d60 = g.size_at_percent(curve, 60.0)
    out.results["d10_mm"] = d10
    out.results["d30_mm"] = d30
    out.results["d60_mm"] = d60
    out.results["cu"] = None if d10 is None or d60 is None else g.uniformity_coefficient(d10, d60)
    out.results["cc"] = (None if d10 is None or d30 is None or d60 is None
                         else g.curvature_coefficient(d10, d30, d60))
    missing = [name for name, d in (("D10", d10), ("D30", d30), ("D60", d60)) if d is None]
    if missing and (fines is None or fines <= NEEDS_CU_BELOW_FINES):
        verb = "lies" if len(missing) == 1 else "lie"
        out.flag("grading-diameter-unavailable", "warning",
                 f"{' and '.join(missing)} {verb} outside the measured curve: Cu and Cc, which ASTM D2487 "
                 "needs when fines are 12 % or less, are not reported")


def _flag_monotone(curve: list[tuple[float, float]], out: Outcome, what: str) -> None:
    if not g.is_monotone(curve):
        out.flag("passing-not-monotonic", "warning",
                 f"percent passing rises as the size falls in the {what}: check the readings")


# -- sedimentation -------------------------------------------------------------------------------
def _read_hydrometer_type(r: Readings) -> hy.Hydrometer | None:
    h = r.child("hydrometer", label="hydrometer", required=False)
    if h is None:
        return None if r.has_errors_under("hydrometer") else hy.HYDROMETER_152H
    kind = h.choice("type", name="hydrometer type", choices=sorted(hy.HYDROMETERS), default="152H")
    h.text("id", max_length=40)
    a = h.number("depth_at_zero_mm", name="effective depth at reading 0", unit="mm", required=False,
                 above=0.0, maximum=500.0)
    b = h.number("depth_per_unit_mm", name="change of effective depth per reading unit", unit="mm",
                 required=False, above=0.0, maximum=50.0)
    if kind is None or h.has_errors_under():
        return None
    base = hy.HYDROMETERS[kind]
    return hy.Hydrometer(base.type, base.depth_at_zero_mm if a is None else a,
                         base.depth_per_unit_mm if b is None else b, base.min_reading, base.max_reading)


def _read_zero_readings(r: Readings) -> list[tuple[float, float]] | None:
    if not r.present("zero_readings"):
        return []
    rows = r.items("zero_readings", noun="zero reading")
    out: list[tuple[float, float]] = []
    seen: set[float] = set()
    for row in rows:
        t = row.number("temperature_c", name="temperature", unit="°C", minimum=MIN_TEMPERATURE_C,
                       maximum=MAX_TEMPERATURE_C)
        c = row.number("reading", name="control-cylinder reading", minimum=-20.0, maximum=60.0)
        if t is not None and t in seen:
            row.refuse("temperature_c", f"a zero reading at {fmt(t, '°C')} is already given")
            continue
        if t is not None and c is not None:
            seen.add(t)
            out.append((t, c))
    return None if r.has_errors_under("zero_readings") else out


@dataclass
class HydrometerInputs:
    """The test-wide values of a sedimentation analysis, all valid."""

    dry_mass_g: float
    gs: float
    meter: hy.Hydrometer
    meniscus: float
    zero: list[tuple[float, float]]
    u_reading: float
    u_mass_g: float


def _read_inputs(r: Readings, zero: list[tuple[float, float]] | None) -> HydrometerInputs | None:
    """The test-wide values; the bounds on Gs and corrections only catch typing slips (our own)."""
    dry = r.number("dry_mass_g", name="dry mass of the specimen", unit="g", above=0.0)
    gs = r.number("specific_gravity", name="specific gravity of the solids", minimum=1.5, maximum=4.0)
    meter = _read_hydrometer_type(r)
    meniscus = r.number("meniscus_correction", name="meniscus correction", minimum=-10.0, maximum=10.0)
    resolution = r.number("reading_resolution", name="hydrometer reading resolution", required=False,
                          above=0.0, maximum=10.0)
    balance = read_balance(r)
    if dry is None or gs is None or meter is None or meniscus is None or zero is None:
        return None
    res = DEFAULT_READING_RESOLUTION if resolution is None else resolution
    return HydrometerInputs(dry, gs, meter, meniscus, zero, res / math.sqrt(12.0), balance.u_mass)


def _read_points(r: Readings, inputs: HydrometerInputs | None, zero: list[tuple[float, float]] | None,
                 scale_pct: float | None, out: Outcome) -> list[hy.Point]:
    """Each valid reading as a point; readings are refused one by one."""
    rows = r.items("readings", noun="reading", min_items=1)
    zero_temps = [t for t, _ in inputs.zero] if inputs is not None and inputs.zero else [0.0]
    t_low = min(zero_temps) - ZERO_READING_TOLERANCE_C
    t_high = max(zero_temps) + ZERO_READING_TOLERANCE_C
    points: list[hy.Point] = []
    last_minutes: float | None = None
    out_of_range: list[str] = []
    extrapolated: list[str] = []
    for row in rows:
        minutes = row.number("minutes", name="time", unit="min", above=0.0, maximum=100000.0)
        reading = row.number("reading", name="hydrometer reading", minimum=-20.0, maximum=100.0)
        temp = row.number("temperature_c", name="temperature", unit="°C", minimum=MIN_TEMPERATURE_C,
                          maximum=MAX_TEMPERATURE_C)
        own = row.number("composite_correction", name="composite correction", required=False,
                         minimum=-20.0, maximum=60.0)
        if minutes is not None:
            if last_minutes is not None and minutes <= last_minutes:
                row.refuse("minutes", f"time ({fmt(minutes, 'min')}) must be after the previous "
                                      f"reading's ({fmt(last_minutes, 'min')})")
                minutes = None
            else:
                last_minutes = minutes
        if zero == [] and not row.present("composite_correction"):
            row.refuse("composite_correction", "composite correction is required: give it for this "
                                               "reading or give zero readings for the test")
            continue
        if inputs is None or minutes is None or reading is None or temp is None:
            continue
        if own is None and not inputs.zero:
            continue
        depth = inputs.meter.effective_depth_mm(reading + inputs.meniscus)
        if depth <= 0.0:
            row.refuse("reading", f"hydrometer reading ({fmt(reading)}) gives no positive effective "
                                  f"depth with this hydrometer's calibration")
            continue
        if not inputs.meter.min_reading <= reading <= inputs.meter.max_reading:
            out_of_range.append(f"{fmt(reading)} at {fmt(minutes, 'min')}")
        if own is None:
            corr = hy.composite_from_zero_readings(inputs.zero, temp)
            if not t_low <= temp <= t_high:
                extrapolated.append(f"{fmt(temp, '°C')} at {fmt(minutes, 'min')}")
        else:
            corr = own
        specimen = hy.percent_finer(reading, corr, inputs.dry_mass_g, inputs.gs)
        diameter = hy.stokes_diameter_mm(depth, minutes, temp, inputs.gs)
        whole = specimen if scale_pct is None else specimen * scale_pct / 100.0
        points.append(hy.Point(minutes, diameter, whole, specimen, reading, corr, depth, own is None))
    if out_of_range and inputs is not None:
        meter = inputs.meter
        out.flag("hydrometer-reading-out-of-range", "warning",
                 f"readings outside the {meter.type} scale ({fmt(meter.min_reading)} to "
                 f"{fmt(meter.max_reading)} g/L): {'; '.join(out_of_range)}")
    if extrapolated:
        out.flag("composite-correction-extrapolated", "warning",
                 "composite correction carried beyond the temperatures of the zero readings for "
                 f"readings at {'; '.join(extrapolated)}")
    bad = [p for p in points if not 0.0 <= p.specimen_percent <= 100.0]
    if bad:
        listed = "; ".join(f"{fmt(round(p.specimen_percent, 1))} % at {fmt(p.minutes, 'min')}" for p in bad)
        out.flag("percent-finer-out-of-bounds", "warning",
                 f"percent finer of the specimen outside 0 to 100 % ({listed}): check the dry mass, "
                 "the composite correction and the specific gravity")
    return points


def _bracket(points: list[hy.Point], size_mm: float) -> tuple[hy.Point, hy.Point] | None:
    """The two points of neighbouring diameters that enclose ``size_mm`` (smaller first)."""
    pts = sorted(points, key=lambda p: p.diameter_mm)
    for lo, hi in zip(pts, pts[1:], strict=False):
        if lo.diameter_mm <= size_mm <= hi.diameter_mm and lo.diameter_mm < hi.diameter_mm:
            return lo, hi
    return None


def read_hydrometer(r: Readings, out: Outcome, *, sieve: SieveData | None = None,
                    combined: bool = False) -> list[hy.Point] | None:
    """Read a sedimentation analysis, write its results and flags, hand back its points.

    In a combined grading (``combined``), the separation sieve's percent passing and the
    percent passing 75 µm come from the sieving (``sieve``), and typing them is refused.
    """
    zero = _read_zero_readings(r)
    inputs = _read_inputs(r, zero)
    sep_size = r.number("separation_sieve_mm", name="separation sieve", unit="mm", required=False,
                        above=0.0, maximum=100.0)
    sep_size = DEFAULT_SEPARATION_SIEVE_MM if sep_size is None else sep_size
    sep_pct: float | None
    p75: float | None
    if combined:
        for key in ("separation_passing_pct", "passing_75um_pct"):
            if r.present(key):
                r.refuse(key, "in a combined grading this percentage comes from the sieve analysis")
        sep_pct, p75 = None, None
        if sieve is not None and sieve.complete and not r.has_errors_under("separation_sieve_mm"):
            sizes = [d for d, _ in sieve.curve]
            if sep_size not in sizes:
                r.refuse("separation_sieve_mm", f"the separation sieve ({_mm(sep_size)}) is not among the "
                                                "sieves of the sieve analysis")
            else:
                sep_pct = sieve.curve[sizes.index(sep_size)][1]
                p75 = g.boundary_percent(sieve.curve, g.SAND_FINES_MM)
    else:
        got = r.number("separation_passing_pct", name="percent passing the separation sieve", unit="%",
                       required=False, above=0.0, maximum=100.0)
        sep_pct = 100.0 if got is None else got
        p75 = r.number("passing_75um_pct", name="percent passing 75 µm", unit="%", required=False,
                       minimum=0.0, maximum=100.0)
        if p75 is None and sep_size == g.SAND_FINES_MM and got is not None:
            p75 = got
        if p75 is not None and got is not None and sep_size >= g.SAND_FINES_MM and p75 > got:
            r.refuse("passing_75um_pct", f"percent passing 75 µm ({fmt(p75, '%')}) is above the percent "
                                         f"passing the separation sieve ({fmt(got, '%')})")
            p75 = None
    points = _read_points(r, inputs, zero, sep_pct, out)
    if sep_pct is None or inputs is None:
        return None
    out.results["hydrometer_points"] = [
        {"minutes": p.minutes, "diameter_mm": p.diameter_mm, "percent_finer": p.percent_finer}
        for p in points
    ]
    if r.has_errors_under() or not points:
        return points
    curve = [(p.diameter_mm, p.percent_finer) for p in points]
    _flag_monotone(curve, out, "hydrometer readings")
    clay = g.percent_at_size(curve, g.CLAY_SILT_MM)
    if p75 is None and not combined:
        p75 = g.percent_at_size(curve, g.SAND_FINES_MM)
    if clay is None:
        lo = min(p.diameter_mm for p in points)
        hi = max(p.diameter_mm for p in points)
        out.flag("clay-fraction-outside-readings", "warning",
                 f"2 µm is outside the diameters measured ({fmt(float(f'{lo:.3g}'), 'mm')} to "
                 f"{fmt(float(f'{hi:.3g}'), 'mm')}): no clay fraction is reported (it is not extrapolated)")
    out.results["clay_fraction"] = clay
    out.results["clay"] = clay
    out.results["silt"] = None if clay is None or p75 is None else p75 - clay
    pair = _bracket(points, g.CLAY_SILT_MM)
    if clay is not None and pair is not None:
        lo_pt, hi_pt = pair
        u = hy.u_interpolated_percent(
            g.CLAY_SILT_MM, lo_pt, hi_pt,
            scale=hy.gs_factor(inputs.gs) * sep_pct / inputs.dry_mass_g,
            depth_per_unit_mm=inputs.meter.depth_per_unit_mm, dry_mass_g=inputs.dry_mass_g,
            u_reading=inputs.u_reading, u_mass_g=inputs.u_mass_g,
            common_correction=lo_pt.correction_from_zero_readings and hi_pt.correction_from_zero_readings,
        )
        out.results.setdefault("uncertainty", {})["clay_fraction"] = expanded(u)
    return points


# -- the registered methods ----------------------------------------------------------------------
@method("sieve", title="Grading by sieving", standard="ASTM D6913/D6913M-17; ASTM D2487-17")
def sieve_method(r: Readings, out: Outcome) -> None:
    """Percent passing each sieve, D10/D30/D60, Cu, Cc, and the gravel/sand/fines split."""
    data = read_sieve(r, out)
    if data is None or not data.complete:
        return
    write_characteristics(data.curve, out, out.results.get("fines"))


@method("hydrometer", title="Grading by sedimentation (hydrometer)",
        standard="ASTM D422-63(2007) calculation; ASTM D7928-21 terms; water by IAPWS 2008")
def hydrometer_method(r: Readings, out: Outcome) -> None:
    """Stokes diameter and percent finer of each reading, clay fraction and silt."""
    read_hydrometer(r, out)


@method("grading", title="Grading by sieving and sedimentation",
        standard="ASTM D6913/D6913M-17; ASTM D7928-21; ASTM D2487-17")
def grading_method(r: Readings, out: Outcome) -> None:
    """Sieving and sedimentation combined into one grading curve (D7928 separation sieve)."""
    s = r.child("sieve", label="sieve analysis")
    h = r.child("hydrometer", label="hydrometer analysis")
    data = read_sieve(s, out) if s is not None else None
    if h is None:
        return
    points = read_hydrometer(h, out, sieve=data, combined=True)
    if data is None or not data.complete or points is None or r.has_errors_under():
        return
    finest = data.curve[-1][0]
    combined = [(d, p, "sieve") for d, p in data.curve]
    combined += sorted(((p.diameter_mm, p.percent_finer, "hydrometer") for p in points
                        if p.diameter_mm < finest), key=lambda t: -t[0])
    out.results["combined_curve"] = [{"size_mm": d, "percent_passing": p, "source": src}
                                     for d, p, src in combined]
    curve = [(d, p) for d, p, _ in combined]
    if g.is_monotone([(p.diameter_mm, p.percent_finer) for p in points]):
        # the hydrometer's own rise is flagged already; this catches the join to the sieves
        _flag_monotone(curve, out, "joined sieve and hydrometer curve")
    write_characteristics(curve, out, out.results.get("fines"))
