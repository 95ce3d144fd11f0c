"""Requesting tests in bulk: one job, one location or all, samples chosen by their description
or type, one or more methods, given to one person. The page shows what will be created before
anything is; confirming creates it all in one transaction (``jobs.request_tests``)."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Annotated

from fastapi import APIRouter, Depends, Form, Query, Request
from fastapi.responses import RedirectResponse
from sqlmodel import col, select
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles
from server.db.register_queries import PlannedSample, job_locations, plan_request, sample_types, technicians
from server.db.tables import Job, User
from server.engine import METHODS
from server.services import jobs
from server.services.errors import ServiceError, http_status
from server.web.forms import errors_by_path, record_id
from server.web.params import OptionalIdQuery, PageRoute
from server.web.templating import render

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]


def _int(raw: str | None) -> int | None:
    """An id the query or form names, or None for anything that cannot be one (a number past
    the database's integers included, which would fail in the database instead)."""
    return record_id(raw or "")


@dataclass
class Choice:
    """What the form asks for, as typed (kept when the page is shown again)."""

    job_id: int | None = None
    location_id: int | None = None
    described: str = ""
    sample_type: str = ""
    methods: list[str] = field(default_factory=list)
    assign_to: int | None = None


def _page(
    request: Request,
    choice: Choice,
    *,
    preview: bool = False,
    created: int | None = None,
    status_code: int = 200,
    errors: dict[str, str] | None = None,
    problem: str | None = None,
) -> Response:
    errors = dict(errors or {})
    plan: list[PlannedSample] = []
    with database(request).session() as s:
        all_jobs = list(s.exec(select(Job).order_by(col(Job.code))))
        job = s.get(Job, choice.job_id) if choice.job_id else None
        locations = job_locations(s, job.id or 0) if job else []
        types = sample_types(s, job.id or 0) if job else []
        people = technicians(s)
        if choice.job_id is not None and job is None:
            errors["job_id"] = "choose a job from the list"
        if choice.location_id is not None and choice.location_id not in {loc.id for loc in locations}:
            errors["location_id"] = "choose a location of this job, or all"
        unknown = [m for m in choice.methods if m not in METHODS]
        if unknown:
            errors["methods"] = f"unknown method(s): {', '.join(unknown)}"
        if choice.assign_to is not None and choice.assign_to not in {p.id for p in people}:
            errors["assign_to"] = "choose a person from the list, or nobody yet"
        if preview and not choice.methods:
            errors["methods"] = "choose at least one method"
        if preview and job and not errors:
            plan = plan_request(
                s, job.id or 0, choice.methods, choice.location_id, choice.described, choice.sample_type
            )
    n_new = sum(len(p.new) for p in plan)
    n_skipped = sum(len(p.existing) for p in plan)
    if preview and job and not errors and not plan:
        problem = problem or "No sample of this job matches; widen the choice and show again."
    return render(
        request,
        "pages/requests.html",
        status_code=422 if errors and status_code == 200 else status_code,
        choice=choice,
        jobs=all_jobs,
        job=job,
        locations=locations,
        types=types,
        people=people,
        methods=sorted(METHODS.values(), key=lambda m: m.title),
        titles={m.id: m.title for m in METHODS.values()},
        plan=plan if preview and not errors else [],
        n_new=n_new,
        n_skipped=n_skipped,
        created=created,
        errors=errors,
        problem=problem,
    )


@router.get("/requests")
def requests_page(
    request: Request,
    user: Checker,
    job_id: str | None = None,
    location_id: str | None = None,
    described: str = "",
    sample_type: str = "",
    methods: Annotated[list[str] | None, Query()] = None,
    assign_to: str | None = None,
    preview: str | None = None,
    created: OptionalIdQuery = None,
) -> Response:
    choice = Choice(
        _int(job_id),
        _int(location_id),
        described.strip(),
        sample_type.strip(),
        methods or [],
        _int(assign_to),
    )
    return _page(request, choice, preview=preview == "1" and choice.job_id is not None, created=created)


@router.post("/requests")
def create_requests(
    request: Request,
    user: Checker,
    job_id: Annotated[str, Form()] = "",
    sample_ids: Annotated[list[str] | None, Form()] = None,
    methods: Annotated[list[str] | None, Form()] = None,
    assign_to: Annotated[str, Form()] = "",
    location_id: Annotated[str, Form()] = "",
    described: Annotated[str, Form()] = "",
    sample_type: Annotated[str, Form()] = "",
) -> Response:
    """Create exactly what the preview showed: the chosen methods on the listed samples, any
    method a sample has by now left out (one transaction)."""
    choice = Choice(_int(job_id), _int(location_id), described, sample_type, methods or [], _int(assign_to))
    ids = [i for i in (_int(x) for x in sample_ids or []) if i is not None]
    if choice.job_id is None or not ids or not choice.methods:
        return _page(
            request, choice, preview=True, problem="Nothing was requested: show what will be created first."
        )
    try:
        made = jobs.request_tests(
            database(request), user, ids, choice.methods, choice.assign_to, skip_existing=True
        )
    except ServiceError as exc:
        errors = errors_by_path(getattr(exc, "errors", []))
        return _page(
            request,
            choice,
            preview=True,
            status_code=http_status(exc),
            errors={"assign_to" if k == "assigned_to_id" else k: v for k, v in errors.items()},
            problem=f"Nothing was requested: {exc}.",
        )
    return RedirectResponse(f"/requests?job_id={choice.job_id}&created={len(made)}", status_code=303)
