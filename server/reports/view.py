"""The view a template shows of one report: ready-to-print text and SVG (pure: no I/O).

``build_view`` turns a ``ReportData`` (server/reports/data.py) into a ``ReportView``, so the
template never computes. Values are formatted by server/reports/formatting.py and ids named by
server/reports/names.py, as on the pages. Measured results and interpretation are kept apart:
correlations go to their own list, printed under "Opinion and interpretation" (DESIGN.md
section 5).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace

from server.reports.charts import activity_chart_svg, plasticity_chart_svg
from server.reports.data import MethodNote, ReportData, RevisionNote, TestEntry
from server.reports.figures import (
    ActivityPoint,
    ChartPoint,
    Figure,
    activity_points,
    chart_points,
    curve,
    depth_profiles,
    grading_charts,
)
from server.reports.formatting import DASH, depth, finite, humanise, moment, show, typed, typeset
from server.reports.names import flag_name, method_name
from server.reports.quantities import (
    ResultLine,
    Table,
    linked_notes,
    particle_density_used,
    plasticity_basis_note,
    readings_tables,
    result_lines,
    uscs_note,
)
from server.reports.summary import SummaryRow, by_sample, sample_key, summary_row


@dataclass(frozen=True)
class FlagLine:
    severity: str
    code: str  # the engine's id, kept for the API and exports; the PDF prints the name
    message: str
    name: str = ""


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


def _depth_range(t: TestEntry) -> str:
    """'1.20–1.65 m', or one depth when only the top is known, or '—'."""
    if t.depth_from_m is None and t.depth_to_m is None:
        return DASH
    a = DASH if t.depth_from_m is None else depth(t.depth_from_m)
    if t.depth_to_m is None:
        return f"{a} m"
    return f"{a}–{depth(t.depth_to_m)} m"


def _flags(t: TestEntry) -> tuple[FlagLine, ...]:
    out = []
    for f in t.flags:
        sev = str(f.get("severity", "warning"))
        code = str(f.get("code", ""))
        out.append(
            FlagLine(
                "Error" if sev == "error" else "Warning", code, str(f.get("message", "")), flag_name(code)
            )
        )
    return tuple(out)


COARSER_NOTE = (
    "* Given as the method reports it (its reporting rule rounds coarser than the last figure of the "
    "expanded uncertainty); the uncertainty U is given to two significant figures, at a coverage "
    "factor k of about 95 % (GUM, JCGM 100:2008, 6.2 and 7.2.6)."
)


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
    rho_s = particle_density_used(r)
    if t.method == "linear-shrinkage" and rd.get("condition"):
        lines.append(ResultLine("Condition of the bar after drying", typed(rd.get("condition"))))
        notes.append(
            "The bar's condition is recorded; it does not change the calculation, "
            "LS = (1 − oven-dry length / mould length) × 100 (BS 1377-2:1990 cl. 6.5)."
        )
    elif t.method == "loss-on-ignition" and rd.get("furnace_c") not in (None, ""):
        lines.append(ResultLine("Furnace temperature", typed(rd.get("furnace_c")), "°C"))
        notes.append(
            "Organic content is the mass lost on ignition in % of the oven-dried mass, the mean "
            "of the determinations. " + IGNITION_CAUTION
        )
    elif t.method == "particle-density":
        count = len(r.get("particle_density_determinations") or [])
        notes.append(
            f"Mean of {count} determination{'' if count == 1 else 's'}, each at its water "
            "temperature with the density of water at that temperature; the specific gravity is "
            "referred to water at 20 °C (ASTM D854-14)."
        )
    elif t.method == "density":
        if rho_s is not None:
            lines.append(ResultLine(f"Particle density used ({rho_s[1]})", rho_s[0], "Mg/m³"))
            notes.append(
                "Bulk density is the mean of the specimens' densities. Void ratio, porosity (as a "
                f"fraction) and degree of saturation are from the particle density {rho_s[1]}, "
                "with ρw = 1.00 Mg/m³."
            )
        else:
            notes.append(
                "Bulk density is the mean of the specimens' densities. No particle density was "
                "given: void ratio, porosity and degree of saturation are not reported."
            )
    elif t.method == "compaction":
        effort = rd.get("effort")
        if effort:
            lines.append(ResultLine("Compactive effort", EFFORTS.get(str(effort), typed(effort))))
        if r.get("maximum_dry_density_mg_m3") is None:
            notes.append(
                "No maximum dry density or optimum water content is given: the points do not "
                "bracket a peak (see the quality remarks)."
            )
    basis = plasticity_basis_note(r)
    notes += [*linked_notes(r), *([basis] if basis else [])]
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
        cells = [
            str(i + 1),
            show("water_content", p.get("water_content")),
            show("dry_density_mg_m3", p.get("dry_density_mg_m3")),
        ]
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
        oc = finite(other.results.get("organic_content"))
        if other.method == "loss-on-ignition" and oc is not None:
            furnace = other.readings.get("furnace_c")
            at = f" at {typed(furnace)} °C" if furnace not in (None, "") else ""
            out.append(
                ResultLine(
                    f"Organic content by loss on ignition{at} (its own test)",
                    show("organic_content", oc),
                    "%",
                )
            )
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
    svg, caption = curve(t.results, t.readings)
    lines, notes = _method_details(t)
    results += lines
    uscs = uscs_note(
        t.results, [str(f.get("message", "")) for f in t.flags if f.get("code") == "uscs-name-not-given"]
    )
    notes = (*notes, *([uscs] if uscs else []), *([COARSER_NOTE] if any(r.coarser for r in results) else []))
    title = t.method_title or method_name(t.method)
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
        approval=(
            f"{t.approval.name}, {t.approval.role}, {moment(t.approval.signed_at)}"
            if t.approval is not None
            else ""
        ),
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
        out.append(
            InterpretationEntry(
                sample=f"{t.location_code} / {t.sample_code}",
                quantity=typeset(label),
                value=show(str(name), e.get("value")),
                unit=str(e.get("unit") or ""),
                source=typeset(str(e.get("source") or DASH)),
                note=typeset(str(e.get("note") or "")),
            )
        )
    return out


def _sections(tests: Sequence[TestEntry]) -> tuple[TestSection, ...]:
    """Each test's details; a sample's first test starts a page, its other tests follow on."""
    by_sample: dict[tuple[str, str, float | None, float | None], list[TestEntry]] = {}
    for t in tests:
        by_sample.setdefault(sample_key(t), []).append(t)
    out = []
    for i, t in enumerate(tests):
        first = i == 0 or sample_key(tests[i - 1]) != sample_key(t)
        section = replace(section_for(i, t), first_of_sample=first)
        organic = organic_lines(t, by_sample[sample_key(t)])
        if organic:
            ratio = (
                ""
                if t.results.get("oven_dried_ll_ratio") is not None
                else (
                    "The liquid limit was not determined on oven-dried soil, so the organic criterion of "
                    "ASTM D2487 was not applied to this group. "
                )
            )
            section = replace(
                section, organic=organic, notes=(*section.notes, ORGANIC_NOTE + ratio + IGNITION_CAUTION)
            )
        out.append(section)
    return tuple(out)


def approvals(tests: Sequence[TestEntry]) -> tuple[ApprovalLine, ...]:
    return tuple(
        ApprovalLine(
            f"{t.location_code} / {t.sample_code}",
            t.method_title or method_name(t.method),
            t.revision,
            t.approval.name,
            t.approval.role,
            t.approval.meaning,
            moment(t.approval.signed_at),
        )
        for t in tests
        if t.approval is not None
    )


def amendments(tests: Sequence[TestEntry]) -> tuple[AmendmentLine, ...]:
    return tuple(
        AmendmentLine(
            f"{t.location_code} / {t.sample_code}",
            t.method_title or method_name(t.method),
            t.revision,
            t.amendment_reason,
        )
        for t in tests
        if t.amendment_reason
    )


def build_view(data: ReportData) -> ReportView:
    """The whole report as printable text and SVG, from the report data."""
    groups = by_sample(data.tests)
    points = chart_points(groups)
    interpretation: list[InterpretationEntry] = []
    for t in data.tests:
        interpretation.extend(interpretation_entries(t))
    chart = plasticity_chart_svg([(p.label, ll, pi) for p, ll, pi in points]) if points else ""
    active = activity_points(groups)
    activity = None
    if active:
        activity = Figure(
            "Activity chart",
            activity_chart_svg([(p.label, c, pi) for p, c, pi in active]),
            "Plasticity index against clay fraction; lines of constant activity A = PI / clay "
            "fraction at the class boundaries (Skempton 1953).",
        )
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
