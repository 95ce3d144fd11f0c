"""Reading a sample schedule from a CSV or XLSX file: the spreadsheet front door of intake.

Pure of the database (DESIGN.md section 7): bytes in, a ``Schedule`` out, each refused cell
named by the row number a spreadsheet program shows (the header is row 1) and the column's
header as the file writes it. Reading takes three steps that a page may also take one by one:
``read_table`` turns bytes into rows of text, ``match_headers`` finds our fields among the
headers (a person's own mapping first), and ``read_spreadsheet`` checks every row.

Whole-file refusals (a file that is not CSV or XLSX, cannot be decoded or opened, or holds more
than ``ROWS_MAX`` rows) raise ``FileRefused``; ``read_spreadsheet`` hands them back as one
``CellError`` at row 1 in the column "file" (as the import service places its own refusals of a
whole file), except an unknown extension, which it raises: the caller picks the reader by
extension, so a file that is neither is not a spreadsheet of ours.
"""

from __future__ import annotations

import csv
import io
import math
import re
import warnings
from collections.abc import Callable, Iterable
from dataclasses import dataclass, replace
from datetime import date, datetime, time
from itertools import zip_longest
from pathlib import PurePath
from typing import Any, NamedTuple

import openpyxl

from server.engine import METHODS
from server.exchange.schedule import (
    CODE_MAX,
    DEPTH_MAX_M,
    DESCRIPTION_MAX,
    REMARKS_MAX,
    ROWS_MAX,
    CellError,
    LocationLine,
    Origin,
    SampleLine,
    Schedule,
    method_id,
)
from server.exchange.workbook import workbook_bytes
from server.workflow import vocabulary


class Column(NamedTuple):
    """A column we read: the header our template writes, and the other headers taken for it."""

    label: str
    aliases: tuple[str, ...]


# Aliases: DESIGN.md section 7, the AGS4 headings site teams copy (LOCA_*, SAMP_*), and the
# plain words of the trade (common practice).
FIELDS: dict[str, Column] = {
    "location": Column("Location", ("location", "hole", "borehole", "LOCA_ID", "location id", "hole id")),
    "location_type": Column("Location type", ("location_type", "hole type", "LOCA_TYPE", "location kind")),
    "easting": Column("Easting (m)", ("easting", "LOCA_NATE", "east")),
    "northing": Column("Northing (m)", ("northing", "LOCA_NATN", "north")),
    "ground_level": Column("Ground level (m)", ("ground_level", "ground level", "LOCA_GL", "elevation")),
    "sample": Column("Sample", ("sample", "sample id", "sample ref", "SAMP_ID", "sample reference")),
    "top": Column("Depth top (m)", ("depth_top_m", "top", "from", "depth from", "SAMP_TOP", "depth top")),
    "base": Column("Depth base (m)", ("depth_base_m", "base", "to", "depth to", "SAMP_BASE", "depth base")),
    "sample_type": Column("Sample type", ("sample_type", "type", "SAMP_TYPE")),
    "description": Column("Description", ("description", "SAMP_DESC", "soil description")),
    "remarks": Column("Remarks", ("remarks", "notes", "comments", "SAMP_REM")),
    "tests": Column("Tests", ("tests", "requested tests")),
}
REQUIRED: tuple[str, ...] = ("location", "sample", "top")

_LOCATION_FIELDS = ("location", "location_type", "easting", "northing", "ground_level")
_SAMPLE_FIELDS = ("location", "sample", "top", "base", "sample_type", "description", "remarks", "tests")
# The LocationLine attribute each location fact is stored in.
_LOCATION_ATTRIBUTES = {
    "location_type": "kind",
    "easting": "easting",
    "northing": "northing",
    "ground_level": "ground_level_m",
}

COORDINATE_MAX = 1e7  # metres: a national grid or UTM coordinate is below ten million (common practice)
GROUND_LEVEL_M = (-500.0, 9000.0)  # below the Dead Sea shore or above Everest: a slip (common practice)

