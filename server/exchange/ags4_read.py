"""Reading a job's sample schedule from an AGS4 file: PROJ (the job), LOCA (its locations) and
SAMP (its samples).

The file is first checked by python-ags4, the AGS association's own library, against the
dictionary its TRAN_AGS names: a file that breaks an AGS Format rule is refused with the
checker's words, the rule they belong to, and the group, line and heading they concern, and
nothing of it is read (DESIGN.md section 7). Only a file the checker passes is read; its values
then get the same checks as a spreadsheet's (schedule.py), each refusal placed at its group,
file line and heading, the line counted here as the checker counts it. The ranges of
coordinates and ground level are the spreadsheet reader's, so both front doors agree.

Pure: bytes in, a ``Schedule`` out. The checker reads a path, so the bytes are written to a
temporary folder of their own (so that Rule 20's look for a FILE folder finds nothing foreign).
"""

from __future__ import annotations

import csv
import io
import logging
import numbers
import re
import tempfile
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from python_ags4 import AGS4

from server.exchange.schedule import (
    CODE_MAX,
    DEPTH_MAX_M,
    DESCRIPTION_MAX,
    REMARKS_MAX,
    ROWS_MAX,
    CellError,
    LocationLine,
    Origin,
    ProjectInfo,
    SampleLine,
    Schedule,
)
from server.exchange.spreadsheet import COORDINATE_MAX, GROUND_LEVEL_M
from server.workflow.vocabulary import LOCATION_KINDS, SAMPLE_TYPES, location_kind_id, sample_type_id

FORMAT = "ags4"

# python-ags4 logs what it finds (and a traceback for a file it cannot parse) on its own
# loggers; without a handler Python prints those on stderr beside our own output. The
# findings are returned as refusals, so the library gets the handler libraries should carry:
# records still reach any logging the application configures.
logging.getLogger("python_ags4").addHandler(logging.NullHandler())

# Entries of the checker's report that inform rather than refuse (STACK-NOTES.md).
_INFORMATION = ("Metadata", "Summary of data")
_NOT_TEXT = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")  # control characters other than tab, CR, LF
_HEADING = re.compile(r"\b[A-Z0-9]{4}_[A-Z0-9]+\b")  # AGS Format Rule 19b: GROUP_FIELD
_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d{1,3})?$")


@dataclass(frozen=True)
class _Row:
    """A DATA row: its line in the file and its values by heading, blanks stripped."""

    line: int
    values: dict[str, str]

    def get(self, heading: str) -> str:
        return self.values.get(heading, "")


@dataclass
class _Group:
    """A GROUP as written: its name, GROUP line, HEADING row and DATA rows."""

    name: str
    line: int  # the GROUP line
    headings: list[str] = field(default_factory=list)
    rows: list[_Row] = field(default_factory=list)


@dataclass
class _File:
    """The file as its lines say: the groups, and which group each line belongs to."""

    groups: dict[str, _Group] = field(default_factory=dict)
    group_of_line: dict[int, str] = field(default_factory=dict)


def read_ags4(data: bytes) -> Schedule:
    """The schedule an AGS4 file gives, with every refusal; on any AGS Format error, those
    errors alone (an import with any error stores nothing, DESIGN.md section 7)."""
    decoded = _decode(data)
    if isinstance(decoded, CellError):
        return Schedule(format=FORMAT, errors=[decoded])
    text = decoded
    walked = _walk(text)
    samp = walked.groups.get("SAMP")
    if samp is not None and len(samp.rows) > ROWS_MAX:
        message = f"SAMP has {len(samp.rows)} rows; at most {ROWS_MAX} are read as one schedule"
        return Schedule(format=FORMAT, errors=[CellError(Origin(group="SAMP", line=samp.line), "", message)])
    errors = _checker_errors(text, walked)
    if errors:
        return Schedule(format=FORMAT, errors=errors)
    return _schedule(walked)


def _decode(data: bytes) -> str | CellError:
    """The text: UTF-8, else Windows-1252 (the two a site office's software writes); anything
    else, or control characters, is not an AGS4 file (AGS Format Rule 1)."""
    file_level = Origin(group="", line=None)
    if not data.strip():
        return CellError(file_level, "", "The file is empty: an AGS4 file starts with its PROJ group")
    not_text = CellError(
        file_level, "", "The file is not text: an AGS4 file is plain text (AGS Format Rule 1)"
    )
    for encoding in ("utf-8", "cp1252"):
        try:
            text = data.decode(encoding)
        except UnicodeDecodeError:
            continue
        return not_text if _NOT_TEXT.search(text) else text
    return not_text


