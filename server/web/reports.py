"""Issuing reports of a job and managing its client links (reviewers and admins)."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, Form, HTTPException, Request
from fastapi.responses import RedirectResponse
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles
from server.db.tables import ShareLink, User
from server.services import links, reports
from server.services.errors import ServiceError
from server.web.jobs import job_page_response

router = APIRouter(dependencies=[Depends(csrf_protect)], include_in_schema=False)
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]


@router.post("/jobs/{job_id}/reports")
def issue_report(request: Request, job_id: int, user: Checker) -> Response:
    try:
        report = reports.issue_report(
            database(request), user, job_id, request.app.state.settings.public_base_url
        )
    except ServiceError as exc:
        return job_page_response(request, job_id, error=str(exc))
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
        return job_page_response(request, job_id, error=str(exc))
    url = f"{request.app.state.settings.public_base_url.rstrip('/')}/share/{made.token}"
    return job_page_response(request, job_id, new_link=url)


@router.post("/links/{link_id}/revoke")
def revoke_link(request: Request, link_id: int, user: Checker) -> Response:
    with database(request).session() as s:
        link = s.get(ShareLink, link_id)
    if link is None:
        raise HTTPException(404, "no such link")
    links.revoke_link(database(request), user, link_id)
    return RedirectResponse(f"/jobs/{link.job_id}#links", status_code=303)