_UNIT = re.compile(r"\([^)]*\)|\[[^\]]*\]")
_IGNORED = re.compile(r"[\s_]+")
_QUOTED = re.compile(r'"[^"]*"')
_NUMBER = re.compile(r"[+-]?([0-9]+(\.[0-9]*)?|\.[0-9]+)([eE][+-]?[0-9]+)?")
_TEST_SEPARATORS = re.compile(r"[;,]")
# A method title may itself hold commas ("Liquid limit, cup, multipoint"): so many pieces at most.
_TITLE_PIECES = max(len(_TEST_SEPARATORS.split(m.title)) for m in METHODS.values())


class FileRefused(ValueError):
    """A whole file refused, in plain words: nothing in it is read."""


class HeaderError(ValueError):
    """A header mapping that cannot stand (an unknown field, a header not in the file, two
    columns for one field); ``column`` is the header to show it beside."""

    def __init__(self, column: str, message: str) -> None:
        super().__init__(message)
        self.column = column


@dataclass(frozen=True)
class HeaderMatch:
    """Which column gives each of our fields (by index), the headers no field took (blank
    headers aside), and the required fields no column gives."""

    columns: dict[str, int]
    unmatched: list[str]
    missing: list[str]


@dataclass(frozen=True)
class RawTable:
    """A file's cells as stripped text: the header row, and each non-blank row below it with
    its number as a spreadsheet program shows it (the header is row 1). A row may be shorter
    or longer than the header: its missing cells are blank."""

    format: str
    headers: list[str]
    rows: list[tuple[int, list[str]]]


def normalise_header(text: str) -> str:
    """A header as compared: without case, spaces, underscores or a unit in brackets, so that
    ``Depth Top (m)``, ``depth_top`` and ``DEPTH TOP [m]`` are one header."""
    return _IGNORED.sub("", _UNIT.sub("", text)).casefold()


_BY_HEADER: dict[str, str] = {
    normalise_header(text): name
    for name, column in FIELDS.items()
    for text in (name, column.label, *column.aliases)
}


def match_headers(headers: list[str], mapping: dict[str, str] | None = None) -> HeaderMatch:
    """Our fields among a file's headers. ``mapping`` (a file header, exactly, to one of our
    field names, or "" or "ignore" to leave the column out) is what a person chose on the
    page: it wins over the aliases. Raises ``HeaderError`` for a mapping that cannot stand or
    for two columns that would both give one field."""
    mapping = mapping or {}
    _check_mapping(headers, mapping)
    mapped = {value.strip() for value in mapping.values()}
    columns: dict[str, int] = {}
    for index, header in enumerate(headers):
        name = _mapped_field(mapping[header]) if header in mapping else _alias_field(header, mapped)
        if name is None:
            continue
        if name in columns:
            raise HeaderError(
                header,
                f'columns "{headers[columns[name]]}" and "{header}" both give '
                f"{FIELDS[name].label}: map one of them to another field or ignore it",
            )
        columns[name] = index
    taken = set(columns.values())
    unmatched = [header for index, header in enumerate(headers) if header and index not in taken]
    return HeaderMatch(columns, unmatched, [name for name in REQUIRED if name not in columns])


def _check_mapping(headers: list[str], mapping: dict[str, str]) -> None:
    for header, value in mapping.items():
        if header not in headers:
            raise HeaderError(header, f'there is no column headed "{header}" in the file')
        if _mapped_field(value) is None and value.strip().lower() not in ("", "ignore"):
            raise HeaderError(
                header,
                f'"{value}" is not a field we read; map "{header}" to one of '
                f'{", ".join(FIELDS)}, or to "ignore"',
            )


def _mapped_field(value: str) -> str | None:
    name = value.strip()
    return name if name in FIELDS else None


def _alias_field(header: str, mapped: set[str]) -> str | None:
    """The field a header's aliases name, unless a person mapped another column to it."""
    name = _BY_HEADER.get(normalise_header(header))
    return None if name in mapped else name


def read_table(filename: str, data: bytes) -> RawTable:
    """A file's cells as text; the format comes from the extension. Raises ``FileRefused``."""
    kind = _format(filename)
    headers, rows = _xlsx_table(data) if kind == "xlsx" else _csv_table(data)
    return RawTable(kind, headers, rows)


