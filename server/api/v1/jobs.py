"""Work in: clients, jobs, locations, samples and schedule imports (S6), over the JSON API v1.

Thin routes: parse, authorise as the page does, call the service the page calls, answer JSON.
Registration (clients, jobs, locations, samples) and import are for reviewers and admins, as
their pages are; reading jobs and samples is for everyone signed in, as the job pages are.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Annotated, Any, Literal

from fastapi import APIRouter, Body, File, Query, Request, UploadFile
from sqlmodel import Session, col, select

from server.api.v1 import pages
from server.api.v1.auth import ClientReader, Importer, Reader, Registrar
from server.api.v1.params import MAX_ID, IsoDateTime, PathId
from server.api.v1.problems import ProblemRoute, problems
from server.api.v1.schemas import (
    CLIENT_IN,
    JOB_IN,
    LOCATION,
    SAMPLE_IN,
    ClientIn,
    ClientOut,
    ClientPage,
    ClientRef,
    ImportOut,
    JobIn,
    JobOut,
    JobPage,
    LabTestBrief,
    LocationIn,
    LocationOut,
    LocationPage,
    SampleIn,
    SampleOut,
    SamplePage,
)
from server.auth.sessions import database
from server.db.job_list import JobFilter, JobRow, jobs_after
from server.db.tables import Client, Job, LabTest, Location, Sample, utcnow
from server.services import imports, jobs, samples
from server.services.errors import NotFound
from server.services.fields import refuse
from server.services.imports import FILE_MAX_BYTES, Target

router = APIRouter(prefix="/api/v1", route_class=ProblemRoute, tags=["jobs"])

READ = problems(401, 404, 422, 429)
WRITE = problems(400, 401, 403, 404, 422, 429)


def _found(s: Session, job_id: int) -> Job:
    job = s.get(Job, job_id)
    if job is None:
        raise NotFound(f"job {job_id} does not exist")
    return job


# --- clients ----------------------------------------------------------------------------------


def _client(client: Client) -> ClientOut:
    return ClientOut.model_validate(client, from_attributes=True)


@router.get("/clients", response_model=ClientPage, responses=problems(401, 403, 422, 429))
def list_clients(
    request: Request, who: ClientReader, cursor: pages.Cursor = None, limit: pages.Limit = pages.DEFAULT_LIMIT
) -> ClientPage:
    """The laboratory's clients, in the order they were registered (reviewers and admins)."""
    after, limit = pages.decode(cursor), pages.capped(limit)
    with database(request).session() as s:
        query = select(Client).order_by(col(Client.id)).limit(limit + 1)
        if after is not None:
            query = query.where(col(Client.id) > after)
        rows = list(s.exec(query))
    items, following = pages.page(rows, limit, lambda c: c.id or 0)
    return ClientPage(items=[_client(c) for c in items], next=following)


@router.post("/clients", status_code=201, response_model=ClientOut, responses=WRITE)
def create_client(
    request: Request,
    who: Registrar,
    body: Annotated[
        ClientIn,
        Body(openapi_examples={"client": {"summary": "a new client", "value": CLIENT_IN}}),
    ],
) -> ClientOut:
    """Register a client (its name unique whatever its case), as the clients page does."""
    return _client(jobs.create_client(database(request), who.user, **body.model_dump()))


# --- jobs -------------------------------------------------------------------------------------


def _job(row: JobRow) -> JobOut:
    job = row.job
    return JobOut(
        id=job.id or 0,
        code=job.code,
        title=job.title,
        site=job.site,
        client=ClientRef(id=job.client_id, name=row.client),
        order_reference=job.order_reference,
        received_at=job.received_at,
        due_date=job.due_date,
        standards=job.standards,
        notes=job.notes,
        status=row.status,
        samples=row.samples,
        tests_to_approve=row.tests_to_approve,
        issued_reports=row.issued_reports,
    )


def _job_row(s: Session, job_id: int) -> JobRow:
    """The job as the list shows it (with its counts): the list's own query, from its id."""
    found = jobs_after(s, JobFilter(), utcnow().date(), after_id=job_id - 1, limit=1)
    if not found or found[0].job.id != job_id:
        raise NotFound(f"job {job_id} does not exist")
    return found[0]


