"""Results out over the JSON API v1: a job's issued reports, their frozen PDFs, and exports.

A report's PDF is the stored bytes, never re-rendered: its SHA-256 is the one printed for
verification. Anyone signed in may download it, as on the staff's report page.
"""

from __future__ import annotations

import base64
from typing import Annotated, Literal

from fastapi import APIRouter, Query, Request
from starlette.responses import Response

from server.api.v1 import pages
from server.api.v1.auth import Reader
from server.api.v1.problems import ApiProblem, ProblemRoute, problems
from server.api.v1.schemas import ReportOut, ReportPage
from server.auth.sessions import database
from server.db.queries import job_reports
from server.db.tables import Job, Report
from server.services.errors import NotFound

router = APIRouter(prefix="/api/v1", route_class=ProblemRoute, tags=["reports"])


def _report(report: Report) -> ReportOut:
    return ReportOut(
        id=report.id or 0,
        job_id=report.job_id,
        number=report.number,
        revision=report.revision,
        status=report.status,
        issued_at=report.issued_at,
        sha256=report.sha256,
        superseded_by_id=report.superseded_by_id,
        signature_meaning=report.signature_meaning,
        pdf=f"/api/v1/reports/{report.id}.pdf",
    )


@router.get("/jobs/{job_id}/reports", response_model=ReportPage, responses=problems(401, 404, 422, 429))
def list_reports(
    request: Request,
    job_id: int,
    who: Reader,
    cursor: pages.Cursor = None,
    limit: pages.Limit = pages.DEFAULT_LIMIT,
) -> ReportPage:
    """The job's reports, superseded revisions included, in the order they were issued."""
    after, limit = pages.decode(cursor), pages.capped(limit)
    with database(request).session() as s:
        if s.get(Job, job_id) is None:
            raise NotFound(f"job {job_id} does not exist")
        reports = sorted(job_reports(s, job_id), key=lambda r: r.id or 0)  # a job has a handful
    rows = [r for r in reports if after is None or (r.id or 0) > after][: limit + 1]
    items, following = pages.page(rows, limit, lambda r: r.id or 0)
    return ReportPage(items=[_report(r) for r in items], next=following)


_PDF_EXAMPLE = "%PDF-1.7 ... (the issued report's bytes)"


@router.get(
    "/reports/{report_id}.pdf",
    response_class=Response,
    responses={
        200: {
            "description": "the frozen PDF, byte for byte as issued",
            "content": {
                "application/pdf": {"schema": {"type": "string", "format": "binary"}, "example": _PDF_EXAMPLE}
            },
        },
        **problems(401, 404, 422, 429),
    },
)
def report_pdf(request: Request, report_id: int, who: Reader) -> Response:
    with database(request).session() as s:
        report = s.get(Report, report_id)
    if report is None:
        raise NotFound(f"report {report_id} does not exist")
    name = f"{report.number}-rev{report.revision}.pdf"
    return Response(
        report.pdf,
        media_type="application/pdf",
        headers={
            "Content-Disposition": f'attachment; filename="{name}"',
            "Cache-Control": "private, no-store",
            # RFC 9530 section 3: the digest of the bytes sent, the one printed for verification
            "Repr-Digest": f"sha-256=:{base64.b64encode(bytes.fromhex(report.sha256)).decode()}:",
        },
    )


ExportFormat = Literal["ags4", "csv", "xlsx"]
_MEDIA = {
    "ags4": "text/plain; charset=utf-8",
    "csv": "text/csv; charset=utf-8",
    "xlsx": "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
}


@router.get(
    "/jobs/{job_id}/export",
    response_class=Response,
    responses={
        200: {
            "description": "the job's approved results, in the units and rounding of the report",
            "content": {
                "text/plain": {
                    "schema": {"type": "string"},
                    "example": '"GROUP","PROJ"\r\n"HEADING","PROJ_ID"\r\n',
                },
                "text/csv": {
                    "schema": {"type": "string"},
                    "example": "job,location,sample,method,key,value\r\n",
                },
                _MEDIA["xlsx"]: {"schema": {"type": "string", "format": "binary"}, "example": "(XLSX bytes)"},
            },
        },
        **problems(401, 404, 422, 429, 501),
    },
)
def export(
    request: Request,
    job_id: int,
    who: Reader,
    format: Annotated[ExportFormat, Query(description="ags4, csv or xlsx", examples=["ags4"])],
) -> Response:
    """The job's approved results as AGS4 or a spreadsheet (DESIGN.md section 7)."""
    with database(request).session() as s:
        if s.get(Job, job_id) is None:
            raise NotFound(f"job {job_id} does not exist")
    raise ApiProblem(501, f"exports in {format} are not available in this installation yet")
