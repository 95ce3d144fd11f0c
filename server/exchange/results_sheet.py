"""A job's approved results as spreadsheets, for the client's own database (DESIGN.md section 7).

Two files, one content:

- CSV: the summary, one row per sample with the summary columns of the report. UTF-8 with the
  byte-order mark, so that Excel reads it as UTF-8 (common practice).
- XLSX: a sheet "Summary" (the CSV's rows) and one sheet per method present, named by the
  method id ("water-content", "atterberg", ...), listing each test's readings as entered and its
  results, one value to a row (path, unit, value), so that tests with different numbers of
  trials or sieves share one set of columns.

What a reader needs beside a number is how the report printed it: every result comes as the
report's text ("40", "NP", "—": rounded by ``server.engine.rounding``, through the report's own
``server.reports.summary``, so the two can never disagree) beside the full-precision value as
stored. In the XLSX the full-precision values are numbers, the reported values text (a "20.0"
keeps its digit; "NP" is no number). openpyxl writes a number with 16 significant digits
("%.16g"), one fewer than a double may need: a value read back from the XLSX can differ from the
stored one in its last binary digit; the CSV carries the shortest text that gives the stored
value back exactly.

Only approved test revisions of samples that are not withdrawn are exported: what a report may
carry. Opinion and interpretation (the correlations of ``results["interpretation"]``) is left
out: the report keeps it in its own marked section, never among measured results (DESIGN.md
section 5), and a spreadsheet row cannot carry that mark.

Deterministic: the same records give the same bytes. Rows are ordered here, not by the
database (collations differ between SQLite and PostgreSQL, and PostgreSQL's JSONB does not keep
the order of keys), and the workbook's times are the newest approval it carries, a time of the
record rather than of the clock.
"""

from __future__ import annotations

import csv
import io
import re
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

import openpyxl
from openpyxl.worksheet.worksheet import Worksheet
from sqlmodel import Session, select

from server.db.queries import TestRow, current_tests, users_by_id
from server.db.tables import Job
from server.engine import METHODS
from server.engine.readings import as_entered, as_number
from server.exchange.workbook import FIXED_TIME, workbook_bytes
from server.reports.data import TestEntry
from server.reports.formatting import show
from server.reports.summary import SummaryRow, sample_results, shown_result, summary_row
from server.services.errors import NotFound, invalid

Cell = str | int | float | bool | None
"""One spreadsheet cell: text, a number, a truth value, or empty."""

CSV_MEDIA_TYPE = "text/csv; charset=utf-8"
XLSX_MEDIA_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
SUMMARY_SHEET = "Summary"
FULL = " full precision"  # the header of a full-precision column: its reported column's, and this

APPROVED = "approved"
# Left out of the spreadsheets: opinion, printed by the report in its own marked section.
_LEFT_OUT = frozenset({"interpretation"})


# -- the records -------------------------------------------------------------------------------


@dataclass(frozen=True)
class ApprovedTest:
    """One approved test revision as the report would carry it, with who approved it and when."""

    __test__ = False  # a record, not a pytest test class

    test_id: int
    entry: TestEntry
    approved_at: datetime | None
    approved_by: str


@dataclass(frozen=True)
class ResultsExport:
    """A job's approved results: its samples in report order, each with its approved tests."""

    job_code: str
    job_title: str
    samples: tuple[tuple[ApprovedTest, ...], ...]
    stamped: datetime  # the newest approval: the time the workbook carries

    @property
    def tests(self) -> Iterator[ApprovedTest]:
        for tests in self.samples:
            yield from tests


def job_numbered(session: Session, code: str) -> Job:
    """The job with this number (the CLI names jobs by number, the pages by id)."""
    job = session.exec(select(Job).where(Job.code == code)).first()
    if job is None:
        raise NotFound(f"there is no job numbered {code!r}")
    return job