def _aware(when: datetime | None) -> datetime | None:
    """A time without a zone is read as UTC (the zone every stored time is in)."""
    if when is None or when.tzinfo is not None:
        return when
    return when.replace(tzinfo=UTC)


JobStatus = Literal["open", "overdue", "reported"]  # job_list.STATUS_CHOICES but "" (every job)


@router.get("/jobs", response_model=JobPage, responses=READ)
def list_jobs(
    request: Request,
    who: Reader,
    status: Annotated[
        JobStatus | None,
        Query(description="reported: an issued report; open: none yet; overdue: open, past due"),
    ] = None,
    client_id: Annotated[
        int | None, Query(ge=1, le=MAX_ID, description="only this client's jobs", examples=[3])
    ] = None,
    updated_since: Annotated[
        IsoDateTime | None,
        Query(
            description="only jobs with a change at or after this time (ISO 8601; no zone is UTC): "
            "any audited change of the job, its locations, samples, tests or reports",
            examples=["2026-11-30T00:00:00Z"],
        ),
    ] = None,
    q: Annotated[
        str, Query(description="search: job number, client, site or title", examples=["Harrow"])
    ] = "",
    cursor: pages.Cursor = None,
    limit: pages.Limit = pages.DEFAULT_LIMIT,
) -> JobPage:
    """Every job of the laboratory, filtered, a page at a time in the order they were registered."""
    after, limit = pages.decode(cursor), pages.capped(limit)
    with database(request).session() as s:
        rows = jobs_after(
            s,
            JobFilter(q=q, status=status or ""),
            utcnow().date(),
            after_id=after,
            limit=limit + 1,
            client_id=client_id,
            updated_since=_aware(updated_since),
        )
    items, following = pages.page(rows, limit, lambda r: r.job.id or 0)
    return JobPage(items=[_job(r) for r in items], next=following)


@router.post("/jobs", status_code=201, response_model=JobOut, responses=WRITE)
def create_job(
    request: Request,
    who: Registrar,
    body: Annotated[JobIn, Body(openapi_examples={"job": {"summary": "a new job", "value": JOB_IN}})],
) -> JobOut:
    """Register a job (its number unique in the laboratory), as the new-job page does."""
    form = jobs.JobForm(**body.model_dump())
    job = jobs.save_job(database(request), who.user, form)
    with database(request).session() as s:
        return _job(_job_row(s, job.id or 0))


@router.get("/jobs/{job_id}", response_model=JobOut, responses=READ)
def get_job(request: Request, job_id: PathId, who: Reader) -> JobOut:
    with database(request).session() as s:
        return _job(_job_row(s, job_id))


# --- locations --------------------------------------------------------------------------------


@router.get("/jobs/{job_id}/locations", response_model=LocationPage, responses=READ)
def list_locations(
    request: Request,
    job_id: PathId,
    who: Reader,
    cursor: pages.Cursor = None,
    limit: pages.Limit = pages.DEFAULT_LIMIT,
) -> LocationPage:
    after, limit = pages.decode(cursor), pages.capped(limit)
    with database(request).session() as s:
        _found(s, job_id)
        query = select(Location).where(Location.job_id == job_id).order_by(col(Location.id)).limit(limit + 1)
        if after is not None:
            query = query.where(col(Location.id) > after)
        rows = list(s.exec(query))
    items, following = pages.page(rows, limit, lambda loc: loc.id or 0)
    return LocationPage(
        items=[LocationOut.model_validate(loc, from_attributes=True) for loc in items], next=following
    )


@router.post("/jobs/{job_id}/locations", status_code=201, response_model=LocationOut, responses=WRITE)
def create_location(
    request: Request,
    job_id: PathId,
    who: Registrar,
    body: Annotated[
        LocationIn,
        Body(
            openapi_examples={
                "borehole": {
                    "summary": "a borehole with its coordinates",
                    "value": {k: v for k, v in LOCATION.items() if k not in ("id", "job_id")},
                }
            }
        ),
    ],
) -> LocationOut:
    """Add a borehole, trial pit... to the job, as the job page's location form does."""
    loc = samples.add_location(database(request), who.user, job_id, **body.model_dump())
    return LocationOut.model_validate(loc, from_attributes=True)


# --- samples ----------------------------------------------------------------------------------