def _format(filename: str) -> str:
    kind = PurePath(filename).suffix.lower().lstrip(".")
    if kind not in ("csv", "xlsx"):
        raise FileRefused(f'"{filename}" is not a CSV or XLSX file: save the schedule as .csv or .xlsx')
    return kind


def _collect(records: Iterable[list[str]]) -> tuple[list[str], list[tuple[int, list[str]]]]:
    """The header and the non-blank rows with their numbers, refusing a file longer than
    ``ROWS_MAX`` rows before reading the rest of it."""
    headers: list[str] = []
    rows: list[tuple[int, list[str]]] = []
    for number, record in enumerate(records, start=1):
        cells = [cell.strip() for cell in record]
        if number == 1:
            headers = cells
        elif any(cells):
            if len(rows) == ROWS_MAX:
                raise FileRefused(
                    f"the file has more than {ROWS_MAX:,} rows of samples: split it into "
                    f"schedules of at most {ROWS_MAX:,} rows"
                )
            rows.append((number, cells))
    return headers, rows


def _csv_table(data: bytes) -> tuple[list[str], list[tuple[int, list[str]]]]:
    text = _decode(data)
    try:
        return _collect(csv.reader(io.StringIO(text, newline=""), delimiter=_delimiter(text)))
    except csv.Error as exc:
        raise FileRefused(f"the file could not be read as CSV: {exc}") from exc


def _decode(data: bytes) -> str:
    """UTF-8, with or without the byte-order mark Excel writes, else Windows-1252: what Excel
    saves as plain "CSV" on Windows in western Europe (common practice)."""
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        try:
            text = data.decode("cp1252")
        except UnicodeDecodeError as exc:
            raise FileRefused("the file is not text in UTF-8 or Windows-1252: save it as CSV UTF-8") from exc
    if "\x00" in text:
        raise FileRefused("the file is not plain text (a UTF-16 or binary file?): save it as CSV UTF-8")
    return text


def _delimiter(text: str) -> str:
    """Comma, semicolon (Excel where the decimal sign is a comma) or tab: whichever the header
    line, quoted parts aside, holds most of; comma when it holds none."""
    header = _QUOTED.sub("", text.split("\n", 1)[0])
    return max(",;\t", key=header.count)