def load_results(session: Session, job_id: int) -> ResultsExport:
    """The job's approved results, refused (``NotFound``, or ``Invalid`` on the field "tests")
    when the job does not exist or has no approved test of a sample still in the job."""
    job = session.get(Job, job_id)
    if job is None:
        raise NotFound(f"job {job_id} does not exist")
    rows = [
        r
        for r in current_tests(session, job_id)
        if r.test.status == APPROVED and r.sample.withdrawn_at is None
    ]
    if not rows:
        raise invalid(
            "tests",
            f"job {job.code} has no approved test yet (withdrawn samples are left out): "
            "there are no results to export",
        )
    rows.sort(key=_report_order)
    people = users_by_id(session, [r.test.approved_by_id for r in rows])
    samples: list[list[ApprovedTest]] = []
    last_sample: int | None = None
    for row in rows:
        if row.sample.id != last_sample:
            samples.append([])
            last_sample = row.sample.id
        signer = people.get(row.test.approved_by_id or 0)
        samples[-1].append(
            ApprovedTest(
                row.test.id or 0,
                _entry(row),
                row.test.approved_at,
                signer.full_name if signer else "",
            )
        )
    times = [t.approved_at for tests in samples for t in tests if t.approved_at is not None]
    return ResultsExport(
        job.code,
        job.title,
        tuple(tuple(tests) for tests in samples),
        max(times, key=_utc) if times else FIXED_TIME,
    )


def _report_order(row: TestRow) -> tuple[str, float, str, int, str, int]:
    """Location, depth, sample, method: the report's order, with ties broken by id."""
    return (
        row.location.code,
        row.sample.depth_from_m,
        row.sample.code,
        row.sample.id or 0,
        row.test.method,
        row.test.id or 0,
    )


def _entry(row: TestRow) -> TestEntry:
    method = METHODS.get(row.test.method)
    return TestEntry(
        sample_code=row.sample.code,
        location_code=row.location.code,
        depth_from_m=row.sample.depth_from_m,
        depth_to_m=row.sample.depth_to_m,
        sample_type=row.sample.sample_type,
        description=row.sample.description,
        method=row.test.method,
        method_title=method.title if method else row.test.method,
        results=row.test.results or {},
        readings=row.test.readings or {},
        flags=row.test.flags or [],
        revision=row.test.revision,
    )


def _utc(when: datetime) -> datetime:
    return when.astimezone(UTC) if when.tzinfo else when.replace(tzinfo=UTC)


# -- the summary: one row per sample -----------------------------------------------------------


@dataclass(frozen=True)
class SummaryColumn:
    """A result column of the summary: the report's text, and (for a number) the value beside it."""

    key: str
    label: str
    unit: str
    numeric: bool
    text: Callable[[SummaryRow, Mapping[str, Any]], str]

    @property
    def header(self) -> str:
        return f"{self.label} ({self.unit})" if self.unit else self.label


def _row_text(name: str) -> Callable[[SummaryRow, Mapping[str, Any]], str]:
    def text(row: SummaryRow, results: Mapping[str, Any]) -> str:
        return str(getattr(row, name))

    return text


def _group_index_text(row: SummaryRow, results: Mapping[str, Any]) -> str:
    return show("group_index", results.get("group_index"))


def _aashto_group_text(row: SummaryRow, results: Mapping[str, Any]) -> str:
    return show("aashto_group", results.get("aashto_group"))


