"""The register pages: jobs, a job (locations, samples, tests, reports, client links), a sample."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, Form, HTTPException, Request
from fastapi.responses import RedirectResponse
from sqlmodel import col, select
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles, require_user
from server.db.queries import job_sheet, jobs_with_counts, test_rows
from server.db.tables import LabTest, LinkAccess, ShareLink, User
from server.services import links, reports
from server.services.errors import ServiceError
from server.web.templating import render

router = APIRouter(dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]


@router.get("/")
def home(user: Staff) -> Response:
    return RedirectResponse("/review" if user.role == "reviewer" else "/jobs", status_code=303)


@router.get("/jobs")
def jobs_page(request: Request, user: Staff) -> Response:
    with database(request).session() as s:
        rows = jobs_with_counts(s)
    return render(request, "pages/jobs.html", rows=rows)


def _job_page(request: Request, job_id: int, **extra: object) -> Response:
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
    return _job_page(request, job_id)


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


@router.post("/jobs/{job_id}/reports")
def issue_report(request: Request, job_id: int, user: Checker) -> Response:
    try:
        report = reports.issue_report(
            database(request), user, job_id, request.app.state.settings.public_base_url
        )
    except ServiceError as exc:
        return _job_page(request, job_id, error=str(exc))
    return RedirectResponse(f"/jobs/{job_id}#report-{report.id}", status_code=303)


@router.post("/jobs/{job_id}/links")
def create_link(
    request: Request,
    job_id: int,
    user: Checker,
    days_valid: Annotated[int, Form()] = 30,
    label: Annotated[str, Form()] = "",
) -> Response:
    try:
        made = links.create_link(database(request), user, job_id, days_valid, label)
    except ServiceError as exc:
        return _job_page(request, job_id, error=str(exc))
    url = f"{request.app.state.settings.public_base_url.rstrip('/')}/share/{made.token}"
    return _job_page(request, job_id, new_link=url)


@router.post("/links/{link_id}/revoke")
def revoke_link(request: Request, link_id: int, user: Checker) -> Response:
    with database(request).session() as s:
        link = s.get(ShareLink, link_id)
    if link is None:
        raise HTTPException(404, "no such link")
    links.revoke_link(database(request), user, link_id)
    return RedirectResponse(f"/jobs/{link.job_id}#links", status_code=303)