def _xlsx_table(data: bytes) -> tuple[list[str], list[tuple[int, list[str]]]]:
    """The first worksheet's cells. A damaged or foreign file makes openpyxl raise many kinds
    of error (zip, XML, key, value...): every one is a refusal, never a traceback. Its warnings
    (about features it drops, such as data validation) say nothing about the values."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            book = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True)
            try:
                sheet = book.worksheets[0]  # none at all is an IndexError: refused below
                sheet.reset_dimensions()  # some programs write a wrong used range; read every cell
                return _collect(
                    [_cell_text(value) for value in values] for values in sheet.iter_rows(values_only=True)
                )
            finally:
                book.close()
    except FileRefused:
        raise
    except Exception as exc:
        raise FileRefused("the file could not be opened as an XLSX workbook: save it again as .xlsx") from exc


def _cell_text(value: object) -> str:
    """A cell as the text a person typed: numbers without float noise or a trailing ".0",
    dates in ISO form (a depth that became a date is then refused, naming it)."""
    if value is None:
        return ""
    if isinstance(value, float):
        return _number_text(value)
    if isinstance(value, datetime | date | time):
        return value.isoformat()
    return str(value).strip()


def _number_text(value: float) -> str:
    """The shortest text that reads back as the same float (``repr``), without ".0"."""
    text = repr(value)
    return text[:-2] if text.endswith(".0") else text


def read_spreadsheet(filename: str, data: bytes, mapping: dict[str, str] | None = None) -> Schedule:
    """The schedule a CSV or XLSX file gives, with every refused cell in ``errors``.

    A blank base depth means the same as the top: a point sample, as site teams write a
    disturbed or jar sample (common practice).
    """
    kind = _format(filename)
    try:
        table = read_table(filename, data)
    except FileRefused as exc:
        return Schedule(kind, errors=[CellError(Origin(row=1), "file", str(exc))])
    try:
        match = match_headers(table.headers, mapping)
    except HeaderError as exc:
        return Schedule(kind, errors=[CellError(Origin(row=1), exc.column, str(exc))])
    if match.missing:
        return Schedule(kind, errors=[_missing_header(name) for name in match.missing])
    return _read_rows(table, match)


def _missing_header(name: str) -> CellError:
    column = FIELDS[name]
    texts: dict[str, str] = {}
    for text in (column.label, *column.aliases):
        texts.setdefault(normalise_header(text), f'"{text}"')
    *others, last = texts.values()
    return CellError(
        Origin(row=1),
        column.label,
        f"no column gives {column.label}: head a column {', '.join(others)} or {last}, or map one by hand",
    )


@dataclass
class _Row:
    """One data row under check: its cells by our field name, and what was refused in it."""

    number: int
    cells: list[str]
    columns: dict[str, int]
    headers: list[str]
    errors: list[CellError]

    def text(self, name: str) -> str:
        index = self.columns.get(name)
        return self.cells[index] if index is not None and index < len(self.cells) else ""

    def refuse(self, name: str, message: str) -> None:
        header = self.headers[self.columns[name]]
        self.errors.append(CellError(Origin(row=self.number), header, message))


def _read_rows(table: RawTable, match: HeaderMatch) -> Schedule:
    """Every row checked: locations in first-seen order, samples of rows without a refusal."""
    schedule = Schedule(table.format)
    locations: dict[str, LocationLine] = {}
    given_on: dict[tuple[str, str], int] = {}  # (location, field) -> the row that gave it
    samples_on: dict[str, int] = {}  # sample code -> its first row
    used = {name: table.headers[index] for name, index in match.columns.items()}
    location_columns = {name: used[name] for name in _LOCATION_FIELDS if name in used}
    sample_columns = {name: used[name] for name in _SAMPLE_FIELDS if name in used}
    for number, cells in table.rows:
        row = _Row(number, cells, match.columns, table.headers, [])
        code = _code(row, "location", "location")
        facts = _location_facts(row)
        if code is not None and not row.errors:
            _place(row, code, facts, locations, given_on, location_columns)
        sample = _sample(row, code, samples_on, sample_columns)
        if sample is not None and not row.errors:
            schedule.samples.append(sample)
        schedule.errors.extend(row.errors)
    schedule.locations = list(locations.values())
    return schedule


def _location_facts(row: _Row) -> dict[str, Any]:
    """The location values this row gives (blank cells give none), checked."""
    facts: dict[str, Any] = {
        "location_type": _word(
            row,
            "location_type",
            "location type",
            vocabulary.location_kind_id,
            vocabulary.LOCATION_KINDS,
            "BH, TP or WS",
        ),
        "easting": _coordinate(row, "easting"),
        "northing": _coordinate(row, "northing"),
        "ground_level": _ground_level(row),
    }
    return {name: value for name, value in facts.items() if value is not None}


def _place(
    row: _Row,
    code: str,
    facts: dict[str, Any],
    locations: dict[str, LocationLine],
    given_on: dict[tuple[str, str], int],
    columns: dict[str, str],
) -> None:
    """Adds a location at its first row, or fills in what earlier rows left blank; a value
    that differs from an earlier row's is refused: one location has one type and place."""
    line = locations.get(code) or LocationLine(Origin(row=row.number), code, columns=columns)
    new: dict[str, Any] = {}
    for name, value in facts.items():
        earlier = getattr(line, _LOCATION_ATTRIBUTES[name])
        if earlier is None:
            new[_LOCATION_ATTRIBUTES[name]] = value
        elif earlier != value:
            noun = _UNIT.sub("", FIELDS[name].label).strip().lower()
            row.refuse(
                name,
                f"location {code} has {noun} {_shown(earlier)} on row "
                f"{given_on[code, name]}; this row gives {_shown(value)}",
            )
    if row.errors:
        return
    given_on.update({(code, name): row.number for name in facts if _LOCATION_ATTRIBUTES[name] in new})
    locations[code] = replace(line, **new)


