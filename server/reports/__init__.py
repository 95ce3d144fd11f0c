"""Reports: the certified test report (data, view, charts, PDF).

``data`` (the frozen report data and its fingerprint), ``view`` (what the template prints, built
from ``summary``, ``quantities`` and ``figures``), ``formatting`` and ``names`` (shared with the
pages) and ``charts`` are pure and cheap to import;
``pdf`` holds the project's one WeasyPrint import and is loaded only when a PDF is asked for.
This package may import ``server.engine`` but never the database or the web code: the service
layer builds a ``ReportData`` from its records and calls ``render_report_pdf``.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from server.reports.data import (
    DEFAULT_CAUTIONS,
    LabInfo,
    MethodNote,
    ReportData,
    RevisionNote,
    Signatory,
    TestEntry,
    canonical_json,
    content_fingerprint,
)
from server.reports.view import build_view

if TYPE_CHECKING:
    from server.reports.pdf import render_report_html, render_report_pdf

__all__ = [
    "DEFAULT_CAUTIONS",
    "LabInfo",
    "MethodNote",
    "ReportData",
    "RevisionNote",
    "Signatory",
    "TestEntry",
    "build_view",
    "canonical_json",
    "content_fingerprint",
    "render_report_html",
    "render_report_pdf",
]


def __getattr__(name: str) -> Any:
    """Load the PDF module (and WeasyPrint) on first use of its functions only."""
    if name in ("render_report_pdf", "render_report_html"):
        from server.reports import pdf

        return getattr(pdf, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