def _fields(line: str) -> list[str]:
    """A line's fields as a CSV reader splits them; an unreadable line is one field (it then
    starts with no data descriptor, which the checker reports under Rule 3)."""
    try:
        return next(csv.reader([line]), [])
    except csv.Error:
        return [line]


def _walk(text: str) -> _File:
    """Groups, headings and DATA rows with their line numbers, counted as python-ags4 counts
    them (CR, LF or CRLF end a line; a blank line ends a group). Lenient: a file the checker
    refuses is walked only to place its errors in their groups."""
    walked = _File()
    current: _Group | None = None
    for number, line in enumerate(io.StringIO(text, newline=""), start=1):
        fields = _fields(line)
        if not fields:
            current = None
            continue
        descriptor, values = fields[0], [value.strip() for value in fields[1:]]
        if descriptor == "GROUP" and values:
            current = walked.groups.setdefault(values[0], _Group(values[0], number))
        elif current is not None and descriptor == "HEADING":
            current.headings = values
        elif current is not None and descriptor == "DATA":
            current.rows.append(_Row(number, dict(zip(current.headings, values, strict=False))))
        if current is not None:
            walked.group_of_line[number] = current.name
    return walked


def _checker_errors(text: str, walked: _File) -> list[CellError]:
    """python-ags4's errors, in file order (those without a line last). The checker is given
    the text in UTF-8 whatever the file's encoding: python-ags4 1.2 reopens its file as UTF-8
    part-way through a check, so a Windows-1252 file would fail there; Rule 1 looks at the
    characters, which are the same."""
    with tempfile.TemporaryDirectory(prefix="claybench-ags4-") as folder:
        path = Path(folder) / "schedule.ags"
        path.write_bytes(text.encode("utf-8"))
        report = AGS4.check_file(str(path))
    errors = [
        _checker_error(rule, entry, walked)
        for rule, entries in report.items()
        if rule not in _INFORMATION and not rule.startswith("FYI")
        for entry in entries
    ]
    return sorted(errors, key=lambda e: (e.origin.line is None, e.origin.line or 0))


def _checker_error(rule: str, entry: dict[str, object], walked: _File) -> CellError:
    """One entry of the checker's report as a refusal. The checker gives "-" or "" for a line
    it cannot name, and no group for a line-level rule (quoting, line ends): the group is then
    the one the line stands in. It names headings only in its words, where we find them."""
    reported = entry.get("line")
    line = int(reported) if isinstance(reported, numbers.Integral) else None
    group = str(entry.get("group") or "") or walked.group_of_line.get(line or 0, "")
    description = str(entry.get("desc", ""))
    return CellError(
        Origin(group=group, line=line), _heading_named(description, group, walked), f"{rule}: {description}"
    )


def _heading_named(description: str, group: str, walked: _File) -> str:
    """The heading a checker's message is about: the first it names of the group's HEADING
    row, else the first of the group's own (``GROUP_...``, e.g. a missing key field), else
    none. Values shaped like headings (a LOCA_ID "BH01_A") are passed over."""
    named = _HEADING.findall(description)
    found = walked.groups.get(group)
    in_row = [h for h in named if found is not None and h in found.headings]
    own = [h for h in named if h.startswith(f"{group}_")]
    return next(iter(in_row + own), "")


# --- values -----------------------------------------------------------------------------------