# The report's summary columns in its order. LL, PL and PI are water contents in % (the report
# prints them without the sign, as ASTM D4318 reports them; a database wants the unit). The
# report's one AASHTO column, "A-7-6 (20)", is two here: the group, and the group index with its
# full-precision value.
SUMMARY_COLUMNS: tuple[SummaryColumn, ...] = (
    SummaryColumn("water_content", "Water content w", "%", True, _row_text("water_content")),
    SummaryColumn("liquid_limit", "Liquid limit LL", "%", True, _row_text("liquid_limit")),
    SummaryColumn("plastic_limit", "Plastic limit PL", "%", True, _row_text("plastic_limit")),
    SummaryColumn("plasticity_index", "Plasticity index PI", "%", True, _row_text("plasticity_index")),
    SummaryColumn("liquidity_index", "Liquidity index LI", "", True, _row_text("liquidity_index")),
    SummaryColumn("consistency_index", "Consistency index CI", "", True, _row_text("consistency_index")),
    SummaryColumn("activity", "Activity A", "", True, _row_text("activity")),
    SummaryColumn("clay_fraction", "Clay fraction < 2 µm", "%", True, _row_text("clay_fraction")),
    SummaryColumn("sensitivity", "Sensitivity St", "", True, _row_text("sensitivity")),
    SummaryColumn("uscs_symbol", "USCS group symbol", "", False, _row_text("uscs_symbol")),
    SummaryColumn("uscs_name", "USCS group name", "", False, _row_text("uscs_name")),
    SummaryColumn("aashto_group", "AASHTO group", "", False, _aashto_group_text),
    SummaryColumn("group_index", "AASHTO group index GI", "", True, _group_index_text),
)
# The sample's identity, headed as the schedule import reads its columns (spreadsheet.FIELDS),
# so that a summary can be read back as a schedule.
IDENTITY_HEADERS: tuple[str, ...] = (
    "Job",
    "Location",
    "Sample",
    "Depth top (m)",
    "Depth base (m)",
    "Sample type",
    "Description",
)


def summary_headers() -> list[str]:
    headers = list(IDENTITY_HEADERS)
    for column in SUMMARY_COLUMNS:
        headers.append(column.header)
        if column.numeric:
            headers.append(column.header + FULL)
    return headers


def summary_rows(export: ResultsExport) -> list[list[Cell]]:
    """One row per sample: identity, then each result as reported and (numbers) at full precision."""
    out: list[list[Cell]] = []
    for tests in export.samples:
        entries = [t.entry for t in tests]
        first = entries[0]
        row = summary_row(entries)
        results = sample_results(entries)
        cells: list[Cell] = [
            export.job_code,
            first.location_code,
            first.sample_code,
            first.depth_from_m,
            first.depth_to_m,
            first.sample_type,
            first.description,
        ]
        for column in SUMMARY_COLUMNS:
            cells.append(column.text(row, results))
            if column.numeric:
                cells.append(_full(results.get(column.key)))
        out.append(cells)
    return out


def _full(value: Any) -> Cell:
    """A stored value as a cell: numbers and truth values as they are, anything else empty."""
    if isinstance(value, bool | int | float):
        return value
    return None


# -- one sheet per method: each test's readings and results, one value to a row ---------------

METHOD_HEADERS: tuple[str, ...] = (
    "Location",
    "Sample",
    "Depth top (m)",
    "Depth base (m)",
    "Test",
    "Revision",
    "Approved (UTC)",
    "Approved by",
    "Part",
    "Path",
    "Unit",
    "As entered or as reported",
    "Full precision",
)

# Keys listed first, in the order the bench sheet and the report show them; the rest follow in
# alphabetical order (stored JSON keys have no order we can rely on).
_KEY_ORDER: tuple[str, ...] = (
    "method",
    "cone",
    "container",
    "blows",
    "penetration_mm",
    "tare_g",
    "wet_tare_g",
    "dry_tare_g",
    "water_content",
    "liquid_limit",
    "plastic_limit",
    "plasticity_index",
    "flow_index",
    "nonplastic",
    "liquidity_index",
    "consistency_index",
    "activity",
    "clay_fraction",
    "sensitivity",
    "undrained_strength_kpa",
    "uscs_symbol",
    "uscs_name",
    "aashto_group",
    "group_index",
)
_RANK = {key: i for i, key in enumerate(_KEY_ORDER)}

_PERCENT = frozenset(
    {
        "water_content",
        "liquid_limit",
        "plastic_limit",
        "plasticity_index",
        "clay_fraction",
        "gravel",
        "sand",
        "fines",
        "silt",
        "clay",
        "water_content_determinations",
        "plastic_limit_determinations",
        "a_line_pi",
        "u_line_pi",
        "linear_shrinkage",
        "organic_content",
        "degree_of_saturation",
        "optimum_water_content",
    }
)
_UNIT_SUFFIXES: tuple[tuple[str, str], ...] = (
    ("_pct", "%"),
    ("_kpa", "kPa"),
    ("_nm", "N·m"),
    ("_mg_m3", "Mg/m³"),
    ("_cm3", "cm³"),
    ("_mm", "mm"),
    ("_deg", "°"),
    ("_min", "min"),
    ("_g", "g"),
    ("_m", "m"),
    ("_n", "N"),
    ("_c", "°C"),
)
_UNCERTAINTY = frozenset({"u", "U"})  # a standard or expanded uncertainty: the unit of its quantity