def _shown(value: object) -> str:
    return _number_text(value) if isinstance(value, float) else str(value)


def _sample(
    row: _Row, location: str | None, samples_on: dict[str, int], columns: dict[str, str]
) -> SampleLine | None:
    """The row's sample, checked; None when a cell of the row was refused."""
    code = _code(row, "sample", "sample")
    if code is not None:
        if code in samples_on:
            row.refuse("sample", f"sample {code} is already on row {samples_on[code]}")
        samples_on.setdefault(code, row.number)
    top, base = _depths(row)
    sample_type = _word(
        row, "sample_type", "sample type", vocabulary.sample_type_id, vocabulary.SAMPLE_TYPES, "U, B or D"
    )
    description = _free_text(row, "description", DESCRIPTION_MAX)
    remarks = _free_text(row, "remarks", REMARKS_MAX)
    tests = _tests(row)
    if row.errors or location is None or code is None or top is None or base is None:
        return None
    return SampleLine(
        Origin(row=row.number), location, code, top, base, sample_type, description, remarks, tests, columns
    )


def _code(row: _Row, name: str, noun: str) -> str | None:
    text = row.text(name)
    if not text:
        row.refuse(name, f"the {noun} is blank: every row needs its {noun} code")
        return None
    if len(text) > CODE_MAX:
        row.refuse(name, f'{noun} "{text}" is {len(text)} characters long; a code has at most {CODE_MAX}')
        return None
    return text


def _depths(row: _Row) -> tuple[float | None, float | None]:
    """Top and base in metres; a blank base is the top (a point sample)."""
    top = _depth(row, "top")
    if not row.text("top"):
        row.refuse("top", "the top depth is blank: every sample needs one, in metres")
    base = _depth(row, "base") if row.text("base") else top
    if top is not None and base is not None and base < top:
        row.refuse("base", f"base {_number_text(base)} m is above top {_number_text(top)} m")
        return top, None
    return top, base


def _depth(row: _Row, name: str) -> float | None:
    value = _number(row, name)
    if value is None:
        return None
    if value < 0:
        row.refuse(
            name,
            f"{name} {_number_text(value)} m is negative: depths are measured down from "
            "ground level, 0 m or more",
        )
        return None
    if value > DEPTH_MAX_M:
        row.refuse(
            name,
            f"{name} {_number_text(value)} m is deeper than {_number_text(DEPTH_MAX_M)} m: "
            "a typing or unit slip?",
        )
        return None
    return value


def _coordinate(row: _Row, name: str) -> float | None:
    value = _number(row, name)
    if value is not None and abs(value) >= COORDINATE_MAX:
        row.refuse(
            name,
            f"{name} {_number_text(value)} is out of range: a grid coordinate in metres "
            f"is less than {COORDINATE_MAX:,.0f}",
        )
        return None
    return value


def _ground_level(row: _Row) -> float | None:
    value = _number(row, "ground_level")
    low, high = GROUND_LEVEL_M
    if value is not None and not low <= value <= high:
        row.refuse(
            "ground_level",
            f"ground level {_number_text(value)} m is outside "
            f"{_number_text(low)} m to {_number_text(high)} m",
        )
        return None
    return value


def _number(row: _Row, name: str) -> float | None:
    """A finite number, a decimal comma accepted ("1,50", as continental Excel writes it);
    a blank cell gives None without a refusal."""
    text = row.text(name)
    if not text:
        return None
    written = text.replace(",", ".") if text.count(",") == 1 and "." not in text else text
    value = float(written) if _NUMBER.fullmatch(written) else math.nan
    if not math.isfinite(value):
        row.refuse(name, f'"{text}" is not a number')
        return None
    return value


