"""Registration pages: clients, jobs, locations and samples (reviewers and admins).

Every form posts, and either redirects to a page that says what was done (post, redirect,
get) or shows the form again with the typed values and a message at each refused field.
"""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Depends, Form, HTTPException, Request
from fastapi.responses import RedirectResponse
from sqlmodel import col, select
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_roles
from server.db.tables import Client, Job, Location, Sample, User
from server.services import jobs, samples
from server.services.errors import ServiceError, http_status
from server.services.fields import refuse
from server.web.forms import refusal_of
from server.web.job_page import done_message, job_page_response
from server.web.templating import render
from server.workflow.vocabulary import LOCATION_KINDS, SAMPLE_TYPES, STANDARDS

router = APIRouter(dependencies=[Depends(csrf_protect)], include_in_schema=False)
Checker = Annotated[User, Depends(require_roles("reviewer", "admin"))]
Text = Annotated[str, Form()]


def _get(request: Request, table: type[Any], record_id: int) -> Any:
    with database(request).session() as s:
        found = s.get(table, record_id)
    if found is None:
        raise HTTPException(404, f"no such {table.__name__.lower()}")
    return found


def _refused(
    request: Request, exc: ServiceError, template: str, form: dict[str, Any], **context: Any
) -> Response:
    errors, problem = refusal_of(exc)
    return render(
        request, template, status_code=http_status(exc), errors=errors, problem=problem, form=form, **context
    )


# --- clients ----------------------------------------------------------------------------------

CLIENT_FIELDS = ("name", "contact", "email", "postal_address")


def _clients_page(request: Request, status_code: int = 200, **extra: Any) -> Response:
    with database(request).session() as s:
        rows = list(s.exec(select(Client).order_by(col(Client.name))))
    return render(
        request,
        "pages/clients.html",
        status_code=status_code,
        rows=rows,
        form=extra.get("form", dict.fromkeys(CLIENT_FIELDS, "")),
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
        message=done_message(extra.get("done", "")),
    )


@router.get("/clients")
def clients_page(request: Request, user: Checker, done: str = "") -> Response:
    return _clients_page(request, done=done)


@router.post("/clients")
def add_client(
    request: Request,
    user: Checker,
    name: Text = "",
    contact: Text = "",
    email: Text = "",
    postal_address: Text = "",
) -> Response:
    form = {"name": name, "contact": contact, "email": email, "postal_address": postal_address}
    try:
        jobs.create_client(database(request), user, name, contact, email, postal_address)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _clients_page(request, http_status(exc), form=form, errors=errors, problem=problem)
    return RedirectResponse("/clients?done=client-added", status_code=303)


@router.get("/clients/{client_id}")
def client_page(request: Request, client_id: int, user: Checker, done: str = "") -> Response:
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
    request: Request,
    client_id: int,
    user: Checker,
    name: Text = "",
    contact: Text = "",
    email: Text = "",
    postal_address: Text = "",
) -> Response:
    client = _get(request, Client, client_id)
    form = {"name": name, "contact": contact, "email": email, "postal_address": postal_address}
    try:
        jobs.update_client(database(request), user, client_id, name, contact, email, postal_address)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _client_form(
            request, client, form, status_code=http_status(exc), errors=errors, problem=problem
        )
    return RedirectResponse(f"/clients/{client_id}?done=client-saved", status_code=303)


# --- jobs -------------------------------------------------------------------------------------

JOB_FIELDS = (
    "client_id",
    "code",
    "title",
    "site",
    "order_reference",
    "received_on",
    "due_date",
    "standards",
    "notes",
)


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
def new_job_page(request: Request, user: Checker, client: int | None = None) -> Response:
    form: dict[str, Any] = dict.fromkeys(JOB_FIELDS, "")
    form |= {"standards": "astm", "client_id": client or ""}
    return _job_form_page(request, None, form)


def _form_job(client_id: str, **values: str) -> jobs.JobForm:
    return jobs.JobForm(int(client_id) if client_id.isdigit() and len(client_id) < 10 else 0, **values)


@router.post("/jobs/new")
def create_job(
    request: Request,
    user: Checker,
    client_id: Text = "",
    code: Text = "",
    title: Text = "",
    site: Text = "",
    order_reference: Text = "",
    received_on: Text = "",
    due_date: Text = "",
    standards: Text = "astm",
    notes: Text = "",
) -> Response:
    values = {
        "code": code,
        "title": title,
        "site": site,
        "order_reference": order_reference,
        "received_on": received_on,
        "due_date": due_date,
        "standards": standards,
        "notes": notes,
    }
    try:
        job = jobs.save_job(database(request), user, _form_job(client_id, **values))
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        form = {"client_id": client_id, **values}
        return _job_form_page(
            request, None, form, status_code=http_status(exc), errors=errors, problem=problem
        )
    return RedirectResponse(f"/jobs/{job.id}?done=created", status_code=303)


@router.get("/jobs/{job_id}/edit")
def edit_job_page(request: Request, job_id: int, user: Checker) -> Response:
    job = _get(request, Job, job_id)
    return _job_form_page(request, job, _job_form_of(job))