@dataclass(frozen=True)
class Line:
    """One value of one test: a reading (as entered) or a result (as reported, and in full)."""

    part: str  # "reading", "result" or "flag"
    path: str  # the dotted path of the value in the test's JSON, as the bench names fields
    unit: str
    shown: str
    full: Cell


def _ordered(obj: Mapping[str, Any]) -> list[tuple[str, Any]]:
    return sorted(((str(k), v) for k, v in obj.items()), key=lambda kv: (_RANK.get(kv[0], len(_RANK)), kv[0]))


def _leaves(node: Any, path: tuple[str | int, ...] = ()) -> Iterator[tuple[tuple[str | int, ...], Any]]:
    """Every value that is not an object or a list, with its path (list items by index from 0)."""
    if isinstance(node, Mapping):
        for key, value in _ordered(node):
            yield from _leaves(value, (*path, key))
    elif isinstance(node, list | tuple):
        for index, value in enumerate(node):
            yield from _leaves(value, (*path, index))
    else:
        yield path, node


def _names(path: tuple[str | int, ...]) -> list[str]:
    return [p for p in path if isinstance(p, str)]


def unit_of(path: tuple[str | int, ...]) -> str:
    """The unit of a value, from the name it is stored under (DESIGN.md section 3 and 8 units)."""
    names = _names(path)
    if not names:
        return ""
    name = names[-1]
    if name in _UNCERTAINTY and len(names) > 1:
        name = names[-2]
    if name in _PERCENT or name.startswith("percent_"):
        return "%"
    if name == "minutes":
        return "min"
    for suffix, unit in _UNIT_SUFFIXES:
        if name.endswith(suffix) and len(name) > len(suffix):
            return unit
    return ""


def _dotted(path: tuple[str | int, ...]) -> str:
    return ".".join(str(p) for p in path)


def reading_lines(readings: Mapping[str, Any]) -> list[Line]:
    """The readings as entered ("44.20" stays "44.20"), with the number each names; blanks
    (nothing entered) are left out."""
    out = []
    for path, value in _leaves(readings):
        if value is None or value == "":
            continue
        out.append(Line("reading", _dotted(path), unit_of(path), as_entered(value), as_number(value)))
    return out


def _result_text(path: tuple[str | int, ...], value: Any, results: Mapping[str, Any]) -> str:
    """A result as the report prints it: a test's own results through the report's rule (NP for
    a limit of a non-plastic soil), a value inside a curve or fit by the rule of its name, an
    uncertainty by the rule of its quantity, a coverage factor k as "2"."""
    names = _names(path)
    if len(path) == 1:
        return shown_result(names[0], results)
    name = names[-1] if names else ""
    if name in _UNCERTAINTY and len(names) > 1:
        name = names[-2]
    if name == "k" and isinstance(value, int | float) and not isinstance(value, bool):
        return f"{value:g}"
    return show(name, value)


def result_lines(results: Mapping[str, Any]) -> list[Line]:
    """Every stored result but the interpretation: as the report prints it, and in full."""
    out = []
    for path, value in _leaves({k: v for k, v in results.items() if k not in _LEFT_OUT}):
        shown = _result_text(path, value, results)
        out.append(Line("result", _dotted(path), unit_of(path), shown, _full(value)))
    return out


def _flag_text(flag: Mapping[str, Any]) -> str:
    return f"{flag.get('severity', 'warning')}: {flag.get('message', '')}"


def flag_lines(flags: Sequence[Mapping[str, Any]]) -> list[Line]:
    """The quality remarks the approval stood by, as the report prints them beside the test."""
    return [Line("flag", str(f.get("code", "")), "", _flag_text(f), None) for f in flags]


