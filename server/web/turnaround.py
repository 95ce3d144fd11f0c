"""Turnaround: when each test was received, handed in, approved and issued, per job, and the
jobs late against their due date (for reviewers and admins)."""

from __future__ import annotations

from datetime import date, datetime
from typing import Annotated
from urllib.parse import urlencode

from fastapi import APIRouter, Depends, HTTPException, Request
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles
from server.db import review_queries
from server.db.tables import Job, User, utcnow
from server.web.jobs import page_number
from server.web.params import IdPath, PageRoute
from server.web.templating import render

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]


def span(start: datetime | None, end: datetime | None) -> str:
    """Elapsed time in days and hours, '—' while the step is not reached."""
    if start is None or end is None:
        return "—"
    hours = max(int((end - start).total_seconds() // 3600), 0)
    return f"{hours // 24} d {hours % 24} h"


def today() -> date:
    return utcnow().date()


@router.get("/turnaround")
def overview(request: Request, user: Checker, late: str = "", open: str = "", done: str = "") -> Response:
    """Every job's turnaround; the late ones first, the most overdue at the top; each section a
    page at a time (``late``, ``open`` and ``done`` name the page of each)."""
    wanted = {"late": page_number(late), "open": page_number(open), "done": page_number(done)}
    with database(request).session() as s:
        sections = {x.name: x for x in review_queries.turnaround_overview(s, today(), wanted)}
    shown = {name: x.page for name, x in sections.items()}

    def url(name: str, page: int) -> str:
        query = {**shown, name: page}
        return "/turnaround?" + urlencode({k: v for k, v in query.items() if v > 1}) + f"#section-{name}"

    return render(
        request,
        "pages/turnaround.html",
        sections=sections,
        late=sections["late"].jobs,
        open_jobs=sections["open"].jobs,
        done=sections["done"].jobs,
        pager={
            name: (
                url(name, x.page - 1) if x.page > 1 else None,
                url(name, x.page + 1) if x.page < x.pages else None,
            )
            for name, x in sections.items()
        },
        spans={j.job.id: span(j.received, j.last_issued) for x in sections.values() for j in x.jobs},
    )


@router.get("/jobs/{job_id}/turnaround")
def job_turnaround(request: Request, job_id: IdPath, user: Checker) -> Response:
    """Times per test of one job, with the job's totals."""
    with database(request).session() as s:
        if s.get(Job, job_id) is None:
            raise HTTPException(404, "no such job")
        (times,) = review_queries.turnaround(s, today(), job_id=job_id)
    return render(
        request,
        "pages/job_turnaround.html",
        times=times,
        spans={
            t.row.test.id: (
                span(t.received, t.submitted),
                span(t.submitted, t.approved),
                span(t.received, t.issued),
            )
            for t in times.tests
        },
    )
