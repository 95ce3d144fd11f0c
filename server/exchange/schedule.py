"""A sample schedule as any file describes it: the shape every reader (CSV, XLSX, AGS4) hands
to the import service, and the cell-level refusals it hands back with it.

Readers check what a file alone can tell (a number that is not a number, base above top, an
unknown kind of location, sample type or test, a sample code twice in the file); the import
service then checks what only the database knows (a sample with readings that would change).
Both report a refusal at the place a person finds it: the spreadsheet row number as a
spreadsheet program shows it (the header is row 1) and the column header, or the AGS4 group,
line and heading.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from server.engine import METHODS
from server.workflow.vocabulary import fold

CODE_MAX = 32  # location and sample codes (the columns of the tables)
DESCRIPTION_MAX = 1000
REMARKS_MAX = 1000
DEPTH_MAX_M = 1000.0  # deeper than any site-investigation hole: a typing or unit slip (common practice)
ROWS_MAX = 10_000  # one schedule; a larger file is refused whole rather than half-read


@dataclass(frozen=True)
class Origin:
    """Where a record stands in its file: a spreadsheet row, or an AGS4 group and line."""

    row: int | None = None
    group: str | None = None
    line: int | None = None


@dataclass(frozen=True)
class CellError:
    """One refused cell (or row, when ``column`` is empty), in plain words."""

    origin: Origin
    column: str
    message: str

    def to_dict(self) -> dict[str, Any]:
        """The contract's shape: ``{"row", "column", "message"}`` for a spreadsheet,
        ``{"group", "line", "heading", "message"}`` for AGS4 (DESIGN.md section 7)."""
        if self.origin.group is not None:
            return {
                "group": self.origin.group,
                "line": self.origin.line,
                "heading": self.column,
                "message": self.message,
            }
        return {"row": self.origin.row, "column": self.column, "message": self.message}


@dataclass(frozen=True)
class LocationLine:
    """A borehole, trial pit... as the file gives it; ``kind`` is a vocabulary id."""

    origin: Origin
    code: str
    kind: str | None = None
    easting: float | None = None
    northing: float | None = None
    ground_level_m: float | None = None
    columns: dict[str, str] = field(default_factory=dict)  # our field name -> the file's header


@dataclass(frozen=True)
class SampleLine:
    """One sample as the file gives it, values typed and checked; ``sample_type`` is a
    vocabulary id and ``tests`` are method ids."""

    origin: Origin
    location: str
    code: str
    top_m: float
    base_m: float
    sample_type: str | None = None
    description: str = ""
    remarks: str = ""
    tests: tuple[str, ...] = ()
    columns: dict[str, str] = field(default_factory=dict)  # our field name -> the file's header


@dataclass(frozen=True)
class ProjectInfo:
    """The job a file names for itself (AGS4 PROJ); spreadsheets name none."""

    number: str
    title: str = ""
    site: str = ""
    client: str = ""


@dataclass
class Schedule:
    """What a reader found in one file: locations and samples in file order, and refusals.

    A line with a refused cell is left out of ``samples``, so that a preview shows what would
    be stored beside what was refused; an import with any error stores nothing.
    """

    format: str  # "csv", "xlsx" or "ags4"
    locations: list[LocationLine] = field(default_factory=list)
    samples: list[SampleLine] = field(default_factory=list)
    errors: list[CellError] = field(default_factory=list)
    project: ProjectInfo | None = None


def method_id(text: str) -> str | None:
    """A method named by its id or its display name, ignoring case, spaces and hyphens."""
    key = fold(text)
    if not key:
        return None
    for method in METHODS.values():
        if key in (fold(method.id), fold(method.title)):
            return method.id
    return None