def _moment(when: datetime | None) -> str:
    return "" if when is None else _utc(when).strftime("%Y-%m-%d %H:%M:%S")


def method_rows(export: ResultsExport, method: str) -> list[list[Cell]]:
    """The rows of one method's sheet: for each of its tests, the readings, the results, the flags."""
    out: list[list[Cell]] = []
    for test in export.tests:
        e = test.entry
        if e.method != method:
            continue
        head: list[Cell] = [
            e.location_code,
            e.sample_code,
            e.depth_from_m,
            e.depth_to_m,
            test.test_id,
            e.revision,
            _moment(test.approved_at),
            test.approved_by,
        ]
        for line in [*reading_lines(e.readings), *result_lines(e.results), *flag_lines(e.flags)]:
            out.append([*head, line.part, line.path, line.unit, line.shown, line.full])
    return out


def methods_present(export: ResultsExport) -> list[str]:
    """The methods of the exported tests: in the order of the method list, unknown ones last."""
    present = {t.entry.method for t in export.tests}
    known = [m for m in METHODS if m in present]
    return known + sorted(present - set(known))


# -- the files ---------------------------------------------------------------------------------

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _csv_text(cell: Cell) -> str:
    """A cell as CSV text. Numbers by the shortest text that gives them back; free text that a
    spreadsheet program would take for a formula gets a leading apostrophe (OWASP, "CSV
    Injection"), a number's minus sign does not."""
    if cell is None:
        return ""
    if isinstance(cell, str):
        if cell.startswith(_FORMULA_START) and as_number(cell) is None:
            return "'" + cell
        return cell
    return as_entered(cell)


def results_csv(export: ResultsExport) -> bytes:
    """The summary as CSV, UTF-8 with the byte-order mark, CRLF line ends (RFC 4180)."""
    out = io.StringIO(newline="")
    writer = csv.writer(out)
    writer.writerow(summary_headers())
    for row in summary_rows(export):
        writer.writerow(_csv_text(cell) for cell in row)
    return out.getvalue().encode("utf-8-sig")


def _write(sheet: Worksheet, headers: Sequence[str], rows: Sequence[Sequence[Cell]]) -> None:
    """Header and rows; text is always text (openpyxl would store "=..." as a formula)."""
    sheet.append(list(headers))
    for row in rows:
        sheet.append(list(row))
        for cell in sheet[sheet.max_row]:
            if isinstance(cell.value, str):
                cell.data_type = "s"
    sheet.freeze_panes = "A2"
    sheet.auto_filter.ref = sheet.dimensions


_SHEET_NAME_REFUSED = re.compile(r"[\[\]:*?/\\]")


def _sheet_name(method: str) -> str:
    """Excel refuses some characters in a sheet name and more than 31 of them."""
    return _SHEET_NAME_REFUSED.sub("-", method)[:31] or "method"


def results_xlsx(export: ResultsExport) -> bytes:
    """Sheet "Summary" (the CSV's rows, numbers as numbers), then one sheet per method."""
    book = openpyxl.Workbook()
    summary = book.active
    assert isinstance(summary, Worksheet)
    summary.title = SUMMARY_SHEET
    _write(summary, summary_headers(), summary_rows(export))
    for method in methods_present(export):
        _write(book.create_sheet(_sheet_name(method)), METHOD_HEADERS, method_rows(export, method))
    book.properties.creator = "Claybench"
    book.properties.title = f"{export.job_code}: approved results"
    return workbook_bytes(book, export.stamped)


_UNSAFE_IN_NAME = re.compile(r"[^A-Za-z0-9._-]+")


def safe_file_name(code: str, what: str, extension: str) -> str:
    """A download's file name from a job or report number, with only characters every system
    and a Content-Disposition header take as they are."""
    stem = _UNSAFE_IN_NAME.sub("_", code).strip("._") or "job"
    return f"{stem}-{what}.{extension}"


def file_name(export: ResultsExport, extension: str) -> str:
    """The file name of the job's results in a spreadsheet format."""
    return safe_file_name(export.job_code, "results", extension)
