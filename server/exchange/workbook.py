"""Writing an XLSX workbook so that the same content is always the same bytes.

``Workbook.save`` stamps the present time twice: in the document properties (created,
modified) and in every zip entry's date. A file that changes with the clock cannot be compared
with an earlier download, kept beside a report's SHA-256, or tested byte for byte; so every
workbook we write goes through ``workbook_bytes``, which stamps one time the caller chooses
(a time from the record, or ``FIXED_TIME``) instead.
"""

from __future__ import annotations

import io
import zipfile
from datetime import UTC, datetime

from openpyxl import Workbook
from openpyxl.writer.excel import ExcelWriter

FIXED_TIME = datetime(2026, 1, 1)
"""The time stamped in a workbook that stands for no record (the schedule template)."""

_ZIP_EPOCH = datetime(1980, 1, 1)  # the earliest date a zip entry can carry (APPNOTE 4.4.6)


def workbook_bytes(book: Workbook, stamped: datetime = FIXED_TIME) -> bytes:
    """The workbook as XLSX bytes, with ``stamped`` (naive UTC, or aware: turned to UTC) as its
    created and modified time and as the date of every zip entry."""
    when = stamped.astimezone(UTC).replace(tzinfo=None) if stamped.tzinfo else stamped
    when = max(when.replace(microsecond=0), _ZIP_EPOCH)
    book.properties.created = book.properties.modified = when
    written = io.BytesIO()
    ExcelWriter(book, zipfile.ZipFile(written, "w", zipfile.ZIP_DEFLATED)).save()
    out = io.BytesIO()
    with zipfile.ZipFile(written) as source, zipfile.ZipFile(out, "w") as target:
        for entry in source.infolist():
            fixed = zipfile.ZipInfo(entry.filename, date_time=when.timetuple()[:6])
            target.writestr(fixed, source.read(entry), compress_type=zipfile.ZIP_DEFLATED)
    return out.getvalue()
