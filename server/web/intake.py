"""Registration pages: clients, jobs, locations and samples (reviewers and admins).

Every form posts, and either redirects to a page that says what was done (post, redirect,
get) or shows the form again with the typed values and a message at each refused field. Each
form's fields are one model (``ClientFields``...), shared by the page that adds a record and
the page that edits it.
"""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Depends, Form, HTTPException, Request
from fastapi.responses import RedirectResponse
from pydantic import BaseModel
from sqlmodel import col, select
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles
from server.db.tables import Client, Job, Location, Sample, User
from server.services import jobs, samples
from server.services.errors import ServiceError, http_status
from server.services.fields import refuse
from server.web.forms import record_id, refusal_of
from server.web.job_page import done_message, job_page_response
from server.web.params import IdPath, PageRoute
from server.web.templating import render
from server.workflow.vocabulary import LOCATION_KINDS, SAMPLE_TYPES, STANDARDS

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]
Text = Annotated[str, Form()]


class ClientFields(BaseModel):
    name: str = ""
    contact: str = ""
    email: str = ""
    postal_address: str = ""


class JobFields(BaseModel):
    client_id: str = ""
    code: str = ""
    title: str = ""
    site: str = ""
    order_reference: str = ""
    received_on: str = ""
    due_date: str = ""
    standards: str = "astm"
    notes: str = ""

    def job_form(self) -> jobs.JobForm:
        values = self.model_dump(exclude={"client_id"})
        return jobs.JobForm(record_id(self.client_id) or 0, **values)


class LocationFields(BaseModel):
    code: str = ""
    kind: str = "borehole"
    easting: str = ""
    northing: str = ""
    ground_level_m: str = ""

    def location_form(self) -> samples.LocationForm:
        return samples.LocationForm(**self.model_dump())


class SampleFields(BaseModel):
    location_id: str = ""
    code: str = ""
    depth_from_m: str = ""
    depth_to_m: str = ""
    sample_type: str = "disturbed"
    description: str = ""
    remarks: str = ""

    def sample_form(self) -> samples.SampleForm:
        own = SampleFields.model_fields.keys() - {"location_id"}
        return samples.SampleForm(**self.model_dump(include=set(own)))


class NewSampleFields(SampleFields):
    methods: list[str] = []


def _get(request: Request, table: type[Any], record_id: int) -> Any:
    with database(request).session() as s:
        found = s.get(table, record_id)
    if found is None:
        raise HTTPException(404, f"no such {table.__name__.lower()}")
    return found


# --- clients ----------------------------------------------------------------------------------


def _clients_page(request: Request, status_code: int = 200, **extra: Any) -> Response:
    with database(request).session() as s:
        rows = list(s.exec(select(Client).order_by(col(Client.name))))
    return render(
        request,
        "pages/clients.html",
        status_code=status_code,
        rows=rows,
        form=extra.get("form", ClientFields().model_dump()),
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
        message=done_message(extra.get("done", "")),
    )


@router.get("/clients")
def clients_page(request: Request, user: Checker, done: str = "") -> Response:
    return _clients_page(request, done=done)


@router.post("/clients")
def add_client(request: Request, user: Checker, fields: Annotated[ClientFields, Form()]) -> Response:
    try:
        jobs.create_client(database(request), user, **fields.model_dump())
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        form = fields.model_dump()
        return _clients_page(request, http_status(exc), form=form, errors=errors, problem=problem)
    return RedirectResponse("/clients?done=client-added", status_code=303)


@router.get("/clients/{client_id}")
def client_page(request: Request, client_id: IdPath, user: Checker, done: str = "") -> Response:
    client = _get(request, Client, client_id)
    return _client_form(request, client, client.model_dump(), done=done)