def _samples(s: Session, rows: list[Sample]) -> list[SampleOut]:
    """Samples with their location code and their tests (two more queries for the page)."""
    ids = [smp.id for smp in rows]
    codes = {
        loc.id: loc.code
        for loc in s.exec(select(Location).where(col(Location.id).in_({smp.location_id for smp in rows})))
    }
    tests: dict[int, list[LabTestBrief]] = {}
    if ids:
        for test in s.exec(select(LabTest).where(col(LabTest.sample_id).in_(ids)).order_by(col(LabTest.id))):
            tests.setdefault(test.sample_id, []).append(
                LabTestBrief(id=test.id or 0, method=test.method, status=test.status, revision=test.revision)
            )
    out = []
    for smp in rows:
        values: dict[str, Any] = smp.model_dump()
        values.update(location=codes.get(smp.location_id, ""), tests=tests.get(smp.id or 0, []))
        out.append(SampleOut.model_validate(values))
    return out


@router.get("/jobs/{job_id}/samples", response_model=SamplePage, responses=READ)
def list_samples(
    request: Request,
    job_id: PathId,
    who: Reader,
    cursor: pages.Cursor = None,
    limit: pages.Limit = pages.DEFAULT_LIMIT,
) -> SamplePage:
    """The job's samples (withdrawn ones too, marked), with the tests requested on each."""
    after, limit = pages.decode(cursor), pages.capped(limit)
    with database(request).session() as s:
        _found(s, job_id)
        query = select(Sample).where(Sample.job_id == job_id).order_by(col(Sample.id)).limit(limit + 1)
        if after is not None:
            query = query.where(col(Sample.id) > after)
        rows = list(s.exec(query))
        items, following = pages.page(rows, limit, lambda smp: smp.id or 0)
        return SamplePage(items=_samples(s, items), next=following)


@router.post("/jobs/{job_id}/samples", status_code=201, response_model=SampleOut, responses=WRITE)
def create_sample(
    request: Request,
    job_id: PathId,
    who: Registrar,
    body: Annotated[
        SampleIn,
        Body(openapi_examples={"sample": {"summary": "a sample with an Atterberg test", "value": SAMPLE_IN}}),
    ],
) -> SampleOut:
    """Register a sample at a location of the job and request its tests, in one transaction."""
    with database(request).session() as s:
        _found(s, job_id)
        loc = s.get(Location, body.location_id)
    if loc is None or loc.job_id != job_id:
        refuse("location_id", "choose a location of this job (add one first)")
    values = body.model_dump(exclude={"location_id"})
    sample = samples.add_sample(database(request), who.user, loc.id or 0, **values)
    with database(request).session() as s:
        return _samples(s, [sample])[0]


# --- imports ----------------------------------------------------------------------------------

_SCHEDULE = (
    "location,sample,top,base,type,description,tests\r\n"
    "BH3,BH3-U2,2.0,2.45,U100,Firm grey silty CLAY,atterberg\r\n"
)


@router.post(
    "/jobs/{job_id}/imports",
    response_model=ImportOut,
    responses=problems(400, 401, 403, 404, 422, 429),
    openapi_extra={
        "requestBody": {
            "content": {
                "multipart/form-data": {
                    "examples": {
                        "csv": {
                            "summary": "a CSV schedule (the file's content shown as text)",
                            "value": {"file": _SCHEDULE},
                        }
                    }
                }
            }
        }
    },
)
def import_schedule(
    request: Request,
    job_id: PathId,
    who: Importer,
    file: Annotated[UploadFile, File(description="a .csv, .xlsx or .ags schedule (the name gives the kind)")],
    dry_run: Annotated[bool, Query(description="check and count only; store nothing")] = False,
) -> ImportOut:
    """Import a sample schedule into this job with the service of the import page and of
    ``claybench import``: everything or, on any refused cell, nothing (422, each cell in ``errors``)."""
    with database(request).session() as s:
        job = _found(s, job_id)
    content = file.file.read(FILE_MAX_BYTES + 1)
    schedule = imports.read_schedule(file.filename or "", content)
    plan = imports.import_schedule(
        database(request), who.user, schedule, Target(job.code), dry_run=dry_run, source=file.filename or ""
    )
    return ImportOut.model_validate(plan.outcome(dry_run))