class _Cells:
    """The checks of one DATA row's values; every refusal names group, line and heading."""

    def __init__(self, group: str, row: _Row, errors: list[CellError]) -> None:
        self.group, self.row, self.errors = group, row, errors
        self.refused = False

    def refuse(self, heading: str, message: str) -> None:
        self.errors.append(CellError(Origin(group=self.group, line=self.row.line), heading, message))
        self.refused = True

    def text(self, heading: str, label: str, max_len: int) -> str:
        """Free text, at most ``max_len`` characters (the tables' width)."""
        value = self.row.get(heading)
        if len(value) > max_len:
            self.refuse(heading, f"{label} is {len(value)} characters long; at most {max_len} are kept")
        return value

    def code(self, heading: str, label: str, seen: dict[str, int], value: str | None = None) -> str:
        """A location or sample code (the row's ``heading``, or ``value`` made from it):
        required, at most CODE_MAX characters (the tables' width), and once in the file,
        the later line refused."""
        code = self.row.get(heading) if value is None else value
        if not code:
            self.refuse(heading, f"{heading} is blank: a {label} is required")
        elif len(code) > CODE_MAX:
            self.refuse(
                heading, f"{label} {code!r} is {len(code)} characters long; at most {CODE_MAX} are kept"
            )
        elif code in seen:
            self.refuse(heading, f"{label} {code} is already on line {seen[code]}")
        else:
            seen[code] = self.row.line
        return code

    def number(
        self, heading: str, label: str, low: float, high: float, *, required: bool = False
    ) -> float | None:
        """A number of metres within [low, high] (so finite); blank is None, refused when
        ``required``."""
        value = self.row.get(heading)
        if not value:
            if required:
                self.refuse(heading, f"{heading} is blank: the {label} is required")
            return None
        if not _NUMBER.match(value):
            self.refuse(heading, f"{label} must be a number of metres, not {value[:40]!r}")
            return None
        number = float(value)
        if not low <= number <= high:
            self.refuse(heading, f"{label} {value} m is outside {low:,.0f} m to {high:,.0f} m")
            return None
        return number

    def kind(
        self, heading: str, abbreviations: dict[tuple[str, str], str], vocabulary: _Vocabulary
    ) -> str | None:
        """The vocabulary id of an abbreviation: the code itself as our id, label or the trade's
        abbreviation, else the description the file's ABBR group gives it; blank is None."""
        code = self.row.get(heading)
        if not code:
            return None
        description = abbreviations.get((heading, code), "")
        found = vocabulary.lookup(code) or vocabulary.lookup(description)
        if found is None:
            self.refuse(
                heading,
                f'{heading} "{code}" ("{description}" in the ABBR group) is not {vocabulary.noun} '
                f"Claybench records; use one of these, or describe the code as one in ABBR: "
                f"{', '.join(vocabulary.labels)}",
            )
        return found


@dataclass(frozen=True)
class _Vocabulary:
    """One of the register's vocabularies, as an abbreviation's refusal names it."""

    noun: str
    labels: tuple[str, ...]
    lookup: Callable[[str], str | None]


_LOCATION = _Vocabulary("a kind of location", tuple(LOCATION_KINDS.values()), location_kind_id)
_SAMPLE = _Vocabulary("a sample type", tuple(SAMPLE_TYPES.values()), sample_type_id)


# --- groups -----------------------------------------------------------------------------------

# Our field (the spreadsheet reader's names, spreadsheet.FIELDS) -> the heading it is read from.
_LOCATION_COLUMNS = {
    "location": "LOCA_ID",
    "location_type": "LOCA_TYPE",
    "easting": "LOCA_NATE",
    "northing": "LOCA_NATN",
    "ground_level": "LOCA_GL",
}
_SAMPLE_COLUMNS = {  # and "sample", the heading the code comes from (_sample_code)
    "location": "LOCA_ID",
    "top": "SAMP_TOP",
    "base": "SAMP_BASE",
    "sample_type": "SAMP_TYPE",
    "description": "SAMP_DESC",
    "remarks": "SAMP_REM",
}


def _schedule(walked: _File) -> Schedule:
    """The schedule of a file the checker passed: PROJ, LOCA and SAMP with their values checked."""
    errors: list[CellError] = []
    abbr = walked.groups.get("ABBR")
    abbreviations = {
        (row.get("ABBR_HDNG"), row.get("ABBR_CODE")): row.get("ABBR_DESC")
        for row in (abbr.rows if abbr else [])
    }
    project = _project(walked.groups["PROJ"], errors)
    locations = _locations(walked.groups.get("LOCA"), abbreviations, errors)
    samples = _samples(walked.groups.get("SAMP"), {line.code for line in locations}, abbreviations, errors)
    return Schedule(format=FORMAT, locations=locations, samples=samples, errors=errors, project=project)


def _project(proj: _Group, errors: list[CellError]) -> ProjectInfo | None:
    """The job PROJ names. The checker has seen to one PROJ group with one DATA row and its
    PROJ_ID filled (AGS Format Rules 13 and 10b); the number must fit a job's code."""
    row = proj.rows[0]
    cells = _Cells("PROJ", row, errors)
    number = cells.code("PROJ_ID", "job number", {})
    if cells.refused:
        return None
    return ProjectInfo(
        number, title=row.get("PROJ_NAME"), site=row.get("PROJ_LOC"), client=row.get("PROJ_CLNT")
    )