def _client_form(request: Request, client: Client, form: dict[str, Any], **extra: Any) -> Response:
    with database(request).session() as s:
        own_jobs = list(s.exec(select(Job).where(Job.client_id == client.id).order_by(col(Job.code))))
    return render(
        request,
        "pages/client.html",
        status_code=extra.get("status_code", 200),
        client=client,
        jobs=own_jobs,
        form=form,
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
        message=done_message(extra.get("done", "")),
    )


@router.post("/clients/{client_id}")
def save_client(
    request: Request, client_id: IdPath, user: Checker, fields: Annotated[ClientFields, Form()]
) -> Response:
    client = _get(request, Client, client_id)
    try:
        jobs.update_client(database(request), user, client_id, **fields.model_dump())
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _client_form(
            request, client, fields.model_dump(), status_code=http_status(exc), errors=errors, problem=problem
        )
    return RedirectResponse(f"/clients/{client_id}?done=client-saved", status_code=303)


# --- jobs -------------------------------------------------------------------------------------


def _job_form_page(request: Request, job: Job | None, form: dict[str, Any], **extra: Any) -> Response:
    with database(request).session() as s:
        clients = {str(c.id): c.name for c in s.exec(select(Client).order_by(col(Client.name)))}
    return render(
        request,
        "pages/job_form.html",
        status_code=extra.get("status_code", 200),
        job=job,
        clients=clients,
        standards=STANDARDS,
        form=form,
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
    )


def _job_form_of(job: Job) -> dict[str, Any]:
    form: dict[str, Any] = job.model_dump()
    form["received_on"] = job.received_at.date().isoformat()
    form["due_date"] = job.due_date.isoformat() if job.due_date else ""
    return form


@router.get("/jobs/new")
def new_job_page(request: Request, user: Checker, client: str = "") -> Response:
    form = JobFields(client_id=str(record_id(client) or "")).model_dump()
    return _job_form_page(request, None, form)


def _save_job(request: Request, user: User, fields: JobFields, job: Job | None) -> Response:
    """Register a job (``job`` None) or save its edit, then open it; or show the refusals."""
    try:
        saved = jobs.save_job(database(request), user, fields.job_form(), job.id if job else None)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _job_form_page(
            request, job, fields.model_dump(), status_code=http_status(exc), errors=errors, problem=problem
        )
    return RedirectResponse(f"/jobs/{saved.id}?done={'saved' if job else 'created'}", status_code=303)


@router.post("/jobs/new")
def create_job(request: Request, user: Checker, fields: Annotated[JobFields, Form()]) -> Response:
    return _save_job(request, user, fields, None)


@router.get("/jobs/{job_id}/edit")
def edit_job_page(request: Request, job_id: IdPath, user: Checker) -> Response:
    job = _get(request, Job, job_id)
    return _job_form_page(request, job, _job_form_of(job))


@router.post("/jobs/{job_id}/edit")
def save_job(
    request: Request, job_id: IdPath, user: Checker, fields: Annotated[JobFields, Form()]
) -> Response:
    return _save_job(request, user, fields, _get(request, Job, job_id))


# --- locations --------------------------------------------------------------------------------


@router.post("/jobs/{job_id}/locations")
def add_location(
    request: Request, job_id: IdPath, user: Checker, fields: Annotated[LocationFields, Form()]
) -> Response:
    _get(request, Job, job_id)
    try:
        samples.add_location(database(request), user, job_id, **fields.model_dump())
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return job_page_response(
            request,
            job_id,
            status_code=http_status(exc),
            location_form=fields.model_dump(),
            location_errors=errors,
            error=problem,
        )
    return RedirectResponse(f"/jobs/{job_id}?done=location-added#locations", status_code=303)


@router.get("/locations/{location_id}/edit")
def edit_location_page(request: Request, location_id: IdPath, user: Checker) -> Response:
    loc = _get(request, Location, location_id)
    return _location_form(request, loc, loc.model_dump())


