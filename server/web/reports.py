"""Issuing and re-issuing reports of a job (queued for a render worker; the job page follows the
render), and managing its client links (reviewers and admins)."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, Form, HTTPException, Request
from fastapi.responses import HTMLResponse, RedirectResponse
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles, require_user
from server.db.tables import Job, Report, ReportRender, ShareLink, User
from server.services import links, renders, reports
from server.services.errors import ServiceError, http_status
from server.tasks.queue import enqueue
from server.web.forms import record_id, refusal_of
from server.web.job_page import job_page_response, keep_new_link
from server.web.params import IdPath, IdsQuery, PageRoute
from server.web.refusals import refusals_as_http
from server.web.security_headers import csp_with_style_nonce, style_nonce
from server.web.templating import render

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]
Staff = Annotated[User, Depends(require_user)]


def _base_url(request: Request) -> str:
    return str(request.app.state.settings.public_base_url)


@router.post("/jobs/{job_id}/reports")
def issue_report(
    request: Request,
    job_id: IdPath,
    user: Checker,
    choice: Annotated[str, Form()] = "all",
    sample: Annotated[list[str] | None, Form()] = None,
    password: Annotated[str, Form()] = "",
    overlap_decision: Annotated[str, Form()] = "",
) -> Response:
    """Issue a report, signed with the issuer's password: of every approved test, of the samples
    not yet reported ("unreported"), or of the ticked samples only ("chosen")."""
    chosen: list[int] | None = None
    if choice == "chosen":
        chosen = [i for i in (record_id(x) for x in sample or []) if i is not None]
    elif choice == "unreported":
        chosen = reports.unreported_sample_ids(database(request), job_id)
    try:
        queued = renders.request_issue(
            database(request),
            user,
            job_id,
            _base_url(request),
            chosen,
            password=password,
            overlap_decision=overlap_decision,
        )
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        form = {"choice": choice, "sample": sample or [], "overlap_decision": overlap_decision}
        return job_page_response(
            request, job_id, http_status(exc), error=problem, issue_errors=errors, issue_form=form
        )
    enqueue(database(request), queued.id or 0)
    return RedirectResponse(f"/jobs/{job_id}?done=rendering#renders", status_code=303)


@router.post("/reports/{report_id}/reissue")
def reissue_report(
    request: Request, report_id: IdPath, user: Checker, password: Annotated[str, Form()] = ""
) -> Response:
    """Revision n + 1 of an issued report after an amendment, signed with the issuer's password;
    revision n is marked superseded."""
    with database(request).session() as s:
        old = s.get(Report, report_id)
    if old is None:
        raise HTTPException(404, "no such report")
    try:
        queued = renders.request_reissue(
            database(request), user, report_id, _base_url(request), password=password
        )
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        message = errors.get("password") or problem or str(exc)
        return job_page_response(
            request, old.job_id, http_status(exc), error=f"Re-issue of {old.number}: {message}"
        )
    enqueue(database(request), queued.id or 0)
    return RedirectResponse(f"/jobs/{old.job_id}?done=rendering#renders", status_code=303)


@router.get("/jobs/{job_id}/renders")
def job_renders_fragment(request: Request, job_id: IdPath, user: Staff) -> Response:
    """Where the job's report renders stand, for the job page to poll while one waits. When none
    waits any more the page reloads, to list the issued report (or show the failure)."""
    with database(request).session() as s:
        if s.get(Job, job_id) is None:
            raise HTTPException(404, "no such job")
        states = renders.job_renders(s, job_id)
    waiting = any(st.render.status in renders.WAITING for st in states)
    response = render(request, "partials/job_renders.html", renders=states, job_id=job_id)
    if not waiting:
        response.headers["HX-Refresh"] = "true"
    return response


@router.post("/renders/{render_id}/retry")
def retry_render(request: Request, render_id: IdPath, user: Checker) -> Response:
    """Queue a failed render again; it renders from the same signature."""
    with database(request).session() as s:
        found = s.get(ReportRender, render_id)
    if found is None:
        raise HTTPException(404, "no such render")
    try:
        renders.retry(database(request), user, render_id)
    except ServiceError as exc:
        return job_page_response(request, found.job_id, http_status(exc), error=str(exc))
    enqueue(database(request), render_id)
    return RedirectResponse(f"/jobs/{found.job_id}?done=rendering#renders", status_code=303)


@router.get("/jobs/{job_id}/reports/preview")
def preview_report(
    request: Request,
    job_id: IdPath,
    user: Checker,
    choice: str = "all",
    sample: IdsQuery = None,
) -> Response:
    """The report as it would be issued now, as a web page marked "preview, not issued", with no
    report number of its own (nothing is stored). Charts are the same SVG the PDF carries."""
    return _preview(request, user, job_id, (sample or []) if choice == "chosen" else None)


@router.post("/jobs/{job_id}/reports/preview")
def preview_report_from_form(
    request: Request,
    job_id: IdPath,
    user: Checker,
    choice: Annotated[str, Form()] = "all",
    sample: Annotated[list[str] | None, Form()] = None,
) -> Response:
    """The preview asked from the issue form. A POST: as a GET the form would put its CSRF token
    (and a password typed already) into the address, the browser's history and the logs."""
    chosen = (
        [i for i in (record_id(x) for x in sample or []) if i is not None] if choice == "chosen" else None
    )
    return _preview(request, user, job_id, chosen)