def _columns(group: _Group, columns: dict[str, str]) -> dict[str, str]:
    """The fields whose heading the group has."""
    return {name: heading for name, heading in columns.items() if heading in group.headings}


def _locations(
    loca: _Group | None, abbreviations: dict[tuple[str, str], str], errors: list[CellError]
) -> list[LocationLine]:
    """LOCA's rows; a row with a refused cell is left out."""
    if loca is None:
        return []
    columns = _columns(loca, _LOCATION_COLUMNS)
    seen: dict[str, int] = {}
    lines = []
    for row in loca.rows:
        cells = _Cells("LOCA", row, errors)
        code = cells.code("LOCA_ID", "location code", seen)
        kind = cells.kind("LOCA_TYPE", abbreviations, _LOCATION)
        easting = cells.number("LOCA_NATE", "easting", -COORDINATE_MAX, COORDINATE_MAX)
        northing = cells.number("LOCA_NATN", "northing", -COORDINATE_MAX, COORDINATE_MAX)
        ground_level = cells.number("LOCA_GL", "ground level", *GROUND_LEVEL_M)
        if not cells.refused:
            lines.append(
                LocationLine(
                    Origin(group="LOCA", line=row.line), code, kind, easting, northing, ground_level, columns
                )
            )
    return lines


def _sample_code(row: _Row) -> tuple[str, str]:
    """A sample's code and the heading it comes from: SAMP_ID when the file gives one; else
    LOCA_ID-SAMP_REF ("BH1-3"), the reference being unique in its hole; else LOCA_ID-SAMP_TYPE
    followed by SAMP_TOP as written ("BH1-D1.50"), as a sample is labelled on site (common
    practice). A made code too long, or met twice, is refused at the heading a shorter or
    distinct code is written under."""
    if row.get("SAMP_ID"):
        return "SAMP_ID", row.get("SAMP_ID")
    if row.get("SAMP_REF"):
        return "SAMP_REF", f"{row.get('LOCA_ID')}-{row.get('SAMP_REF')}"
    return "SAMP_ID", f"{row.get('LOCA_ID')}-{row.get('SAMP_TYPE')}{row.get('SAMP_TOP')}"


def _samples(
    samp: _Group | None,
    locations: set[str],
    abbreviations: dict[tuple[str, str], str],
    errors: list[CellError],
) -> list[SampleLine]:
    """SAMP's rows, in file order; a row with a refused cell is left out.

    Every SAMP row's LOCA_ID is in LOCA (AGS Format Rule 10c, the checker's); a row whose
    location was refused is left out without a refusal of its own, so that every sample's
    location is among the schedule's locations and the refusal is said once.
    """
    if samp is None:
        return []
    columns = _columns(samp, _SAMPLE_COLUMNS)
    columns.setdefault("base", "SAMP_TOP")  # no SAMP_BASE: the base is the top
    seen: dict[str, int] = {}
    lines = []
    for row in samp.rows:
        if row.get("LOCA_ID") not in locations:
            continue
        cells = _Cells("SAMP", row, errors)
        code_heading, made = _sample_code(row)
        code = cells.code(code_heading, "sample code", seen, made)
        top = cells.number("SAMP_TOP", "top depth", 0, DEPTH_MAX_M, required=True)
        base = cells.number("SAMP_BASE", "base depth", 0, DEPTH_MAX_M)  # blank: a point sample
        if top is not None and base is not None and base < top:
            cells.refuse(
                "SAMP_BASE",
                f"base depth {row.get('SAMP_BASE')} m is above the top depth {row.get('SAMP_TOP')} m",
            )
        sample_type = cells.kind("SAMP_TYPE", abbreviations, _SAMPLE)
        description = cells.text("SAMP_DESC", "description", DESCRIPTION_MAX)
        remarks = cells.text("SAMP_REM", "remarks", REMARKS_MAX)
        if cells.refused or top is None:  # (a blank top is refused: None narrows the type)
            continue
        lines.append(
            SampleLine(
                Origin(group="SAMP", line=row.line),
                location=row.get("LOCA_ID"),
                code=code,
                top_m=top,
                base_m=top if base is None else base,
                sample_type=sample_type,
                description=description,
                remarks=remarks,
                columns={**columns, "sample": code_heading},
            )
        )
    return lines