@router.post("/jobs/{job_id}/edit")
def save_job(
    request: Request,
    job_id: int,
    user: Checker,
    client_id: Text = "",
    code: Text = "",
    title: Text = "",
    site: Text = "",
    order_reference: Text = "",
    received_on: Text = "",
    due_date: Text = "",
    standards: Text = "astm",
    notes: Text = "",
) -> Response:
    job = _get(request, Job, job_id)
    values = {
        "code": code,
        "title": title,
        "site": site,
        "order_reference": order_reference,
        "received_on": received_on,
        "due_date": due_date,
        "standards": standards,
        "notes": notes,
    }
    try:
        jobs.save_job(database(request), user, _form_job(client_id, **values), job_id)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        form = {"client_id": client_id, **values}
        return _job_form_page(
            request, job, form, status_code=http_status(exc), errors=errors, problem=problem
        )
    return RedirectResponse(f"/jobs/{job_id}?done=saved", status_code=303)


# --- locations --------------------------------------------------------------------------------


@router.post("/jobs/{job_id}/locations")
def add_location(
    request: Request,
    job_id: int,
    user: Checker,
    code: Text = "",
    kind: Text = "borehole",
    easting: Text = "",
    northing: Text = "",
    ground_level_m: Text = "",
) -> Response:
    _get(request, Job, job_id)
    form = {
        "code": code,
        "kind": kind,
        "easting": easting,
        "northing": northing,
        "ground_level_m": ground_level_m,
    }
    try:
        samples.add_location(database(request), user, job_id, code, kind, easting, northing, ground_level_m)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return job_page_response(
            request,
            job_id,
            status_code=http_status(exc),
            location_form=form,
            location_errors=errors,
            error=problem,
        )
    return RedirectResponse(f"/jobs/{job_id}?done=location-added#locations", status_code=303)


@router.get("/locations/{location_id}/edit")
def edit_location_page(request: Request, location_id: int, user: Checker) -> Response:
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
    request: Request,
    location_id: int,
    user: Checker,
    code: Text = "",
    kind: Text = "borehole",
    easting: Text = "",
    northing: Text = "",
    ground_level_m: Text = "",
) -> Response:
    loc = _get(request, Location, location_id)
    form = {
        "code": code,
        "kind": kind,
        "easting": easting,
        "northing": northing,
        "ground_level_m": ground_level_m,
    }
    try:
        samples.update_location(
            database(request),
            user,
            location_id,
            samples.LocationForm(code, kind, easting, northing, ground_level_m),
        )
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _location_form(
            request, loc, form, status_code=http_status(exc), errors=errors, problem=problem
        )
    return RedirectResponse(f"/jobs/{loc.job_id}?done=location-saved#locations", status_code=303)


# --- samples ----------------------------------------------------------------------------------

SAMPLE_FIELDS = ("location_id", "code", "depth_from_m", "depth_to_m", "sample_type", "description", "remarks")


def _location_id(raw: str) -> int:
    return int(raw) if raw.isdigit() and len(raw) < 10 else 0


@router.post("/jobs/{job_id}/samples")
def add_sample(
    request: Request,
    job_id: int,
    user: Checker,
    location_id: Text = "",
    code: Text = "",
    depth_from_m: Text = "",
    depth_to_m: Text = "",
    sample_type: Text = "disturbed",
    description: Text = "",
    remarks: Text = "",
    methods: Annotated[list[str] | None, Form()] = None,
) -> Response:
    _get(request, Job, job_id)
    form = {
        "location_id": location_id,
        "code": code,
        "depth_from_m": depth_from_m,
        "depth_to_m": depth_to_m,
        "sample_type": sample_type,
        "description": description,
        "remarks": remarks,
        "methods": methods or [],
    }
    try:
        with database(request).session() as s:
            loc = s.get(Location, _location_id(location_id))
        if loc is None or loc.job_id != job_id:
            refuse("location_id", "choose a location of this job (add one first)")
        samples.add_sample(
            database(request),
            user,
            loc.id or 0,
            code,
            depth_from_m,
            depth_to_m,
            sample_type,
            description,
            remarks,
            methods or [],
        )
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return job_page_response(
            request,
            job_id,
            status_code=http_status(exc),
            sample_form=form,
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
def edit_sample_page(request: Request, sample_id: int, user: Checker) -> Response:
    sample = _get(request, Sample, sample_id)
    return _sample_form(request, sample, sample.model_dump())


@router.post("/samples/{sample_id}/edit")
def save_sample(
    request: Request,
    sample_id: int,
    user: Checker,
    location_id: Text = "",
    code: Text = "",
    depth_from_m: Text = "",
    depth_to_m: Text = "",
    sample_type: Text = "disturbed",
    description: Text = "",
    remarks: Text = "",
) -> Response:
    sample = _get(request, Sample, sample_id)
    form = {
        "location_id": location_id,
        "code": code,
        "depth_from_m": depth_from_m,
        "depth_to_m": depth_to_m,
        "sample_type": sample_type,
        "description": description,
        "remarks": remarks,
    }
    changes = samples.SampleForm(code, depth_from_m, depth_to_m, sample_type, description, remarks)
    try:
        samples.update_sample(database(request), user, sample_id, _location_id(location_id), changes)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _sample_form(
            request, sample, form, status_code=http_status(exc), errors=errors, problem=problem
        )
    return RedirectResponse(f"/samples/{sample_id}?done=sample-saved", status_code=303)


@router.post("/samples/{sample_id}/withdraw")
def withdraw_sample(request: Request, sample_id: int, user: Checker, reason: Text = "") -> Response:
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