def _location_form(request: Request, loc: Location, form: dict[str, Any], **extra: Any) -> Response:
    job = _get(request, Job, loc.job_id)
    return render(
        request,
        "pages/location_form.html",
        status_code=extra.get("status_code", 200),
        location=loc,
        job=job,
        kinds=LOCATION_KINDS,
        form={k: ("" if v is None else v) for k, v in form.items()},
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
    )


@router.post("/locations/{location_id}/edit")
def save_location(
    request: Request, location_id: IdPath, user: Checker, fields: Annotated[LocationFields, Form()]
) -> Response:
    loc = _get(request, Location, location_id)
    try:
        samples.update_location(database(request), user, location_id, fields.location_form())
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _location_form(
            request, loc, fields.model_dump(), status_code=http_status(exc), errors=errors, problem=problem
        )
    return RedirectResponse(f"/jobs/{loc.job_id}?done=location-saved#locations", status_code=303)


# --- samples ----------------------------------------------------------------------------------


@router.post("/jobs/{job_id}/samples")
def add_sample(
    request: Request, job_id: IdPath, user: Checker, fields: Annotated[NewSampleFields, Form()]
) -> Response:
    _get(request, Job, job_id)
    try:
        with database(request).session() as s:
            loc = s.get(Location, record_id(fields.location_id) or 0)
        if loc is None or loc.job_id != job_id:
            refuse("location_id", "choose a location of this job (add one first)")
        form = fields.sample_form()
        samples.add_sample(
            database(request),
            user,
            loc.id or 0,
            form.code,
            form.depth_from_m,
            form.depth_to_m,
            form.sample_type,
            form.description,
            form.remarks,
            fields.methods,
        )
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return job_page_response(
            request,
            job_id,
            status_code=http_status(exc),
            sample_form=fields.model_dump(),
            sample_errors=errors,
            error=problem,
        )
    return RedirectResponse(f"/jobs/{job_id}?done=sample-added#add-sample", status_code=303)


def _sample_form(request: Request, sample: Sample, form: dict[str, Any], **extra: Any) -> Response:
    with database(request).session() as s:
        job = s.get(Job, sample.job_id)
        locations = {
            str(loc.id): loc.code for loc in s.exec(select(Location).where(Location.job_id == sample.job_id))
        }
        entered = bool(samples.entered_samples(s, [sample.id or 0]))
    return render(
        request,
        "pages/sample_form.html",
        status_code=extra.get("status_code", 200),
        sample=sample,
        job=job,
        locations=locations,
        sample_types=SAMPLE_TYPES,
        entered=entered,
        form=form,
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
        withdraw_reason=extra.get("withdraw_reason", ""),
    )


@router.get("/samples/{sample_id}/edit")
def edit_sample_page(request: Request, sample_id: IdPath, user: Checker) -> Response:
    sample = _get(request, Sample, sample_id)
    return _sample_form(request, sample, sample.model_dump())


@router.post("/samples/{sample_id}/edit")
def save_sample(
    request: Request, sample_id: IdPath, user: Checker, fields: Annotated[SampleFields, Form()]
) -> Response:
    sample = _get(request, Sample, sample_id)
    try:
        location_id = record_id(fields.location_id) or 0
        samples.update_sample(database(request), user, sample_id, location_id, fields.sample_form())
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _sample_form(
            request, sample, fields.model_dump(), status_code=http_status(exc), errors=errors, problem=problem
        )
    return RedirectResponse(f"/samples/{sample_id}?done=sample-saved", status_code=303)


@router.post("/samples/{sample_id}/withdraw")
def withdraw_sample(request: Request, sample_id: IdPath, user: Checker, reason: Text = "") -> Response:
    sample = _get(request, Sample, sample_id)
    try:
        samples.withdraw_sample(database(request), user, sample_id, reason)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _sample_form(
            request,
            sample,
            sample.model_dump(),
            status_code=http_status(exc),
            errors=errors,
            problem=problem,
            withdraw_reason=reason,
        )
    return RedirectResponse(f"/jobs/{sample.job_id}?done=withdrawn", status_code=303)
