"""What a client engineer sees through a share link (no account), and the staff PDF download.

A report's PDF is served from the bytes stored at issue: never rendered again.
"""

from __future__ import annotations

import hashlib
from typing import Annotated

from fastapi import APIRouter, Depends, File, HTTPException, Request, UploadFile
from starlette.responses import Response

from server.auth.sessions import database, require_user
from server.db.tables import Report, User
from server.services import reports
from server.services.links import open_link
from server.web.templating import render

router = APIRouter(include_in_schema=False)
MAX_VERIFY_BYTES = 50 * 1024 * 1024

REFUSALS = {
    "unknown": "This link is not recognised. Check that it was copied whole, or ask the laboratory for a new "
    "one.",
    "expired": "This link has expired. Ask the laboratory for a new link; the reports themselves are "
    "unchanged.",
    "revoked": "This link has been withdrawn by the laboratory. Ask the laboratory for a new link.",
}


def pdf_response(report: Report) -> Response:
    name = f"{report.number}-rev{report.revision}.pdf"
    return Response(
        report.pdf,
        media_type="application/pdf",
        headers={
            "Content-Disposition": f'attachment; filename="{name}"',
            "X-Content-SHA256": report.sha256,
            "Cache-Control": "private, max-age=0, no-store",
        },
    )


def _open(request: Request, token: str):  # type: ignore[no-untyped-def]
    return open_link(
        database(request),
        token,
        path=request.url.path,
        remote_addr=request.client.host if request.client else "",
        user_agent=request.headers.get("user-agent", ""),
    )


@router.get("/share/{token}")
def share_page(request: Request, token: str) -> Response:
    view = _open(request, token)
    if view.refused:
        return render(
            request,
            "pages/share_refused.html",
            status_code=410 if view.refused != "unknown" else 404,
            reason=REFUSALS[view.refused],
            user=None,
        )
    return render(request, "pages/share.html", view=view, token=token, user=None)


@router.get("/share/{token}/reports/{report_id}.pdf")
def share_pdf(request: Request, token: str, report_id: int) -> Response:
    view = _open(request, token)
    if view.refused or view.reports is None:
        return render(
            request,
            "pages/share_refused.html",
            status_code=410 if view.refused != "unknown" else 404,
            reason=REFUSALS[view.refused or "unknown"],
            user=None,
        )
    if report_id not in {r.id for r in view.reports}:
        raise HTTPException(404, "no such report for this link")
    with database(request).session() as s:
        report = s.get(Report, report_id)
    assert report is not None
    return pdf_response(report)


@router.get("/reports/{report_id}.pdf")
def staff_pdf(request: Request, report_id: int, user: Annotated[User, Depends(require_user)]) -> Response:
    with database(request).session() as s:
        report = s.get(Report, report_id)
    if report is None:
        raise HTTPException(404, "no such report")
    return pdf_response(report)


@router.get("/verify")
def verify_page(request: Request, number: str = "", revision: str = "", sha256: str = "") -> Response:
    """Anyone may check a report: by its SHA-256 (or the fingerprint printed on it) or its PDF."""
    verdict = reports.verify(database(request), sha256=sha256) if sha256 else None
    return render(
        request,
        "pages/verify.html",
        verdict=verdict,
        number=number,
        revision=revision,
        sha256=sha256,
        user=None,
    )


@router.post("/verify")
async def verify_upload(request: Request, pdf: Annotated[UploadFile, File()]) -> Response:
    data = await pdf.read(MAX_VERIFY_BYTES + 1)
    if len(data) > MAX_VERIFY_BYTES:
        return render(
            request,
            "pages/verify.html",
            status_code=413,
            verdict=None,
            number="",
            revision="",
            sha256="",
            user=None,
            problem="That file is larger than any report we issue.",
        )
    verdict = reports.verify(database(request), pdf=data)
    return render(
        request,
        "pages/verify.html",
        verdict=verdict,
        number="",
        revision="",
        sha256=hashlib.sha256(data).hexdigest(),
        user=None,
    )
