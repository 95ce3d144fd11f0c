"""The register pages: jobs, a job (locations, samples, tests, reports, client links), a sample."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, HTTPException, Request
from fastapi.responses import RedirectResponse
from sqlmodel import col, select
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles, require_user
from server.db.queries import job_sheet, jobs_with_counts, test_rows
from server.db.tables import LabTest, LinkAccess, User
from server.web.templating import render

router = APIRouter(dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]


@router.get("/")
def home(user: Staff) -> Response:
    """Each person's own start: technicians their bench, reviewers the review desk, admins the jobs."""
    target = {"technician": "/bench", "reviewer": "/review"}.get(user.role, "/jobs")
    return RedirectResponse(target, status_code=303)


@router.get("/jobs")
def jobs_page(request: Request, user: Staff) -> Response:
    with database(request).session() as s:
        rows = jobs_with_counts(s)
    return render(request, "pages/jobs.html", rows=rows)


def job_page_response(request: Request, job_id: int, **extra: object) -> Response:
    """The job page, optionally with a one-time message (a new link) or a refusal."""
    with database(request).session() as s:
        sheet = job_sheet(s, job_id)
        if sheet is None:
            raise HTTPException(404, "no such job")
        link_ids = [link.id for link in sheet.links]
        accesses = (
            list(
                s.exec(
                    select(LinkAccess)
                    .where(col(LinkAccess.link_id).in_(link_ids))
                    .order_by(col(LinkAccess.at).desc())
                    .limit(20)
                )
            )
            if link_ids
            else []
        )
    return render(
        request,
        "pages/job.html",
        sheet=sheet,
        accesses=accesses,
        new_link=extra.get("new_link"),
        error=extra.get("error"),
    )


@router.get("/jobs/{job_id}")
def job_page(request: Request, job_id: int, user: Staff) -> Response:
    return job_page_response(request, job_id)


@router.get("/samples/{sample_id}")
def sample_page(request: Request, sample_id: int, user: Staff) -> Response:
    with database(request).session() as s:
        rows = test_rows(
            s, col(LabTest.sample_id) == sample_id, order=(col(LabTest.method), col(LabTest.revision))
        )
        if not rows:
            raise HTTPException(404, "no tests on this sample")
    return render(
        request,
        "pages/sample.html",
        rows=rows,
        sample=rows[0].sample,
        location=rows[0].location,
        job=rows[0].job,
    )
