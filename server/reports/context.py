"""What one certified report says, and the view a template shows of it (pure: no I/O).

The service layer reads the database and builds a ``ReportData``; this module turns it into a
``ReportView`` of ready-to-print text, so the template never computes. Values are rounded here,
only for showing, by ``server.engine.rounding.reported`` (the rule each result key names); a
missing value shows as "—", a limit of a non-plastic soil as "NP" (ASTM D4318: report NP when
LL or PL cannot be determined or PL >= LL).

Measured results and interpretation are kept apart: correlations go to their own list, printed
under "Opinion and interpretation" (DESIGN.md section 5).

``canonical_json`` / ``content_fingerprint`` give the SHA-256 of the report data itself. A
PDF cannot print the hash of its own bytes, so every page prints this content fingerprint; the
service stores the PDF's own SHA-256 beside it and the verify page accepts either.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, fields, is_dataclass, replace
from datetime import date, datetime
from typing import Any

from server.engine.indices import activity as activity_of
from server.engine.plasticity_chart import chart_symbol
from server.engine.readings import as_entered, as_number
from server.engine.rounding import reported, round_half_up
from server.reports.charts import (
    ProfileRow,
    Series,
    activity_chart_svg,
    compaction_chart_svg,
    depth_profile_svg,
    flow_curve_svg,
    grading_chart_svg,
    plasticity_chart_svg,
    xy_chart,
)

DASH = "—"
NP = "NP"

DEFAULT_CAUTIONS: tuple[str, ...] = (
    "The results in this report relate only to the samples as received and tested by the laboratory.",
    "This report shall not be reproduced except in full without the written approval of the laboratory.",
    "Correlations and other interpretation in this report are indicative only; they are not measured "
    "results and do not replace tests.",
    "The choice of design values and their use are for the responsible engineer, under the local codes "
    "and licensed practice that apply to the project.",
)


# -- the report data (built by the service layer) -----------------------------------------------


@dataclass(frozen=True)
class LabInfo:
    name: str
    address: str = ""
    accreditation: str = ""


@dataclass(frozen=True)
class Signatory:
    """Who approved the report, in what role, what the signature means, and when (ISO 8601)."""

    name: str
    role: str
    meaning: str
    signed_at: str


@dataclass(frozen=True)
class MethodNote:
    """A method followed; ``deviation`` is empty when the standard was followed as written."""

    title: str
    standard: str
    deviation: str = ""


@dataclass(frozen=True)
class TestEntry:
    """One approved test on one sample, with results, readings and flags as stored.

    ``results`` use the engine's keys (DESIGN.md section 3), ``readings`` are as typed,
    ``flags`` are {"code", "severity", "message"} dicts. Treat the mappings as read-only: the
    content fingerprint is taken over them.
    """

    __test__ = False  # a report record, not a pytest test class

    sample_code: str
    location_code: str
    depth_from_m: float | None
    depth_to_m: float | None
    sample_type: str
    description: str
    method: str
    results: Mapping[str, Any]
    readings: Mapping[str, Any] = field(default_factory=dict)
    flags: Sequence[Mapping[str, Any]] = ()
    revision: int = 0
    method_title: str = ""
    approval: Signatory | None = None  # who approved this test revision, in what role, meaning, when
    amendment_reason: str = ""  # why this revision replaced an earlier one (empty for revision 1)

    def __post_init__(self) -> None:
        object.__setattr__(self, "flags", tuple(self.flags))


@dataclass(frozen=True)
class RevisionNote:
    """An earlier revision of the same report: its number, issue date and file SHA-256."""

    revision: int
    issued_on: str
    sha256: str


@dataclass(frozen=True)
class ReportData:
    """Everything one issued report prints, and nothing it must look up."""

    lab: LabInfo
    client_name: str
    job_code: str
    job_title: str
    site: str
    report_number: str
    revision: int
    issue_date: date
    issued_at_iso: str
    approver: Signatory
    verify_url: str
    tests: Sequence[TestEntry] = ()
    methods: Sequence[MethodNote] = ()
    cautions: Sequence[str] = DEFAULT_CAUTIONS
    scope: str = ""  # which samples the report covers, in words ("all 12 samples with approved tests")
    history: Sequence[RevisionNote] = ()  # earlier revisions this one supersedes, oldest first

    def __post_init__(self) -> None:
        for name in ("tests", "methods", "cautions", "history"):
            object.__setattr__(self, name, tuple(getattr(self, name)))


# -- the content fingerprint --------------------------------------------------------------------


def _plain(value: Any) -> Any:
    """The JSON form of report data: dataclasses as objects, dates as ISO text, no NaN."""
    if is_dataclass(value) and not isinstance(value, type):
        return {f.name: _plain(getattr(value, f.name)) for f in fields(value)}
    if isinstance(value, Mapping):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if isinstance(value, datetime | date):
        return value.isoformat()
    if isinstance(value, float) and not math.isfinite(value):
        raise ValueError("report data holds a value that is not a finite number")
    return value


def canonical_json(data: ReportData) -> str:
    """The report data as canonical JSON: keys sorted, no spaces, UTF-8 text kept as is."""
    return json.dumps(_plain(data), sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False)


def content_fingerprint(data: ReportData) -> str:
    """SHA-256 (hex) of the canonical JSON of the report data: printed on every page."""
    return hashlib.sha256(canonical_json(data).encode("utf-8")).hexdigest()


# -- the view (what the template prints) -----------------------------------------------------


@dataclass(frozen=True)
class SummaryRow:
    location: str
    sample: str
    depth_from: str
    depth_to: str
    sample_type: str
    water_content: str
    liquid_limit: str
    plastic_limit: str
    plasticity_index: str
    liquidity_index: str
    consistency_index: str
    activity: str
    clay_fraction: str
    sensitivity: str
    uscs_symbol: str
    uscs_name: str
    aashto: str


@dataclass(frozen=True)
class ResultLine:
    label: str
    value: str
    unit: str = ""
    uncertainty: str = ""


@dataclass(frozen=True)
class Table:
    title: str
    columns: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]


@dataclass(frozen=True)
class FlagLine:
    severity: str
    code: str
    message: str


@dataclass(frozen=True)
class TestSection:
    """The details page of one test, as printed."""

    __test__ = False  # a report view, not a pytest test class
    anchor: str
    heading: str
    location: str
    sample: str
    depth: str
    sample_type: str
    description: str
    method: str
    method_title: str
    revision: int
    results: tuple[ResultLine, ...]
    has_uncertainty: bool
    readings: tuple[Table, ...]
    readings_other: tuple[ResultLine, ...]
    curve_svg: str
    curve_caption: str
    flags: tuple[FlagLine, ...]
    approval: str = ""  # "name, role, signed at" of the test revision's approval
    first_of_sample: bool = True  # starts a new page; a sample's further tests follow on
    result_tables: tuple[Table, ...] = ()  # results with a row each (compaction points)
    notes: tuple[str, ...] = ()  # how the results were formed, what they do not say
    organic: tuple[ResultLine, ...] = ()  # beside a USCS group: the same sample's loss on ignition


@dataclass(frozen=True)
class InterpretationEntry:
    sample: str
    quantity: str
    value: str
    unit: str
    source: str
    note: str


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
class ApprovalLine:
    """The signature on one test revision carried by the report."""

    sample: str
    test: str
    revision: int
    name: str
    role: str
    meaning: str
    signed_at: str


@dataclass(frozen=True)
class AmendmentLine:
    """A test revision that replaced an earlier one, and the reason recorded for it."""

    sample: str
    test: str
    revision: int
    reason: str


@dataclass(frozen=True)
class Figure:
    """A chart as printed: its heading, the SVG, a caption."""

    title: str
    svg: str
    caption: str = ""


@dataclass(frozen=True)
class ReportView:
    data: ReportData
    issue_date: str
    signed_at: str
    summary: tuple[SummaryRow, ...]
    sections: tuple[TestSection, ...]
    chart_points: tuple[ChartPoint, ...]
    plasticity_chart_svg: str
    interpretation: tuple[InterpretationEntry, ...]
    methods: tuple[MethodNote, ...]
    sample_count: int
    approvals: tuple[ApprovalLine, ...] = ()
    amendments: tuple[AmendmentLine, ...] = ()
    history: tuple[RevisionNote, ...] = ()
    depth_profiles: tuple[Figure, ...] = ()
    grading_charts: tuple[Figure, ...] = ()
    activity_chart: Figure | None = None
    activity_points: tuple[ActivityPoint, ...] = ()


# Result lines in the order a reader expects; LL, PL and PI carry no % sign (ASTM D4318 report
# clause, from memory), water content and clay fraction do.
RESULT_LABELS: tuple[tuple[str, str, str], ...] = (
    ("water_content", "Water content, w", "%"),
    ("liquid_limit", "Liquid limit, LL", ""),
    ("plastic_limit", "Plastic limit, PL", ""),
    ("plasticity_index", "Plasticity index, PI", ""),
    ("flow_index", "Flow index, If", ""),
    ("liquidity_index", "Liquidity index, LI", ""),
    ("consistency_index", "Consistency index, CI", ""),
    ("activity", "Activity, A", ""),
    ("clay_fraction", "Clay fraction, < 2 µm", "%"),
    ("sensitivity", "Sensitivity, St", ""),
    ("undrained_strength_kpa", "Undrained shear strength, cu", "kPa"),
)
# Labels and units of further result keys (grading, strength, classification detail).
_OTHER_LABELS: dict[str, tuple[str, str]] = {
    "gravel": ("Gravel, 4.75 to 75 mm", "%"),
    "sand": ("Sand, 0.075 to 4.75 mm", "%"),
    "fines": ("Fines, < 0.075 mm", "%"),
    "silt": ("Silt, 0.002 to 0.075 mm", "%"),
    "clay": ("Clay, < 0.002 mm", "%"),
    "percent_passing_2mm": ("Passing 2 mm", "%"),
    "percent_passing_0_425mm": ("Passing 0.425 mm", "%"),
    "sieve_mass_loss_pct": ("Sieve mass loss", "%"),
    "cu": ("Coefficient of uniformity, Cu", ""),
    "cc": ("Coefficient of curvature, Cc", ""),
    "uscs_borderline": ("USCS borderline symbol", ""),
    "remoulded_strength_kpa": ("Remoulded undrained strength, cu,r", "kPa"),
    "unconfined_strength_kpa": ("Unconfined compressive strength, qu", "kPa"),
    "remoulded_unconfined_strength_kpa": ("Remoulded unconfined strength, qu,r", "kPa"),
    "strain_at_failure_pct": ("Strain at failure", "%"),
    "remoulded_strain_at_failure_pct": ("Remoulded strain at failure", "%"),
    "sensitivity_class": ("Sensitivity class (Skempton & Northey 1952)", ""),
    # S12 methods (DESIGN.md section 8): densities in Mg/m³, porosity as a fraction
    "particle_density_mg_m3": ("Particle density, ρs", "Mg/m³"),
    "specific_gravity": ("Specific gravity of the solids at 20 °C, Gs", ""),
    "bulk_density_mg_m3": ("Bulk density, ρ", "Mg/m³"),
    "dry_density_mg_m3": ("Dry density, ρd", "Mg/m³"),
    "void_ratio": ("Void ratio, e", ""),
    "porosity": ("Porosity, n (fraction)", ""),
    "degree_of_saturation": ("Degree of saturation, Sr", "%"),
    "linear_shrinkage": ("Linear shrinkage, LS", "%"),
    "organic_content": ("Organic content by loss on ignition, of the dry mass", "%"),
    "maximum_dry_density_mg_m3": ("Maximum dry density, ρd,max", "Mg/m³"),
    "optimum_water_content": ("Optimum water content, wopt", "%"),
    "bs_plasticity_symbol": ("Plasticity chart symbol (BS 5930)", ""),
    "bs_plasticity_term": ("Plasticity term (BS 5930)", ""),
    "oven_dried_ll_ratio": ("Liquid limit oven-dried / not dried", ""),
    "organic": ("Organic by the liquid-limit ratio (ASTM D2487: below 0.75)", ""),
}
_NP_KEYS = ("liquid_limit", "plastic_limit", "plasticity_index")
_NOT_SHOWN = {
    "interpretation", "plasticity_chart", "flow_curve", "nonplastic", "uncertainty", "uscs_symbol",
    "uscs_name", "aashto_group", "group_index", "liquid_limit_method", "air_voids_lines", "zero_air_voids",
    "compaction_points",
}
_UNIT_SUFFIXES = (("_kpa", "kPa"), ("_nm", "N·m"), ("_mm", "mm"), ("_g", "g"), ("_m", "m"), ("_n", "N"),
                  ("_c", "°C"), ("_min", "min"), ("_pct", "%"), ("_mg_m3", "Mg/m³"), ("_cm3", "cm³"))
_COLUMN_LABELS = {
    "container": "Container",
    "blows": "Blows, N",
    "penetration_mm": "Cone penetration (mm)",
    "tare_g": "Tare (g)",
    "wet_tare_g": "Wet soil + tare (g)",
    "dry_tare_g": "Dry soil + tare (g)",
}
_COLUMN_LABELS |= {  # the S12 readings (DESIGN.md section 8), in the order they are typed
    "pycnometer_g": "Pycnometer, m1 (g)",
    "pycnometer_soil_g": "+ dry soil, m2 (g)",
    "pycnometer_soil_water_g": "+ soil + water, m3 (g)",
    "pycnometer_water_g": "+ water, m4 (g)",
    "crucible_g": "Crucible (g)",
    "crucible_dry_g": "+ dry soil (g)",
    "crucible_ignited_g": "+ ignited soil (g)",
    "mould_soil_g": "Mould + soil (g)",
    "mass_g": "Mass (g)",
    "diameter_mm": "Diameter (mm)",
    "height_mm": "Height (mm)",
}
# Columns in this order, the rest after them as stored: PostgreSQL's JSONB keeps no key order.
_COLUMN_ORDER = tuple(_COLUMN_LABELS)
# A computed column beside the rows of a readings list: (method, list) -> (result key holding one
# value per row, column heading, the key whose rounding applies), as each water content is shown.
_PER_ROW: dict[tuple[str, str], tuple[str, str, str]] = {
    ("particle-density", "determinations"): (
        "particle_density_determinations", "ρs (Mg/m³)", "particle_density_mg_m3"),
    ("loss-on-ignition", "determinations"): (
        "organic_content_determinations", "Organic content (%)", "organic_content"),
    ("density", "specimens"): ("bulk_density_determinations", "ρ (Mg/m³)", "bulk_density_mg_m3"),
}


def _number(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, int | float):
        return None
    f = float(value)
    return f if math.isfinite(f) else None


def show(key: str, value: Any) -> str:
    """A result value as printed: rounded by its key's rule, text as is, '—' when absent."""
    if value is None or value == "":
        return DASH
    if isinstance(value, bool):
        return "yes" if value else "no"
    num = _number(value)
    if num is not None:
        return reported(key, num)
    return str(value)


