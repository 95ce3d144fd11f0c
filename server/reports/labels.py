"""Sample labels as PDF: an A4 sheet of 24 self-adhesive labels, or one label per page for a
small roll printer.

Labels render through ``server.reports.pdf`` (its template environment, fonts, ``data:``-only
fetcher and ``SOURCE_DATE_EPOCH`` handling), so this module imports no WeasyPrint itself and a
label prints with the same fonts as the reports. A label carries no date, so the epoch is a
fixed one: the same labels give the same bytes, whenever they are printed.

The QR code is segno's inline SVG (vector, cheap in WeasyPrint) of the sample page's address;
every text is autoescaped, since codes and descriptions are typed by people.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import segno
from markupsafe import Markup

from server.reports.pdf import html_to_pdf, render_template

__all__ = ["Label", "label_sheet_pdf", "single_label_pdf"]

TEMPLATE = "reports/labels.html"

# An A4 sheet of 3 x 8 labels of 70 x 37 mm with no gaps between them: the common
# self-adhesive layout (common practice).
SHEET_LABELS = 3 * 8

# Labels carry no date: 1970-01-01 UTC stands in as SOURCE_DATE_EPOCH (reproducible-builds.org
# spec), so fontTools stamps every font alike.
LABEL_EPOCH = 0

# Codes longer than these print smaller (labels.css sizes each class to fit a line), and the
# longest wrap, so that a code never runs off its label.
SHORT_CODE = 10
MEDIUM_CODE = 16


@dataclass(frozen=True)
class Label:
    """What one sample label prints; every field is already formatted for print."""

    sample_code: str
    job_number: str
    location: str
    depth: str  # already formatted, e.g. "1.00–1.45 m"
    sample_type: str
    url: str  # the sample page's absolute address, in the QR code


@dataclass(frozen=True)
class _Printed:
    """A label with what the template needs besides its text: the QR code and the code's size."""

    label: Label
    qr: Markup
    code_size: str


def _qr_svg(url: str) -> str:
    """The QR code of ``url`` as inline SVG sized by the stylesheet (a viewBox, no width or
    height), with the 4-module quiet zone of ISO/IEC 18004 inside it so that the label's
    neighbours on a sheet never crowd the code."""
    return str(segno.make(url, error="m", micro=False).svg_inline(border=4, omitsize=True, dark="#000"))


def _code_size(code: str) -> str:
    """The size class of a sample code: long codes print smaller rather than overflow."""
    if len(code) <= SHORT_CODE:
        return "large"
    if len(code) <= MEDIUM_CODE:
        return "medium"
    return "small"


def _pages(labels: Sequence[Label], per_page: int) -> list[list[_Printed]]:
    """The labels as printed, in pages of ``per_page``."""
    if not labels:
        raise ValueError("there are no labels to print: give at least one sample")
    printed = [_Printed(label, Markup(_qr_svg(label.url)), _code_size(label.sample_code)) for label in labels]
    return [printed[start : start + per_page] for start in range(0, len(printed), per_page)]


def _labels_pdf(labels: Sequence[Label], layout: str, per_page: int) -> bytes:
    """Labels in ``layout`` (a page style of labels.css), ``per_page`` to a page."""
    html = render_template(TEMPLATE, layout=layout, pages=_pages(labels, per_page))
    return html_to_pdf(html, LABEL_EPOCH)


def label_sheet_pdf(labels: Sequence[Label]) -> bytes:
    """Labels on A4 sheets of 3 columns x 8 rows of 70 x 37 mm, no gaps between labels: the
    common self-adhesive layout (common practice). As many sheets as the labels need, filled
    row by row; the same labels give the same bytes. An empty list is a ValueError."""
    return _labels_pdf(labels, "sheet", SHEET_LABELS)


def single_label_pdf(labels: Sequence[Label]) -> bytes:
    """One label per 62 x 29 mm page, a common small label-printer roll (common practice): QR
    code on the left, text on the right. The same labels give the same bytes; an empty list is
    a ValueError."""
    return _labels_pdf(labels, "roll", 1)
