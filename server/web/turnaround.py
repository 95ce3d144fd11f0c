"""Turnaround: when each test was received, handed in, approved and issued, per job, and the
jobs late against their due date (for reviewers and admins)."""

from __future__ import annotations

from datetime import date, datetime
from typing import Annotated

from fastapi import APIRouter, Depends, HTTPException, Request
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles
from server.db import review_queries
from server.db.tables import Job, User, utcnow
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
def overview(request: Request, user: Checker) -> Response:
    """Every job's turnaround; the late ones first, the most overdue at the top."""
    with database(request).session() as s:
        jobs = review_queries.turnaround(s, today())
    late = sorted((j for j in jobs if j.overdue), key=lambda j: (-j.days_late, j.job.code))
    open_jobs = [j for j in jobs if not j.overdue and not j.complete]
    done = [j for j in jobs if j.complete]
    return render(
        request,
        "pages/turnaround.html",
        late=late,
        open_jobs=open_jobs,
        done=done,
        spans={j.job.id: span(j.received, j.last_issued) for j in jobs},
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
