"""The certified report as PDF bytes: the one module of the project that imports WeasyPrint.

Same data, same bytes: the report's SHA-256 is recorded when it is issued, so a render must
not depend on the clock. WeasyPrint writes no creation date unless the HTML carries
``<meta name="dcterms.created">`` (set here from the issue record), and fontTools stamps
embedded fonts with the time unless ``SOURCE_DATE_EPOCH`` is set (set here from the issue date,
for the render only, then restored). One ``FontConfiguration`` is reused across renders.
Other documents (sample labels, ``labels.py``) render through ``render_template`` and
``html_to_pdf`` so that they share this setup.

Nothing is fetched: charts and the QR code are inline SVG and the URL fetcher allows only
``data:`` URLs, so no text typed by a user can make the renderer read a file or the network.
The process environment is shared, so renders are serialised by a lock; run big reports in a
worker with a time and memory limit (STACK-NOTES.md: about 0.3 s per dense page).
"""

from __future__ import annotations

import calendar
import os
import threading
from functools import cache
from pathlib import Path
from typing import Any

import segno
from jinja2 import Environment, FileSystemLoader, StrictUndefined
from markupsafe import Markup
from weasyprint import HTML
from weasyprint.text.fonts import FontConfiguration
from weasyprint.urls import URLFetcher

from server.reports.data import ReportData, canonical_json, content_fingerprint
from server.reports.formatting import people
from server.reports.view import build_view

__all__ = [
    "check_url",
    "content_fingerprint",
    "canonical_json",
    "html_to_pdf",
    "qr_svg",
    "render_report_html",
    "render_report_pdf",
    "render_template",
]

TEMPLATES = Path(__file__).resolve().parents[2] / "templates"
TEMPLATE = "reports/report.html"

_LOCK = threading.Lock()
_IMAGE_CACHE: dict[str, Any] = {}


@cache
def _environment() -> Environment:
    return Environment(
        loader=FileSystemLoader(TEMPLATES),
        autoescape=True,
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=False,
        finalize=people,  # a negative number printed with a real minus sign (formatting.people)
    )


@cache
def _font_config() -> FontConfiguration:
    return FontConfiguration()


@cache
def _fetcher() -> URLFetcher:
    return URLFetcher(allowed_protocols=("data",), fail_on_errors=False)


def qr_svg(url: str) -> str:
    """A QR code of the verification URL as inline SVG (error correction M, ISO/IEC 18004)."""
    return str(segno.make(url, error="m", micro=False).svg_inline(scale=1.6, border=2, dark="#000"))


def check_url(data: ReportData, fingerprint: str) -> str:
    """The verification address with the content fingerprint filled in: what the QR code holds,
    so that scanning it checks this very report."""
    joiner = "&" if "?" in data.verify_url else "?"
    return f"{data.verify_url}{joiner}sha256={fingerprint}"


def render_template(name: str, **context: Any) -> str:
    """A template of ``templates/`` rendered in the reports' environment: autoescape on and
    undefined names refused, so every printed document escapes what users typed."""
    return _environment().get_template(name).render(**context)


def render_report_html(data: ReportData, *, preview: bool = False, style_nonce: str = "") -> str:
    """The report as one self-contained HTML document (autoescaped; charts and QR inline).

    ``preview`` marks every page as not issued (a look at a report before issuing it);
    ``style_nonce`` is put on its one ``<style>`` when a browser shows it, whose
    Content-Security-Policy allows no other inline style (server/web/security_headers.py)."""
    view = build_view(data)
    fingerprint = content_fingerprint(data)
    qr = Markup(qr_svg(check_url(data, fingerprint))) if data.verify_url else Markup("")
    return render_template(
        TEMPLATE,
        view=view,
        data=data,
        fingerprint=fingerprint,
        qr=qr,
        preview=preview,
        style_nonce=style_nonce,
    )


def _epoch(data: ReportData) -> int:
    """Midnight UTC of the issue date, as SOURCE_DATE_EPOCH (reproducible-builds.org spec)."""
    return calendar.timegm(data.issue_date.timetuple())


def html_to_pdf(html: str, source_date_epoch: int) -> bytes:
    """A self-contained HTML document as PDF bytes, with the shared fonts, image cache and
    ``data:``-only fetcher. ``SOURCE_DATE_EPOCH`` is set for the render only, so the same HTML
    and epoch give the same bytes."""
    pdf: bytes | None = None
    with _LOCK:
        previous = os.environ.get("SOURCE_DATE_EPOCH")
        os.environ["SOURCE_DATE_EPOCH"] = str(source_date_epoch)
        try:
            document = HTML(string=html, base_url=str(TEMPLATES / "reports"), url_fetcher=_fetcher())
            pdf = document.write_pdf(font_config=_font_config(), cache=_IMAGE_CACHE)
        finally:
            if previous is None:
                del os.environ["SOURCE_DATE_EPOCH"]
            else:
                os.environ["SOURCE_DATE_EPOCH"] = previous
    assert pdf is not None
    return pdf


def render_report_pdf(data: ReportData) -> bytes:
    """The report as A4 PDF bytes; the same data gives the same bytes."""
    return html_to_pdf(render_report_html(data), _epoch(data))
