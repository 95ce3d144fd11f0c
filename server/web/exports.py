"""Downloads of a job's approved results as CSV, XLSX and AGS4, from the job page (DESIGN.md section 7).

Any signed-in member of staff may download them: they hold what the job page already shows
every role. A job with nothing approved answers with its own page (422) saying so, rather than
an empty file that looks like a job without results.
"""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, HTTPException, Request
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_user
from server.db.tables import User, utcnow
from server.exchange import downloads
from server.services.errors import Invalid, NotFound
from server.web.job_page import job_page_response
from server.web.params import IdPath, PageRoute

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]

# The results are the laboratory's and its client's: kept out of shared caches.
PRIVATE = {"Cache-Control": "private, no-store"}


def _download(request: Request, job_id: int, fmt: downloads.Format) -> Response:
    try:
        with database(request).session() as s:
            found = downloads.job_download(s, job_id, fmt, today=utcnow().date())
    except NotFound as exc:
        raise HTTPException(404, "no such job") from exc
    except Invalid as exc:
        return job_page_response(request, job_id, 422, error=f"Nothing to download: {exc}.")
    return Response(
        found.data,
        media_type=found.media_type,
        headers={"Content-Disposition": f'attachment; filename="{found.file_name}"', **PRIVATE},
    )


@router.get("/jobs/{job_id}/export.csv")
def export_csv(request: Request, job_id: IdPath, user: Staff) -> Response:
    """The summary of the approved results, one row per sample."""
    return _download(request, job_id, "csv")


@router.get("/jobs/{job_id}/export.xlsx")
def export_xlsx(request: Request, job_id: IdPath, user: Staff) -> Response:
    """The summary, and one sheet per method with each test's readings and results."""
    return _download(request, job_id, "xlsx")


@router.get("/jobs/{job_id}/export.ags")
def export_ags4(request: Request, job_id: IdPath, user: Staff) -> Response:
    """The approved results as an AGS4 file dated today, for the client's ground model."""
    return _download(request, job_id, "ags4")