def _preview(request: Request, user: User, job_id: int, chosen: list[int] | None) -> Response:
    nonce = style_nonce()
    try:
        html = reports.preview_report_html(
            database(request), user, job_id, _base_url(request), chosen, style_nonce=nonce
        )
    except ServiceError as exc:
        if http_status(exc) == 422:
            return job_page_response(request, job_id, error=str(exc))
        raise HTTPException(http_status(exc), str(exc)) from exc
    headers = {"Cache-Control": "private, no-store", "Content-Security-Policy": csp_with_style_nonce(nonce)}
    return HTMLResponse(html, headers=headers)


@router.post("/jobs/{job_id}/links")
def create_link(
    request: Request,
    job_id: IdPath,
    user: Checker,
    days_valid: Annotated[str, Form()] = "30",
    label: Annotated[str, Form()] = "",
    scope: Annotated[str, Form()] = "job",
) -> Response:
    """A new client link, shown once; ``scope`` "client" opens every job of the job's client."""
    typed = days_valid.strip()
    days = int(typed) if typed.isdigit() and len(typed) <= 4 else 0  # past 9999: refused as out of range
    try:
        made = links.create_link(database(request), user, job_id, days, label, whole_client=scope == "client")
    except ServiceError as exc:
        errors, _ = refusal_of(exc)
        return job_page_response(request, job_id, http_status(exc), error=str(exc), link_errors=errors)
    keep_new_link(request, job_id, f"{_base_url(request).rstrip('/')}/share/{made.token}")
    return RedirectResponse(f"/jobs/{job_id}?done=link-created#links", status_code=303)


@router.get("/jobs/{job_id}/links")
def job_links_page(request: Request, job_id: IdPath, user: Checker) -> Response:
    """Every link that opens this job, its state, and the full log of its use."""
    return _job_links(request, job_id)


def _job_links(request: Request, job_id: int, status_code: int = 200, **extra: object) -> Response:
    with refusals_as_http():
        found = links.job_links(database(request), job_id)
    return render(request, "pages/job_links.html", status_code=status_code, found=found, **extra)


@router.post("/links/{link_id}/revoke")
def revoke_link(
    request: Request,
    link_id: IdPath,
    user: Checker,
    job_id: Annotated[int | None, Form()] = None,
    reason: Annotated[str, Form()] = "",
) -> Response:
    """Withdraw a client link with a reason; a refused reason is shown on the job's links page."""
    with database(request).session() as s:
        link = s.get(ShareLink, link_id)
    if link is None:
        raise HTTPException(404, "no such link")
    try:
        links.revoke_link(database(request), user, link_id, reason)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        back_job = job_id if job_id is not None else link.job_id
        if back_job is None:
            raise HTTPException(http_status(exc), str(exc)) from exc
        return _job_links(
            request,
            back_job,
            http_status(exc),
            errors=errors,
            problem=problem,
            link_id=link_id,
            reason=reason,
        )
    back = job_id if job_id is not None else link.job_id
    return RedirectResponse(f"/jobs/{back}/links" if back is not None else "/jobs", status_code=303)