def typed(value: Any) -> str:
    """A reading as entered ("44.20" as typed at the bench; a JSON number by the shortest text
    that gives it back, see ``server.engine.readings.as_entered``); '—' when absent."""
    if value is None or value == "":
        return DASH
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, list | tuple):
        return ", ".join(typed(v) for v in value) if value else DASH
    return as_entered(value) or DASH


def humanise(key: str) -> str:
    """'wet_tare_g' -> 'Wet tare (g)': a readable label for a key we have no label for."""
    unit = ""
    base = key
    for suffix, name in _UNIT_SUFFIXES:
        if key.lower().endswith(suffix) and len(key) > len(suffix):
            base, unit = key[: -len(suffix)], name
            break
    words = base.replace("_", " ").replace("-", " ").strip()
    words = words[:1].upper() + words[1:]
    return f"{words} ({unit})" if unit else words


def _round2(value: float) -> str:
    """Depth in metres to 0.01 m (common practice for sample depths)."""
    return f"{round_half_up(value, 2):.2f}"


def _depth_range(t: TestEntry) -> str:
    """'1.20–1.65 m', or one depth when only the top is known, or '—'."""
    if t.depth_from_m is None and t.depth_to_m is None:
        return DASH
    a = DASH if t.depth_from_m is None else _round2(t.depth_from_m)
    if t.depth_to_m is None:
        return f"{a} m"
    return f"{a}–{_round2(t.depth_to_m)} m"


