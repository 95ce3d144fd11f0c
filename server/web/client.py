"""What a client engineer sees through a share link (no account), the staff downloads of a
report's files, and the public verification page.

A report's PDF and AGS4 file are served from the bytes stored at issue: never made again.
"""

from __future__ import annotations

import hashlib
from typing import Annotated

from fastapi import APIRouter, Depends, File, Form, HTTPException, Request, UploadFile
from sqlalchemy.orm import defer
from starlette.responses import RedirectResponse, Response

from server.auth.sessions import database, require_user
from server.auth.throttle import client_address, throttles
from server.db.tables import Report, ReportAgs4, User
from server.exchange.downloads import AGS4_MEDIA_TYPE
from server.services import reports
from server.services.links import ClientView, open_link
from server.web.params import IdPath, PageRoute
from server.web.templating import render

router = APIRouter(route_class=PageRoute, include_in_schema=False)
MAX_VERIFY_BYTES = 50 * 1024 * 1024

REFUSALS = {
    "unknown": "This link is not recognised. Check that it was copied whole, or ask the laboratory for a new "
    "one.",
    "expired": "This link has expired. Ask the laboratory for a new link; the reports themselves are "
    "unchanged.",
    "revoked": "This link has been withdrawn by the laboratory. Ask the laboratory for a new link.",
    "throttled": "Too many unrecognised links were tried from your network. Wait a few minutes, then open "
    "the link again.",
}
HEADLINES = {
    "unknown": "This link is not recognised",
    "expired": "This link has expired",
    "revoked": "This link has been withdrawn",
    "throttled": "Too many unrecognised links",
}
STATUS = {"unknown": 404, "throttled": 429}
# A page of a share link or a verification answer must not be kept by shared caches or
# leak the token to other sites through the Referer header.
PRIVATE = {"Cache-Control": "private, no-store", "Referrer-Policy": "no-referrer"}


def pdf_response(report: Report) -> Response:
    name = f"{report.number}-rev{report.revision}.pdf"
    return Response(
        report.pdf,
        media_type="application/pdf",
        headers={
            "Content-Disposition": f'attachment; filename="{name}"',
            "X-Content-SHA256": report.sha256,
            **PRIVATE,
        },
    )


def ags4_response(request: Request, report_id: int) -> Response:
    """The AGS4 file frozen with the report, byte for byte; 404 when the report has none (it
    was issued before files were frozen with reports)."""
    with database(request).session() as s:
        report = s.get(Report, report_id, options=[defer(Report.pdf)])  # type: ignore[arg-type]
        frozen = s.get(ReportAgs4, report_id)
    if report is None or frozen is None:
        raise HTTPException(404, "no AGS4 file was issued with this report")
    name = f"{report.number}-rev{report.revision}.ags"
    return Response(
        frozen.data,
        media_type=AGS4_MEDIA_TYPE,
        headers={
            "Content-Disposition": f'attachment; filename="{name}"',
            "X-Content-SHA256": frozen.sha256,
            **PRIVATE,
        },
    )


def _open(request: Request, token: str, what: str = "") -> ClientView:
    """Open the link and log the access; the log names the page without the token (only the
    token's hash is ever stored). Unrecognised tokens count against the address, and an address
    past its throttle is refused before the token is looked up, so links cannot be guessed."""
    address, throttle = client_address(request), throttles(request).token_address
    wait = throttle.wait(address)
    if wait:
        request.state.retry_after = wait
        return ClientView("throttled")
    view = open_link(
        database(request),
        token,
        path=f"/share/…{what}",
        remote_addr=address,
        user_agent=request.headers.get("user-agent", ""),
    )
    if view.refused == "unknown":
        throttle.fail(address)
    return view


def _refused(request: Request, reason: str) -> Response:
    response = render(
        request,
        "pages/share_refused.html",
        status_code=STATUS.get(reason, 410),
        headline=HEADLINES[reason],
        reason=REFUSALS[reason],
        user=None,
    )
    response.headers.update(PRIVATE)
    if reason == "throttled":
        response.headers["Retry-After"] = str(request.state.retry_after)
    return response


