"""The job page (locations, samples, tests, reports, client links, and the forms that add a
location or a sample) and the sample page."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Depends, HTTPException, Request
from sqlmodel import col, select
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_user, signed_in_user
from server.db.job_list import job_sheet_page
from server.db.queries import test_rows, users_by_id
from server.db.tables import Job, LabTest, LinkAccess, Location, Sample, User
from server.engine import METHODS
from server.services.renders import WAITING, RenderState, job_renders
from server.services.reports import REPORT_MEANING
from server.web.jobs import page_number
from server.web.params import IdPath, PageRoute
from server.web.templating import render
from server.workflow.vocabulary import (
    CONDITIONS,
    LOCATION_KINDS,
    METHODS_BY_STANDARDS,
    SAMPLE_TYPES,
    STANDARDS,
)

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]
LINK_LOG_ROLES = ("reviewer", "admin")  # who sees when and from where a client link was used

DONE = {
    "client-added": "Client registered.",
    "client-saved": "Client details saved.",
    "created": "Job registered. Add its locations and samples below, or import a schedule.",
    "saved": "Job details saved.",
    "location-added": "Location added.",
    "location-saved": "Location saved.",
    "sample-added": "Sample registered.",
    "sample-saved": "Sample saved.",
    "withdrawn": "Sample withdrawn; it stays listed here and is left out of reports.",
    "imported": "Schedule imported. The audit trail records the file and what it changed.",
    "rendering": "Report signed. It is being rendered; it appears below when it is issued.",
    "link-created": "Client link created: copy it now from Client links below, it is shown only this once.",
}
# A new client link's address, kept in the session from the POST that made it until the job page
# shows it once (post, redirect, get). The session cookie is signed, not encrypted: the address
# rides only in the cookie of the person who made the link, for one redirect, and is then removed.
NEW_LINK_KEY = "new_link"


def done_message(done: str) -> str | None:
    return DONE.get(done)


def keep_new_link(request: Request, job_id: int, url: str) -> None:
    """Hold a new link's address for the job page the redirect lands on."""
    request.session[NEW_LINK_KEY] = {"job": job_id, "url": url}


def _take_new_link(request: Request, job_id: int) -> str | None:
    """The address held for this job's page, removed as it is shown (a reload no longer has it)."""
    held = request.session.get(NEW_LINK_KEY)
    if not isinstance(held, dict) or held.get("job") != job_id:
        return None
    del request.session[NEW_LINK_KEY]
    return str(held.get("url", "")) or None


def _render_message(states: list[RenderState]) -> str:
    """What the page says after a report was signed: still rendering, issued, or failed (the page
    reloads itself when the render ends, under the same address)."""
    newest = states[0].render if states else None
    if newest is None or newest.status in WAITING:
        return DONE["rendering"]
    if newest.status == "done":
        return f"Report {newest.number} revision {newest.revision} issued: it is listed under Reports below."
    return f"The render of report {newest.number} revision {newest.revision} failed: nothing was issued."


def offered_methods(standards: str) -> dict[str, str]:
    """The methods a sample form offers, the job's family of standards first."""
    first = METHODS_BY_STANDARDS.get(standards, ())
    ordered = [*first, *(m for m in METHODS if m not in first)]
    return {m: METHODS[m].title for m in ordered}


EMPTY_LOCATION = {"code": "", "kind": "borehole", "easting": "", "northing": "", "ground_level_m": ""}
EMPTY_SAMPLE: dict[str, Any] = {
    "location_id": "",
    "code": "",
    "depth_from_m": "",
    "depth_to_m": "",
    "sample_type": "disturbed",
    "description": "",
    "remarks": "",
    "methods": [],
}


def job_page_response(
    request: Request, job_id: int, status_code: int = 200, *, samples_page: int = 1, **extra: Any
) -> Response:
    """The job page, optionally with a one-time message (a new link), a refusal, or a
    location or sample form shown again with its refused fields; its samples a page at a time."""
    with database(request).session() as s:
        found = job_sheet_page(s, job_id, samples_page)
        if found is None:
            raise HTTPException(404, "no such job")
        sheet = found.sheet
        viewer = signed_in_user(request)
        # Who opened a client's link, and from which address, is the client's business: shown to
        # reviewers and admins, who manage the links, and never fetched for a technician.
        link_ids = [link.id for link in sheet.links] if viewer and viewer.role in LINK_LOG_ROLES else []
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
        render_states = job_renders(s, job_id)
        people = users_by_id(
            s,
            [x.received_by_id for xs in sheet.samples.values() for x in xs]
            + [x.withdrawn_by_id for xs in sheet.samples.values() for x in xs],
        )
    message = _render_message(render_states) if extra.get("done") == "rendering" else extra.get("message")
    return render(
        request,
        "pages/job.html",
        status_code=status_code,
        sheet=sheet,
        sample_page=found,
        samples_url=f"/jobs/{job_id}?samples=",
        accesses=accesses,
        people=people,
        new_link=extra.get("new_link"),
        error=extra.get("error"),
        link_errors=extra.get("link_errors", {}),
        message=message,
        issue_form=extra.get("issue_form", {"choice": "all", "sample": [], "overlap_decision": ""}),
        issue_errors=extra.get("issue_errors", {}),
        report_meaning=REPORT_MEANING,
        renders=render_states,
        job_id=job_id,
        location_form=extra.get("location_form", EMPTY_LOCATION),
        location_errors=extra.get("location_errors", {}),
        sample_form=extra.get("sample_form", EMPTY_SAMPLE),
        sample_errors=extra.get("sample_errors", {}),
        kinds=LOCATION_KINDS,
        sample_types=SAMPLE_TYPES,
        conditions=CONDITIONS,
        standards=STANDARDS,
        methods=offered_methods(sheet.job.standards),
        location_options={
            str(loc.id): f"{LOCATION_KINDS.get(loc.kind, loc.kind)} {loc.code}" for loc in sheet.locations
        },
    )


@router.get("/jobs/{job_id}")
def job_page(request: Request, job_id: IdPath, user: Staff, done: str = "", samples: str = "") -> Response:
    """The job; ``samples`` is the page of its samples (a hand-edited one shows a page anyway)."""
    return job_page_response(
        request,
        job_id,
        message=done_message(done),
        done=done,
        new_link=_take_new_link(request, job_id) if done == "link-created" else None,
        samples_page=page_number(samples),
    )


@router.get("/samples/{sample_id}")
def sample_page(request: Request, sample_id: IdPath, user: Staff, done: str = "") -> Response:
    with database(request).session() as s:
        sample = s.get(Sample, sample_id)
        if sample is None:
            raise HTTPException(404, "no such sample")
        location = s.get(Location, sample.location_id)
        job = s.get(Job, sample.job_id)
        rows = test_rows(
            s, col(LabTest.sample_id) == sample_id, order=(col(LabTest.method), col(LabTest.revision))
        )
        people = users_by_id(s, [sample.received_by_id, sample.withdrawn_by_id])
    return render(
        request,
        "pages/sample.html",
        rows=rows,
        sample=sample,
        location=location,
        job=job,
        people=people,
        kinds=LOCATION_KINDS,
        sample_types=SAMPLE_TYPES,
        conditions=CONDITIONS,
        message=done_message(done),
    )
