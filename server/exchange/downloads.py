"""A job's approved results as one downloadable file, in any of the export formats.

The job page, the JSON API and ``claybench export`` all hand out the same bytes for the same
records; they differ only in how they name the job and answer a refusal, so the choice of
writer, media type and file name lives here, once.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import Literal

from sqlmodel import Session

from server.exchange import results_sheet
from server.exchange.ags4_write import ags4_text
from server.exchange.job_export import job_export

Format = Literal["ags4", "csv", "xlsx"]
FORMATS: tuple[Format, ...] = ("ags4", "csv", "xlsx")
# AGS4 is plain ASCII text; .ags is the extension the format's own rules give the file.
AGS4_MEDIA_TYPE = "text/plain; charset=us-ascii"
EXTENSIONS: dict[Format, str] = {"ags4": "ags", "csv": "csv", "xlsx": "xlsx"}
MEDIA_TYPES: dict[Format, str] = {
    "ags4": AGS4_MEDIA_TYPE,
    "csv": results_sheet.CSV_MEDIA_TYPE,
    "xlsx": results_sheet.XLSX_MEDIA_TYPE,
}


@dataclass(frozen=True)
class Download:
    """One export file, with what a caller reports of it."""

    data: bytes
    media_type: str
    file_name: str
    samples: int
    tests: int


def job_download(session: Session, job_id: int, fmt: Format, *, today: date) -> Download:
    """The approved results of job ``job_id`` in ``fmt``. AGS4's TRAN_DATE is ``today``: the
    file is a transmission made now (a report's frozen file carries its issue date instead).

    Refused as ``job_export`` and ``results_sheet.load_results`` refuse: ``NotFound`` for no
    such job, ``Invalid`` (field "tests") when nothing of it is approved."""
    if fmt == "ags4":
        records = job_export(session, job_id)
        data = ags4_text(records, issued_on=today).encode("ascii")
        name = results_sheet.safe_file_name(records.number, "results", EXTENSIONS[fmt])
        return Download(data, MEDIA_TYPES[fmt], name, len(records.samples), len(records.tests))
    export = results_sheet.load_results(session, job_id)
    writer = results_sheet.results_csv if fmt == "csv" else results_sheet.results_xlsx
    return Download(
        writer(export),
        MEDIA_TYPES[fmt],
        results_sheet.file_name(export, EXTENSIONS[fmt]),
        len(export.samples),
        sum(1 for _ in export.tests),
    )
