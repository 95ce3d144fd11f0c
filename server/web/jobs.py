"""Each person's start page and the jobs list."""

from __future__ import annotations

import re
from typing import Annotated
from urllib.parse import urlencode

from fastapi import APIRouter, Depends, Request
from fastapi.responses import RedirectResponse
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_user
from server.db.job_list import STATUS_CHOICES, JobFilter, job_page
from server.db.tables import User, utcnow
from server.web.params import PageRoute
from server.web.templating import render

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]

# A page number longer than this is past any real list: it is read as "the last page".
_PAGE_DIGITS = 9
_DIGITS = re.compile(r"[0-9]+")


@router.get("/")
def home(user: Staff) -> Response:
    """Each person's own start: technicians their bench, reviewers the review desk, admins the jobs."""
    target = {"technician": "/bench", "reviewer": "/review"}.get(user.role, "/jobs")
    return RedirectResponse(target, status_code=303)


def page_number(text: str) -> int:
    """The page asked for in the address, read leniently: the address is easy to edit by hand,
    and a wrong page should show a page, not an error. Anything but plain digits is page 1; a
    number too long to be real becomes a huge page, which the list clamps to its last one."""
    text = text.strip()
    if not _DIGITS.fullmatch(text):
        return 1
    if len(text) > _PAGE_DIGITS:
        return 10**_PAGE_DIGITS
    return int(text)


def _jobs_url(wanted: JobFilter, page: int) -> str:
    """The list's address for another page, keeping the search and the status filter."""
    query = {"q": wanted.search, "status": wanted.known_status, "page": str(page)}
    return "/jobs?" + urlencode({k: v for k, v in query.items() if v})


@router.get("/jobs")
def jobs_page(request: Request, user: Staff, q: str = "", status: str = "", page: str = "") -> Response:
    """Every job of the laboratory, searched, filtered by status and shown a page at a time."""
    wanted = JobFilter(q=q, status=status.strip(), page=page_number(page))
    errors: dict[str, str] = {}
    if wanted.status and not wanted.known_status:
        errors["status"] = "Not a status this list knows: every job is shown."
    with database(request).session() as s:
        listing = job_page(s, wanted, utcnow().date())
    return render(
        request,
        "pages/jobs.html",
        listing=listing,
        wanted=wanted,
        errors=errors,
        statuses=STATUS_CHOICES,
        previous_url=_jobs_url(wanted, listing.previous_page) if listing.previous_page else None,
        next_url=_jobs_url(wanted, listing.next_page) if listing.next_page else None,
    )
