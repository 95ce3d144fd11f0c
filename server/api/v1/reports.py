"""Results out over the JSON API v1: a job's issued reports, their frozen PDF and AGS4 files,
and exports of the job's approved results.

A report's files are the stored bytes, never made again: their SHA-256 are the ones /verify
knows. Anyone signed in may download them, as on the staff's report page.
"""

from __future__ import annotations

import base64
from typing import Annotated

from fastapi import APIRouter, Query, Request
from sqlalchemy.orm import defer
from starlette.responses import Response

from server.api.v1 import pages
from server.api.v1.auth import Reader
from server.api.v1.params import PathId
from server.api.v1.problems import ProblemRoute, problems
from server.api.v1.schemas import ReportOut, ReportPage
from server.auth.sessions import database
from server.db.queries import frozen_ags4_digests, job_reports
from server.db.tables import Job, Report, ReportAgs4, utcnow
from server.exchange import downloads, results_sheet
from server.services.errors import NotFound

router = APIRouter(prefix="/api/v1", route_class=ProblemRoute, tags=["reports"])


def _report(report: Report, ags4: dict[int, str]) -> ReportOut:
    frozen = ags4.get(report.id or 0)
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
        ags4=f"/api/v1/reports/{report.id}.ags" if frozen else None,
        ags4_sha256=frozen,
    )


@router.get("/jobs/{job_id}/reports", response_model=ReportPage, responses=problems(401, 404, 422, 429))
def list_reports(
    request: Request,
    job_id: PathId,
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
        ags4 = frozen_ags4_digests(s, [r.id or 0 for r in items])
    return ReportPage(items=[_report(r, ags4) for r in items], next=following)


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
def report_pdf(request: Request, report_id: PathId, who: Reader) -> Response:
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
            **_digest_header(report.sha256),
        },
    )


def _digest_header(sha256: str) -> dict[str, str]:
    """RFC 9530 section 3: the digest of the bytes sent, the one /verify knows."""
    return {"Repr-Digest": f"sha-256=:{base64.b64encode(bytes.fromhex(sha256)).decode()}:"}


_AGS4_EXAMPLE = '"GROUP","PROJ"\r\n"HEADING","PROJ_ID","PROJ_NAME","PROJ_LOC","PROJ_CLNT"\r\n'


@router.get(
    "/reports/{report_id}.ags",
    response_class=Response,
    responses={
        200: {
            "description": "the AGS4 file frozen with the report, byte for byte as issued",
            "content": {"text/plain": {"schema": {"type": "string"}, "example": _AGS4_EXAMPLE}},
        },
        **problems(401, 404, 422, 429),
    },
)
def report_ags4(request: Request, report_id: PathId, who: Reader) -> Response:
    """404 also for a report issued before AGS4 files were frozen with reports."""
    with database(request).session() as s:
        report = s.get(Report, report_id, options=[defer(Report.pdf)])  # type: ignore[arg-type]
        frozen = s.get(ReportAgs4, report_id)
    if report is None:
        raise NotFound(f"report {report_id} does not exist")
    if frozen is None:
        raise NotFound(f"no AGS4 file was issued with report {report.number} revision {report.revision}")
    return Response(
        frozen.data,
        media_type=downloads.AGS4_MEDIA_TYPE,
        headers={
            "Content-Disposition": f'attachment; filename="{report.number}-rev{report.revision}.ags"',
            "Cache-Control": "private, no-store",
            **_digest_header(frozen.sha256),
        },
    )


@router.get(
    "/jobs/{job_id}/export",
    response_class=Response,
    responses={
        200: {
            "description": "the job's approved results, in the units and rounding of the report (AGS4 "
            "dated today; the spreadsheets with the full-precision values beside)",
            "content": {
                "text/plain": {"schema": {"type": "string"}, "example": _AGS4_EXAMPLE},
                "text/csv": {
                    "schema": {"type": "string"},
                    "example": ",".join(results_sheet.summary_headers()) + "\r\n",
                },
                downloads.MEDIA_TYPES["xlsx"]: {
                    "schema": {"type": "string", "format": "binary"},
                    "example": "(XLSX bytes)",
                },
            },
        },
        **problems(401, 404, 422, 429),
    },
)
def export(
    request: Request,
    job_id: PathId,
    who: Reader,
    format: Annotated[downloads.Format, Query(description="ags4, csv or xlsx", examples=["ags4"])],
) -> Response:
    """The job's approved results as AGS4 or a spreadsheet (DESIGN.md section 7): the same bytes
    as the job page's downloads and ``claybench export``. 422 when nothing is approved yet."""
    with database(request).session() as s:
        found = downloads.job_download(s, job_id, format, today=utcnow().date())
    return Response(
        found.data,
        media_type=found.media_type,
        headers={
            "Content-Disposition": f'attachment; filename="{found.file_name}"',
            "Cache-Control": "private, no-store",
        },
    )