def _word(
    row: _Row,
    name: str,
    noun: str,
    lookup: Callable[[str], str | None],
    words: dict[str, str],
    abbreviations: str,
) -> str | None:
    """A vocabulary id (blank: not given); an unknown word is refused, listing ours."""
    text = row.text(name)
    if not text:
        return None
    found = lookup(text)
    if found is None:
        row.refuse(
            name,
            f'"{text}" is not a {noun} we know; use one of: {", ".join(words)} '
            f"(or an AGS4 abbreviation such as {abbreviations})",
        )
    return found


def _free_text(row: _Row, name: str, limit: int) -> str:
    text = row.text(name)
    if len(text) > limit:
        row.refuse(name, f"the {name} is {len(text):,} characters long; at most {limit:,} fit")
        return ""
    return text


def _tests(row: _Row) -> tuple[str, ...]:
    """Method ids or display names separated by ";" or ","; repeats folded, unknown ones refused."""
    pieces = [piece.strip() for piece in _TEST_SEPARATORS.split(row.text("tests"))]
    found: list[str] = []
    unknown: list[str] = []
    start = 0
    while start < len(pieces):
        method, end = _longest_method(pieces, start)
        if method is not None:
            found.append(method)
        elif pieces[start]:
            unknown.append(pieces[start])
        start = end
    if unknown:
        names = ", ".join(f'"{piece}"' for piece in unknown)
        row.refuse("tests", f"unknown test {names}: use method ids ({', '.join(METHODS)}) or their names")
    return tuple(dict.fromkeys(found))


def _longest_method(pieces: list[str], start: int) -> tuple[str | None, int]:
    """The method the most pieces from ``start`` name together, and where the next begins."""
    for end in range(min(len(pieces), start + _TITLE_PIECES), start, -1):
        method = method_id(", ".join(pieces[start:end]))
        if method is not None:
            return method, end
    return None, start + 1


# Two rows of an obviously fictional site, one with a blank base (a point sample).
_EXAMPLE_ROWS: tuple[tuple[str | float | None, ...], ...] = (
    (
        "EXAMPLE-BH1",
        "Borehole",
        400000,
        300000,
        52.4,
        "EXAMPLE-BH1-U1",
        1.2,
        1.65,
        "U100",
        "Firm brown sandy CLAY",
        "Example only: a fictional site, delete this row",
        "water-content; atterberg",
    ),
    (
        "EXAMPLE-TP1",
        "Trial pit",
        400050.5,
        300020,
        51.9,
        "EXAMPLE-TP1-B1",
        0.5,
        None,
        "bulk",
        "Brown clayey sandy GRAVEL",
        "Example only: a fictional site, delete this row",
        "Grading by sieving",
    ),
)


def template_csv() -> bytes:
    """The schedule template as CSV, in UTF-8 with the byte-order mark Excel needs to read
    it as UTF-8 (common practice)."""
    out = io.StringIO(newline="")
    writer = csv.writer(out)
    writer.writerow(column.label for column in FIELDS.values())
    for values in _EXAMPLE_ROWS:
        writer.writerow("" if value is None else _shown(value) for value in values)
    return out.getvalue().encode("utf-8-sig")


def template_xlsx() -> bytes:
    """The schedule template as XLSX, its numbers as numbers, with a second sheet listing the
    words the schedule accepts."""
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Schedule"
    sheet.append([column.label for column in FIELDS.values()])
    for values in _EXAMPLE_ROWS:
        sheet.append(list(values))
    allowed = book.create_sheet("Allowed values")
    for line in _allowed_values():
        allowed.append(line)
    return workbook_bytes(book)  # the same template is the same bytes


def _allowed_values() -> list[list[str | None]]:
    """Location types, sample types and tests side by side, each id with its meaning."""
    lists = (
        ("Location type", vocabulary.LOCATION_KINDS),
        ("Sample type", vocabulary.SAMPLE_TYPES),
        ("Test", {method.id: method.title for method in METHODS.values()}),
    )
    blocks = [[(heading, "Meaning"), *words.items()] for heading, words in lists]
    return [
        [cell for pair in line for cell in (*pair, None)]
        for line in zip_longest(*blocks, fillvalue=(None, None))
    ]