@router.get("/share/{token}")
def share_page(request: Request, token: str) -> Response:
    view = _open(request, token)
    if view.refused:
        return _refused(request, view.refused)
    response = render(request, "pages/share.html", view=view, token=token, user=None)
    response.headers.update(PRIVATE)
    return response


@router.get("/share/{token}/reports/{report_id}.pdf")
def share_pdf(request: Request, token: str, report_id: IdPath) -> Response:
    view = _open(request, token, f"/reports/{report_id}.pdf")
    if view.refused:
        return _refused(request, view.refused)
    if report_id not in view.report_ids:
        raise HTTPException(404, "no such report for this link")
    with database(request).session() as s:
        report = s.get(Report, report_id)
    if report is None:
        raise HTTPException(404, "no such report for this link")
    return pdf_response(report)


@router.get("/share/{token}/reports/{report_id}.ags")
def share_ags4(request: Request, token: str, report_id: IdPath) -> Response:
    view = _open(request, token, f"/reports/{report_id}.ags")
    if view.refused:
        return _refused(request, view.refused)
    if report_id not in view.report_ids:
        raise HTTPException(404, "no such report for this link")
    return ags4_response(request, report_id)


@router.get("/reports/{report_id}.ags")
def staff_ags4(request: Request, report_id: IdPath, user: Annotated[User, Depends(require_user)]) -> Response:
    return ags4_response(request, report_id)


@router.get("/reports/{report_id}.pdf")
def staff_pdf(request: Request, report_id: IdPath, user: Annotated[User, Depends(require_user)]) -> Response:
    with database(request).session() as s:
        report = s.get(Report, report_id)
    if report is None:
        raise HTTPException(404, "no such report")
    return pdf_response(report)


def _verify_page(request: Request, status_code: int = 200, **context: object) -> Response:
    context = {
        "verdict": None,
        "number": "",
        "revision": "",
        "sha256": "",
        "problem": "",
        "file_name": "",
        **context,
    }
    response = render(request, "pages/verify.html", status_code=status_code, user=None, **context)
    response.headers.update(PRIVATE)
    return response


@router.get("/favicon.ico")
def favicon() -> Response:
    """Browsers ask for /favicon.ico whatever the page links: sent to the SVG icon in static/
    (a permanent redirect, so they ask once)."""
    return RedirectResponse("/static/favicon.svg", status_code=308)


@router.get("/verify")
def verify_page(request: Request, number: str = "", revision: str = "", sha256: str = "") -> Response:
    """Anyone may check a report: its number with the SHA-256 of the file or the content
    fingerprint printed on its pages (the QR code fills both in), or the PDF itself."""
    number, sha256 = number.strip()[:40], sha256.strip()[:80]
    verdict = reports.verify(database(request), sha256=sha256, number=number or None) if sha256 else None
    return _verify_page(request, verdict=verdict, number=number, revision=revision[:8], sha256=sha256)


@router.post("/verify")
def verify_upload(
    request: Request, pdf: Annotated[UploadFile, File()], number: Annotated[str, Form()] = ""
) -> Response:
    """The uploaded PDF's SHA-256 is looked up among issued reports; nothing is stored."""
    data = pdf.file.read(MAX_VERIFY_BYTES + 1)
    if len(data) > MAX_VERIFY_BYTES:
        return _verify_page(request, 413, problem="That file is larger than any report we issue.")
    if not data:
        return _verify_page(request, 422, problem="Choose the PDF file of the report to check it.")
    number = number.strip()[:40]
    verdict = reports.verify(database(request), upload=data, number=number or None)
    return _verify_page(
        request,
        verdict=verdict,
        number=number,
        sha256=hashlib.sha256(data).hexdigest(),
        file_name=(pdf.filename or "")[:200],
    )
