"""The audit trail pages: the newest events, the trail of a job and of a sample, and their CSV.

For reviewers and admins. Reads only; the CSV holds every event of the record, the page shows
them a page at a time in the order they were written (ISO/IEC 17025:2017 cl. 7.5.2, 8.4).
The pages name each event and the person who did it; the CSV keeps the ids and usernames an
export is read by.
"""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, HTTPException, Request
from fastapi.responses import RedirectResponse
from sqlmodel import Session
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles
from server.db import audit_queries
from server.db.queries import users_by_id
from server.db.tables import AuditEvent, Job, Location, Sample, User
from server.services import audit
from server.web.params import Count, IdPath, IdQuery, PageRoute
from server.web.templating import render

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]


def _csv(name: str, body: str) -> Response:
    return Response(
        body,
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": f'attachment; filename="{name}"'},
    )


def actors(session: Session, events: list[AuditEvent]) -> dict[int, User]:
    """The people who did these events, by id (one query), so that a row names the person; an
    event of the system itself, or of an account since removed, keeps its recorded actor."""
    return users_by_id(session, (e.actor_id for e in events))


RECENT_PAGE = 100  # events a page of the audit page shows
RECENT_JOBS = 50  # jobs the audit page offers a trail of


@router.get("/audit")
def recent(request: Request, user: Checker, before: Count = 0) -> Response:
    """The laboratory's newest events, newest first, a page at a time (``before``: the events
    older than that one), with a way into the trail of the jobs registered last."""
    with database(request).session() as s:
        events = audit_queries.recent(s, RECENT_PAGE, before or None)
        labels = audit_queries.labels(s, events)
        jobs = audit_queries.recent_jobs(s, RECENT_JOBS)
        older = audit_queries.has_older(s, events[-1].id or 0) if events else False
        people = actors(s, events)
    return render(
        request,
        "pages/audit.html",
        events=events,
        labels=labels,
        actors=people,
        jobs=jobs,
        older_url=f"/audit?before={events[-1].id}" if older else None,
        newest_url="/audit" if before else None,
    )


def _job(request: Request, job_id: int) -> Job:
    with database(request).session() as s:
        job = s.get(Job, job_id)
    if job is None:
        raise HTTPException(404, "no such job")
    return job


def _sample(request: Request, sample_id: int) -> tuple[Sample, Location, Job]:
    with database(request).session() as s:
        sample = s.get(Sample, sample_id)
        location = s.get(Location, sample.location_id) if sample else None
        job = s.get(Job, location.job_id) if location else None
    if sample is None or location is None or job is None:
        raise HTTPException(404, "no such sample")
    return sample, location, job


@router.get("/jobs/{job_id}/trail")
def job_trail(request: Request, job_id: IdPath, user: Checker, offset: Count = 0) -> Response:
    job = _job(request, job_id)
    with database(request).session() as s:
        trail = audit_queries.job_trail(s, job_id, max(offset, 0))
        people = actors(s, trail.events)
    return render(
        request,
        "pages/trail.html",
        trail=trail,
        actors=people,
        title=f"Job {job.code}",
        job=job,
        here=f"/jobs/{job_id}/trail",
        csv_path=f"/jobs/{job_id}/trail.csv",
    )


@router.get("/jobs/{job_id}/trail.csv")
def job_trail_csv(request: Request, job_id: IdPath, user: Checker) -> Response:
    job = _job(request, job_id)
    with database(request).session() as s:
        trail = audit_queries.job_trail(s, job_id, 0, None)
    return _csv(f"audit-{job.code}.csv", audit.csv_text(trail.events, trail.labels))


@router.get("/samples/{sample_id}/trail")
def sample_trail(request: Request, sample_id: IdPath, user: Checker, offset: Count = 0) -> Response:
    sample, location, job = _sample(request, sample_id)
    with database(request).session() as s:
        trail = audit_queries.sample_trail(s, sample_id, max(offset, 0))
        people = actors(s, trail.events)
    return render(
        request,
        "pages/trail.html",
        trail=trail,
        actors=people,
        title=f"Sample {sample.code} ({location.code}, job {job.code})",
        job=job,
        sample=sample,
        here=f"/samples/{sample_id}/trail",
        csv_path=f"/samples/{sample_id}/trail.csv",
    )


@router.get("/samples/{sample_id}/trail.csv")
def sample_trail_csv(request: Request, sample_id: IdPath, user: Checker) -> Response:
    sample, _location, job = _sample(request, sample_id)
    with database(request).session() as s:
        trail = audit_queries.sample_trail(s, sample_id, 0, None)
    return _csv(f"audit-{job.code}-{sample.code}.csv", audit.csv_text(trail.events, trail.labels))


@router.get("/audit/job")
def open_job_trail(request: Request, user: Checker, job_id: IdQuery) -> Response:
    """The job chosen on the audit page (a plain form works without script)."""
    return RedirectResponse(f"/jobs/{job_id}/trail", status_code=303)