def moment(iso: str) -> str:
    """An ISO 8601 time as '2025-03-14 15:58 UTC' (or with its offset); other text as given."""
    try:
        when = datetime.fromisoformat(iso)
    except ValueError:
        return iso
    text = when.strftime("%Y-%m-%d %H:%M")
    offset = when.utcoffset()
    if offset is None:
        return text
    if not offset:
        return f"{text} UTC"
    minutes = int(offset.total_seconds() // 60)
    sign = "+" if minutes > 0 else "-"
    return f"{text} UTC{sign}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}"


def _sample_key(t: TestEntry) -> tuple[str, str, float | None, float | None]:
    return (t.location_code, t.sample_code, t.depth_from_m, t.depth_to_m)


# Where two tests of one sample give the same key, the test that measures it wins: the
# classification test's USCS and AASHTO over the Atterberg set's chart symbol, a grading or
# hydrometer test's clay fraction over a value typed into the Atterberg set.
_PREFERRED: dict[str, tuple[str, ...]] = {
    "uscs_symbol": ("classification", "atterberg"),
    "uscs_name": ("classification", "atterberg"),
    "aashto_group": ("classification",),
    "group_index": ("classification",),
    "clay_fraction": ("grading", "hydrometer", "atterberg", "classification"),
}


def _rank(key: str, method: str) -> int:
    order = _PREFERRED.get(key, ())
    return order.index(method) if method in order else len(order)


def _merge(tests: Sequence[TestEntry]) -> dict[str, Any]:
    """One sample's results from all its tests: for each key, the preferred test that gives it
    (else the first). Activity is formed again from the PI and clay fraction shown (by the
    engine's formula), so that it agrees with them when they come from two different tests."""
    merged: dict[str, Any] = {}
    rank: dict[str, int] = {}
    for t in tests:
        for key, value in t.results.items():
            if value is None:
                continue
            r = _rank(key, t.method)
            if key not in merged or r < rank[key]:
                merged[key] = value
                rank[key] = r
    pi, clay = _number(merged.get("plasticity_index")), _number(merged.get("clay_fraction"))
    if not _nonplastic(merged) and pi is not None and clay:
        merged["activity"] = activity_of(pi, clay)
    return merged


def _nonplastic(results: Mapping[str, Any]) -> bool:
    return results.get("nonplastic") is True


def _limit(key: str, results: Mapping[str, Any]) -> str:
    """LL, PL or PI as printed: NP where the soil is non-plastic (ASTM D4318)."""
    np = _nonplastic(results)
    if np and key != "liquid_limit":
        return NP
    value = results.get(key)
    if value is None:
        return NP if np else DASH
    return show(key, value)


def _aashto(results: Mapping[str, Any]) -> str:
    group = results.get("aashto_group")
    if not group:
        return DASH
    gi = _number(results.get("group_index"))
    return f"{group} ({reported('group_index', gi)})" if gi is not None else str(group)


def summary_row(tests: Sequence[TestEntry]) -> SummaryRow:
    """The summary line of one sample, from all the tests on it."""
    first = tests[0]
    r = _merge(tests)
    return SummaryRow(
        location=first.location_code,
        sample=first.sample_code,
        depth_from=DASH if first.depth_from_m is None else _round2(first.depth_from_m),
        depth_to=DASH if first.depth_to_m is None else _round2(first.depth_to_m),
        sample_type=first.sample_type or DASH,
        water_content=show("water_content", r.get("water_content")),
        liquid_limit=_limit("liquid_limit", r),
        plastic_limit=_limit("plastic_limit", r),
        plasticity_index=_limit("plasticity_index", r),
        liquidity_index=show("liquidity_index", r.get("liquidity_index")),
        consistency_index=show("consistency_index", r.get("consistency_index")),
        activity=show("activity", r.get("activity")),
        clay_fraction=show("clay_fraction", r.get("clay_fraction")),
        sensitivity=show("sensitivity", r.get("sensitivity")),
        uscs_symbol=show("uscs_symbol", r.get("uscs_symbol")),
        uscs_name=show("uscs_name", r.get("uscs_name")),
        aashto=_aashto(r),
    )


def sample_results(tests: Sequence[TestEntry]) -> dict[str, Any]:
    """One sample's results at full precision, taken from its tests as its summary row takes
    them: what an export prints beside the summary's rounded text, so the two never disagree."""
    return _merge(tests)


def shown_result(key: str, results: Mapping[str, Any]) -> str:
    """A result of one test as the report prints it: "NP" for a limit of a non-plastic soil
    (ASTM D4318), else rounded by the key's rule; for exports that print it beside the value."""
    return _limit(key, results) if key in _NP_KEYS else show(key, results.get(key))


def _by_sample(tests: Sequence[TestEntry]) -> list[list[TestEntry]]:
    groups: dict[tuple[str, str, float | None, float | None], list[TestEntry]] = {}
    for t in tests:
        groups.setdefault(_sample_key(t), []).append(t)
    return list(groups.values())


def result_lines(results: Mapping[str, Any]) -> tuple[ResultLine, ...]:
    """The measured results of one test, rounded, with units and expanded uncertainty (k = 2)."""
    unc = results.get("uncertainty")
    unc = unc if isinstance(unc, Mapping) else {}
    lines: list[ResultLine] = []

    def u_text(key: str) -> str:
        u = unc.get(key)
        if isinstance(u, Mapping) and _number(u.get("U")) is not None:
            k = _number(u.get("k"))
            k_text = f" (k = {k:g})" if k is not None else ""
            return f"± {show(key, u.get('U'))}{k_text}"
        return ""

    for key, label, unit in RESULT_LABELS:
        if key in _NP_KEYS and (key in results or _nonplastic(results)):
            lines.append(ResultLine(label, _limit(key, results), unit, u_text(key)))
        elif results.get(key) is not None:
            lines.append(ResultLine(label, show(key, results[key]), unit, u_text(key)))
    if results.get("uscs_symbol") or results.get("uscs_name"):
        lines.append(ResultLine("USCS (ASTM D2487)",
                                f"{show('uscs_symbol', results.get('uscs_symbol'))}, "
                                f"{show('uscs_name', results.get('uscs_name'))}"))
    if results.get("aashto_group"):
        lines.append(ResultLine("AASHTO group (GI), M 145", _aashto(results)))
    known = {k for k, _, _ in RESULT_LABELS} | _NOT_SHOWN
    # Labelled keys in the table's order, then the rest by name: the same order on every backend
    # (PostgreSQL's JSONB keeps no key order).
    order = {key: i for i, key in enumerate(_OTHER_LABELS)}
    for key, value in sorted(results.items(), key=lambda kv: (order.get(kv[0], len(order)), kv[0])):
        if key in known or key.endswith(("_trials", "_determinations")):
            continue
        if isinstance(value, Mapping | list | tuple) or value is None:
            continue
        label, unit = _OTHER_LABELS.get(key, (humanise(key), ""))
        lines.append(ResultLine(label, show(key, value), unit, u_text(key)))
    return tuple(lines)


def _per_row_w(results: Mapping[str, Any], path: tuple[str, ...], method: str) -> list[Any] | None:
    """The engine's water content of each row of a readings list, found by where the list sits."""
    last = path[-1]
    parent = path[-2] if len(path) > 1 else method
    if last == "trials":
        rows = results.get("liquid_limit_trials")
        if isinstance(rows, list):
            return [row.get("water_content") if isinstance(row, Mapping) else row for row in rows]
        return None
    if last == "determinations":
        if parent.replace("-", "_").startswith("plastic_limit"):
            key = "plastic_limit_determinations"
        else:
            key = "water_content_determinations"
        rows = results.get(key)
        if isinstance(rows, list):
            return [row.get("water_content") if isinstance(row, Mapping) else row for row in rows]
    return None


def _is_rows(value: Any) -> bool:
    """A readings list printed as a table: a non-empty list of objects."""
    return isinstance(value, list | tuple) and bool(value) and all(isinstance(v, Mapping) for v in value)


def _per_row(
    results: Mapping[str, Any], path: tuple[str, ...], method: str
) -> tuple[str, str, list[Any]] | None:
    """The computed column of a readings list: its heading, the key whose rounding applies, and
    one value per row: each water content, or the method's own (``_PER_ROW``)."""
    own = _PER_ROW.get((method, path[-1])) if len(path) == 1 else None
    if own is not None:
        values = results.get(own[0])
        return (own[1], own[2], list(values)) if isinstance(values, list) else None
    ws = _per_row_w(results, path, method)
    return None if ws is None else ("w (%)", "water_content", ws)


def _nested_table(title: str, noun: str, parents: Sequence[Mapping[str, Any]], key: str) -> Table:
    """One table of the rows each parent row holds under ``key``, each led by its parent's number."""
    children = [(i + 1, j + 1, child) for i, parent in enumerate(parents) if _is_rows(parent.get(key))
                for j, child in enumerate(parent[key])]
    cols: list[str] = [c for c in _COLUMN_ORDER if any(c in child for _, _, child in children)]
    for _, _, child in children:
        cols += [str(k) for k in child if str(k) not in cols and not _is_rows(child[k])]
    head = (noun, "#", *(_COLUMN_LABELS.get(c, humanise(c)) for c in cols))
    rows = tuple((str(i), str(j), *(typed(child.get(c)) for c in cols)) for i, j, child in children)
    return Table(title, head, rows)


def readings_tables(
    method: str, readings: Mapping[str, Any], results: Mapping[str, Any]
) -> tuple[tuple[Table, ...], tuple[ResultLine, ...]]:
    """The readings as typed: lists of rows as tables (with each row's water content), the rest as lines."""
    tables: list[Table] = []
    others: list[ResultLine] = []

    def walk(obj: Mapping[str, Any], path: tuple[str, ...]) -> None:
        for key, value in obj.items():
            here = (*path, str(key))
            label = " — ".join([humanise(here[0]), *(humanise(p).lower() for p in here[1:])])
            if isinstance(value, Mapping):
                walk(value, here)
            elif _is_rows(value):
                nested = {str(k) for row in value for k, v in row.items() if _is_rows(v)}
                cols: list[str] = [c for c in _COLUMN_ORDER if any(c in row for row in value)]
                for row in value:
                    cols += [str(k) for k in row if str(k) not in cols and str(k) not in nested]
                computed = _per_row(results, here, method)
                head = ["#", *(_COLUMN_LABELS.get(c, humanise(c)) for c in cols)]
                if computed is not None:
                    head.append(computed[0])
                rows: list[tuple[str, ...]] = []
                for i, row in enumerate(value):
                    cells = [str(i + 1), *(typed(row.get(c)) for c in cols)]
                    if computed is not None:
                        _, key, values = computed
                        cells.append(show(key, values[i] if i < len(values) else None))
                    rows.append(tuple(cells))
                tables.append(Table(label, tuple(head), tuple(rows)))
                for key in sorted(nested):  # rows within rows (a compaction point's determinations)
                    noun = "Point" if here[-1] == "points" else "Row"
                    tables.append(_nested_table(f"{label} — {humanise(key).lower()}", noun, value, key))
            else:
                others.append(ResultLine(label, typed(value)))

    walk(readings, ())
    return tuple(tables), tuple(others)


def grading_points(results: Mapping[str, Any]) -> list[tuple[float, float]]:
    """(size in mm, percent passing) of a test's grading, largest size first: the combined sieve
    and sedimentation curve, else the sieve curve, else the hydrometer points."""
    for key, x_key, y_key in (("combined_curve", "size_mm", "percent_passing"),
                              ("grading_curve", "size_mm", "percent_passing"),
                              ("hydrometer_points", "diameter_mm", "percent_finer")):
        rows = results.get(key)
        if not isinstance(rows, list):
            continue
        pts = []
        for row in rows:
            if isinstance(row, Mapping):
                x, y = _number(row.get(x_key)), _number(row.get(y_key))
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
    slope, intercept = _number(fit.get("slope")), _number(fit.get("intercept"))
    cone = fit.get("x") == "penetration_mm"
    fx = ("log10 d" if fit.get("log_x") else "d") if cone else "log10 N"
    where = "d the cone penetration in mm" if cone else "N the number of blows"
    if slope is None or intercept is None:
        return svg, ""
    sign = "−" if slope < 0 else "+"
    caption = f"Least-squares line: w = {intercept:.2f} {sign} {abs(slope):.2f} {fx}, {where}"
    r2 = _number(fit.get("r2"))
    if r2 is not None:
        caption += f" (r² = {r2:.3f})"
    return svg, caption + "."


def _stress_strain(results: Mapping[str, Any]) -> tuple[str, str]:
    series = []
    for key, label in (("stress_strain", "undisturbed"), ("remoulded_stress_strain", "remoulded")):
        rows = results.get(key)
        if isinstance(rows, list):
            pts = [(_number(row.get("strain_pct")), _number(row.get("stress_kpa")))
                   for row in rows if isinstance(row, Mapping)]
            series.append(Series(label, [(x, y) for x, y in pts if x is not None and y is not None]))
    if not series:
        return "", ""
    svg = xy_chart(series, title="Stress against strain", x_label="Axial strain (%)",
                   y_label="Axial stress, corrected area (kPa)", width=330.0, height=235.0)
    qu, at = results.get("unconfined_strength_kpa"), results.get("strain_at_failure_pct")
    caption = ""
    if _number(qu) is not None and _number(at) is not None:
        caption = (f"qu = {show('unconfined_strength_kpa', qu)} kPa at {show('strain_at_failure_pct', at)} % "
                   f"strain ({results.get('failure_criterion') or 'peak'}).")
    return svg, caption


def _compaction_curve(results: Mapping[str, Any], readings: Mapping[str, Any]) -> tuple[str, str]:
    """Dry density against water content, the curve through the peak and the air-voids lines."""
    points = _xy(results.get("compaction_points"), "water_content", "dry_density_mg_m3")
    w_opt = _number(results.get("optimum_water_content"))
    rho_max = _number(results.get("maximum_dry_density_mg_m3"))
    peak = (w_opt, rho_max) if w_opt is not None and rho_max is not None else None
    three: list[tuple[float, float]] = []
    if peak is not None and len(points) >= 3:
        # the highest point and its neighbours: the three the maximum is the parabola's vertex of
        # (DESIGN.md section 8); with a maximum claimed the highest point is never an end one
        top = max(range(1, len(points) - 1), key=lambda i: points[i][1])
        three = points[top - 1 : top + 2]
    lines_in = results.get("air_voids_lines")
    lines = {str(va): _xy(pts, "water_content", "dry_density_mg_m3")
             for va, pts in (lines_in.items() if isinstance(lines_in, Mapping) else ())}
    svg = compaction_chart_svg(points, peak=peak, peak_points=three, air_voids=lines)
    caption = "Dry density against water content, the points in order of water content."
    if peak is not None:
        caption += (" Through the highest point and its neighbours the curve is the parabola whose vertex"
                    " gives the maximum dry density and the optimum water content (marked).")
    else:
        caption += " No maximum is marked: the highest point is the driest or the wettest."
    rho_s = readings.get("particle_density_mg_m3")
    if lines and as_number(rho_s) is not None:
        caption += (f" Air-voids lines at {', '.join(f'{va} %' for va in lines)} for a particle density of"
                    f" {typed(rho_s)} Mg/m³ (as entered) and ρw = 1.00 Mg/m³.")
    return svg, caption


def _xy(rows: Any, x_key: str, y_key: str) -> list[tuple[float, float]]:
    """(x, y) of a list of result objects, leaving out any without both numbers."""
    out = []
    for row in rows if isinstance(rows, list) else []:
        if isinstance(row, Mapping):
            x, y = _number(row.get(x_key)), _number(row.get(y_key))
            if x is not None and y is not None:
                out.append((x, y))
    return out


def _curve(results: Mapping[str, Any], readings: Mapping[str, Any]) -> tuple[str, str]:
    """The chart of one test's own page: flow or cone curve, compaction curve, grading curve, or
    stress-strain."""
    if results.get("liquid_limit_trials"):
        return _flow_curve(results)
    if results.get("compaction_points"):
        return _compaction_curve(results, readings)
    pts = grading_points(results)
    if pts:
        return (grading_chart_svg([("this sample", pts)], title="Grading curve", width=330.0, height=235.0),
                "Percent passing against particle size; fraction boundaries at 2 µm, 75 µm and 4.75 mm.")
    return _stress_strain(results)


def _flags(t: TestEntry) -> tuple[FlagLine, ...]:
    out = []
    for f in t.flags:
        sev = str(f.get("severity", "warning"))
        out.append(FlagLine("Error" if sev == "error" else "Warning", str(f.get("code", "")),
                            str(f.get("message", ""))))
    return tuple(out)


EFFORTS = {  # the compactive efforts of the compaction method, as a reader knows them
    "standard": "standard (2.5 kg rammer)",
    "modified": "modified (4.5 kg rammer)",
}
IGNITION_CAUTION = (
    "The loss on ignition counts all the mass lost in the furnace: besides organic matter, water held "
    "by clay minerals and, at the higher temperatures, carbonates; it can overstate the organic content "
    "of clays (common practice)."
)


def _method_details(t: TestEntry) -> tuple[tuple[ResultLine, ...], tuple[str, ...]]:
    """What a method's results need beside them: the readings that qualify them (the bar's
    condition, the furnace temperature, the effort, the particle density used) and notes."""
    r, rd = t.results, t.readings
    lines: list[ResultLine] = []
    notes: list[str] = []
    rho_s = rd.get("particle_density_mg_m3")
    if t.method == "linear-shrinkage" and rd.get("condition"):
        lines.append(ResultLine("Condition of the bar after drying", typed(rd.get("condition"))))
        notes.append("The bar's condition is recorded; it does not change the calculation, "
                     "LS = (1 − oven-dry length / mould length) × 100 (BS 1377-2:1990 cl. 6.5).")
    elif t.method == "loss-on-ignition" and rd.get("furnace_c") not in (None, ""):
        lines.append(ResultLine("Furnace temperature", typed(rd.get("furnace_c")), "°C"))
        notes.append("Organic content is the mass lost on ignition in % of the oven-dried mass, the mean "
                     "of the determinations. " + IGNITION_CAUTION)
    elif t.method == "particle-density":
        count = len(r.get("particle_density_determinations") or [])
        notes.append(f"Mean of {count} determination{'' if count == 1 else 's'}, each at its water "
                     "temperature with the density of water at that temperature; the specific gravity is "
                     "referred to water at 20 °C (ASTM D854-14).")
    elif t.method == "density":
        if as_number(rho_s) is not None:
            lines.append(ResultLine("Particle density used (as entered)", typed(rho_s), "Mg/m³"))
            notes.append("Bulk density is the mean of the specimens' densities. Void ratio, porosity (as a "
                         "fraction) and degree of saturation are from the particle density as entered, "
                         "with ρw = 1.00 Mg/m³.")
        else:
            notes.append("Bulk density is the mean of the specimens' densities. No particle density was "
                         "given: void ratio, porosity and degree of saturation are not reported.")
    elif t.method == "compaction":
        effort = rd.get("effort")
        if effort:
            lines.append(ResultLine("Compactive effort", EFFORTS.get(str(effort), typed(effort))))
        if r.get("maximum_dry_density_mg_m3") is None:
            notes.append("No maximum dry density or optimum water content is given: the points do not "
                         "bracket a peak (see the quality remarks).")
    return tuple(lines), tuple(notes)


def _result_tables(t: TestEntry) -> tuple[Table, ...]:
    """Results with a row each: the compaction points with the zero-air-voids dry density."""
    points = t.results.get("compaction_points")
    if t.method != "compaction" or not isinstance(points, list) or not points:
        return ()
    zav = t.results.get("zero_air_voids")
    zav = zav if isinstance(zav, list) else []
    head = ["#", "Water content, w (%)", "Dry density, ρd (Mg/m³)"]
    if zav:
        head.append("ρd at zero air voids (Mg/m³)")
    rows = []
    for i, p in enumerate(points):
        p = p if isinstance(p, Mapping) else {}
        cells = [str(i + 1), show("water_content", p.get("water_content")),
                 show("dry_density_mg_m3", p.get("dry_density_mg_m3"))]
        if zav:
            cells.append(show("dry_density_mg_m3", zav[i] if i < len(zav) else None))
        rows.append(tuple(cells))
    return (Table("Compaction points, in order of water content", tuple(head), tuple(rows)),)


def organic_lines(t: TestEntry, sample_tests: Sequence[TestEntry]) -> tuple[ResultLine, ...]:
    """Beside a USCS group: the organic content by loss on ignition of the same sample, for the
    reader to set against ASTM D2487's organic criterion, the liquid-limit ratio."""
    if not t.results.get("uscs_symbol"):
        return ()
    out = []
    for other in sample_tests:
        oc = _number(other.results.get("organic_content"))
        if other.method == "loss-on-ignition" and oc is not None:
            furnace = other.readings.get("furnace_c")
            at = f" at {typed(furnace)} °C" if furnace not in (None, "") else ""
            out.append(ResultLine(f"Organic content by loss on ignition{at} (its own test)",
                                  show("organic_content", oc), "%"))
    return tuple(out)


ORGANIC_NOTE = (
    "ASTM D2487 names a fine-grained soil organic (OL, OH) by the ratio of its liquid limit after oven "
    "drying to its liquid limit not dried, below 0.75, and by nothing else; the organic content by loss "
    "on ignition is printed beside the classification for information and does not change the group. "
)


def section_for(index: int, t: TestEntry) -> TestSection:
    """The details page of one test: identity, results, readings with each water content, curve, flags."""
    tables, others = readings_tables(t.method, t.readings, t.results)
    results = result_lines(t.results)
    svg, caption = _curve(t.results, t.readings)
    lines, notes = _method_details(t)
    results += lines
    title = t.method_title or t.method
    return TestSection(
        anchor=f"test-{index + 1}",
        heading=f"{t.location_code} / {t.sample_code} — {title}",
        location=t.location_code,
        sample=t.sample_code,
        depth=_depth_range(t),
        sample_type=t.sample_type or DASH,
        description=t.description or DASH,
        method=t.method,
        method_title=title,
        revision=t.revision,
        results=results,
        has_uncertainty=any(r.uncertainty for r in results),
        readings=tables,
        readings_other=others,
        curve_svg=svg,
        curve_caption=caption,
        flags=_flags(t),
        approval=(f"{t.approval.name}, {t.approval.role}, {moment(t.approval.signed_at)}"
                  if t.approval is not None else ""),
        result_tables=_result_tables(t),
        notes=notes,
    )


def interpretation_entries(t: TestEntry) -> list[InterpretationEntry]:
    """The test's correlations, each with its unit, source and note, for the opinion section."""
    found = t.results.get("interpretation")
    if not isinstance(found, Mapping):
        return []
    out = []
    for name, entry in found.items():
        e = entry if isinstance(entry, Mapping) else {"value": entry}
        label = str(e.get("label") or humanise(str(name)))
        out.append(InterpretationEntry(
            sample=f"{t.location_code} / {t.sample_code}",
            quantity=label,
            value=show(str(name), e.get("value")),
            unit=str(e.get("unit") or ""),
            source=str(e.get("source") or DASH),
            note=str(e.get("note") or ""),
        ))
    return out


def _chart_points(groups: list[list[TestEntry]]) -> list[tuple[ChartPoint, float, float]]:
    """Every plastic sample with LL and PI, labelled by its code (with the location when codes repeat)."""
    plotted: list[tuple[TestEntry, dict[str, Any]]] = []
    for tests in groups:
        r = _merge(tests)
        ll, pi = _number(r.get("liquid_limit")), _number(r.get("plasticity_index"))
        if not _nonplastic(r) and ll is not None and pi is not None:
            plotted.append((tests[0], r))
    codes = [t.sample_code for t, _ in plotted]
    out = []
    for t, r in plotted:
        label = _label(t, codes)
        ll, pi = float(r["liquid_limit"]), float(r["plasticity_index"])
        pos = r.get("plasticity_chart")
        symbol = pos.get("symbol") if isinstance(pos, Mapping) else None
        point = ChartPoint(label, f"{t.location_code} / {t.sample_code}", reported("liquid_limit", ll),
                           reported("plasticity_index", pi), str(symbol or chart_symbol(ll, pi)))
        out.append((point, ll, pi))
    return out


def _sections(tests: Sequence[TestEntry]) -> tuple[TestSection, ...]:
    """Each test's details; a sample's first test starts a page, its other tests follow on."""
    by_sample: dict[tuple[str, str, float | None, float | None], list[TestEntry]] = {}
    for t in tests:
        by_sample.setdefault(_sample_key(t), []).append(t)
    out = []
    for i, t in enumerate(tests):
        first = i == 0 or _sample_key(tests[i - 1]) != _sample_key(t)
        section = replace(section_for(i, t), first_of_sample=first)
        organic = organic_lines(t, by_sample[_sample_key(t)])
        if organic:
            ratio = "" if t.results.get("oven_dried_ll_ratio") is not None else (
                "The liquid limit was not determined on oven-dried soil, so the organic criterion of "
                "ASTM D2487 was not applied to this group. ")
            section = replace(section, organic=organic,
                              notes=(*section.notes, ORGANIC_NOTE + ratio + IGNITION_CAUTION))
        out.append(section)
    return tuple(out)


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
        first, r = tests[0], _merge(tests)
        depth = _depth_of(first)
        w, ll, pl = (_number(r.get(k)) for k in ("water_content", "liquid_limit", "plastic_limit"))
        if depth is None or (w is None and ll is None and pl is None):
            continue
        if _nonplastic(r):
            pl = None
        by_location.setdefault(first.location_code, []).append(
            ProfileRow(first.sample_code, depth, w, ll, pl))
    return tuple(
        Figure(f"Location {loc}", depth_profile_svg(rows, title=f"{loc}: w, LL and PL against depth"),
               "Each sample at the middle of its depth range; the bar joins its plastic and liquid limits.")
        for loc, rows in by_location.items())


GRADING_PER_CHART = 6  # series beyond this stop reading apart in black and white (common practice)


def grading_charts(groups: list[list[TestEntry]]) -> tuple[Figure, ...]:
    """The grading curves, by location, at most ``GRADING_PER_CHART`` samples to a chart."""
    by_location: dict[str, list[tuple[str, list[tuple[float, float]]]]] = {}
    for tests in groups:
        pts: list[tuple[float, float]] = []
        for t in sorted(tests, key=lambda t: _rank("clay_fraction", t.method)):
            pts = grading_points(t.results)
            if pts:
                break
        if pts:
            by_location.setdefault(tests[0].location_code, []).append((tests[0].sample_code, pts))
    out = []
    for loc, curves in by_location.items():
        for i in range(0, len(curves), GRADING_PER_CHART):
            part = curves[i:i + GRADING_PER_CHART]
            out.append(Figure(f"Location {loc}", grading_chart_svg(part, title=f"{loc}: grading curves"),
                              "Samples: " + ", ".join(label for label, _ in part) + "."))
    return tuple(out)


def _activity_points(groups: list[list[TestEntry]]) -> list[tuple[ActivityPoint, float, float]]:
    """Every plastic sample with a PI and a clay fraction above zero."""
    found = []
    for tests in groups:
        r = _merge(tests)
        pi, clay = _number(r.get("plasticity_index")), _number(r.get("clay_fraction"))
        if not _nonplastic(r) and pi is not None and clay:
            found.append((tests[0], r, clay, pi))
    codes = [t.sample_code for t, _, _, _ in found]
    return [(ActivityPoint(_label(t, codes), f"{t.location_code} / {t.sample_code}",
                           show("clay_fraction", clay), reported("plasticity_index", pi),
                           show("activity", r.get("activity"))), clay, pi)
            for t, r, clay, pi in found]


def approvals(tests: Sequence[TestEntry]) -> tuple[ApprovalLine, ...]:
    return tuple(
        ApprovalLine(f"{t.location_code} / {t.sample_code}", t.method_title or t.method, t.revision,
                     t.approval.name, t.approval.role, t.approval.meaning, moment(t.approval.signed_at))
        for t in tests if t.approval is not None)


def amendments(tests: Sequence[TestEntry]) -> tuple[AmendmentLine, ...]:
    return tuple(
        AmendmentLine(f"{t.location_code} / {t.sample_code}", t.method_title or t.method, t.revision,
                      t.amendment_reason)
        for t in tests if t.amendment_reason)


def build_view(data: ReportData) -> ReportView:
    """The whole report as printable text and SVG, from the report data."""
    groups = _by_sample(data.tests)
    points = _chart_points(groups)
    interpretation: list[InterpretationEntry] = []
    for t in data.tests:
        interpretation.extend(interpretation_entries(t))
    chart = plasticity_chart_svg([(p.label, ll, pi) for p, ll, pi in points]) if points else ""
    active = _activity_points(groups)
    activity = None
    if active:
        activity = Figure("Activity chart", activity_chart_svg([(p.label, c, pi) for p, c, pi in active]),
                          "Plasticity index against clay fraction; lines of constant activity A = PI / clay "
                          "fraction at the class boundaries (Skempton 1953).")
    return ReportView(
        data=data,
        issue_date=data.issue_date.isoformat(),
        signed_at=moment(data.approver.signed_at),
        summary=tuple(summary_row(g) for g in groups),
        sections=_sections(data.tests),
        chart_points=tuple(p for p, _, _ in points),
        plasticity_chart_svg=chart,
        interpretation=tuple(interpretation),
        methods=tuple(data.methods),
        sample_count=len(groups),
        approvals=approvals(data.tests),
        amendments=amendments(data.tests),
        history=tuple(data.history),
        depth_profiles=depth_profiles(groups),
        grading_charts=grading_charts(groups),
        activity_chart=activity,
        activity_points=tuple(p for p, _, _ in active),
    )
