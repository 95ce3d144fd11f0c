"""Use-cases for the register of work: the laboratory, clients, jobs and test requests
(locations and samples are in ``samples``, receipt in ``receipt``)."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from datetime import UTC, datetime, time
from typing import Any

from sqlmodel import Session, col, select

from server.db.queries import same_name
from server.db.session import Database
from server.db.tables import Client, Job, Laboratory, LabTest, Report, Sample, User
from server.engine import METHODS
from server.services import audit
from server.services.errors import NotFound, invalid
from server.services.fields import Checks, Day, refuse
from server.workflow.states import Status
from server.workflow.vocabulary import STANDARDS


def set_laboratory(
    db: Database, actor: User | None, name: str, address: str, accreditation: str
) -> Laboratory:
    """The laboratory's details printed on reports (one record, created or updated)."""
    with db.transaction() as s:
        lab = s.exec(select(Laboratory)).first()
        before = lab.model_dump() if lab else None
        lab = lab or Laboratory(name=name)
        lab.name, lab.address, lab.accreditation = name, address, accreditation
        s.add(lab)
        s.flush()
        audit.record(s, actor, "laboratory", lab.id or 0, "update", before=before, after=lab.model_dump())
        return lab


def client_values(name: str, contact: str = "", email: str = "", postal_address: str = "") -> dict[str, str]:
    """A client's fields checked, or every refusal raised at once."""
    checks = Checks()
    values = {
        "name": checks.text("name", name, "client name", 200, required=True),
        "contact": checks.text("contact", contact, "contact person", 200),
        "email": checks.email("email", email, "e-mail"),
        "postal_address": checks.text("postal_address", postal_address, "postal address", 500),
    }
    checks.done()
    return values


def _unique_client_name(s: Session, name: str, client_id: int | None = None) -> None:
    found = s.exec(select(Client).where(same_name(Client.name, name))).first()
    if found and found.id != client_id:
        refuse("name", f"a client named {found.name!r} is already registered")


def create_client(
    db: Database, actor: User | None, name: str, contact: str = "", email: str = "", postal_address: str = ""
) -> Client:
    """Register a client; names are unique whatever their case, so one firm is one record."""
    values = client_values(name, contact, email, postal_address)
    with db.transaction() as s:
        return client_in(s, actor, values)


def client_in(s: Session, actor: User | None, values: dict[str, str]) -> Client:
    """Add a checked client inside the caller's transaction."""
    _unique_client_name(s, values["name"])
    client = Client(
        name=values["name"],
        contact=values.get("contact", ""),
        email=values.get("email", ""),
        postal_address=values.get("postal_address", ""),
    )
    s.add(client)
    s.flush()
    audit.record(s, actor, "client", client.id or 0, "create", after=client.model_dump())
    return client


def update_client(
    db: Database, actor: User, client_id: int, name: str, contact: str, email: str, postal_address: str
) -> Client:
    values = client_values(name, contact, email, postal_address)
    with db.transaction() as s:
        client = s.get(Client, client_id)
        if client is None:
            raise NotFound(f"client {client_id} does not exist")
        _unique_client_name(s, values["name"], client_id)
        before = client.model_dump()
        for key, value in values.items():
            setattr(client, key, value)
        s.add(client)
        s.flush()
        audit.record(s, actor, "client", client_id, "update", before=before, after=client.model_dump())
        return client


@dataclass(frozen=True)
class JobForm:
    """A job's details as a person or a file gives them (dates as date or YYYY-MM-DD text)."""

    client_id: int
    code: str
    title: str = ""
    site: str = ""
    order_reference: str = ""
    received_on: Day = None
    due_date: Day = None
    standards: str = "astm"
    notes: str = ""


def job_values(form: JobForm) -> dict[str, Any]:
    """A job's fields checked (the due date not before the received date), or every refusal."""
    checks = Checks()
    code = checks.code("code", form.code, "job number", 32)
    values: dict[str, Any] = {
        "code": code,
        "title": checks.text("title", form.title, "title", 200) or code,
        "site": checks.text("site", form.site, "site", 200),
        "order_reference": checks.text("order_reference", form.order_reference, "order reference", 100),
        "due_date": checks.day("due_date", form.due_date, "due date"),
        "standards": checks.choice("standards", form.standards, "family of standards", STANDARDS),
        "notes": checks.text("notes", form.notes, "notes", 2000),
    }
    received = checks.day("received_on", form.received_on, "received date")
    if received is not None:
        values["received_at"] = datetime.combine(received, time(), UTC)
        if values["due_date"] is not None and values["due_date"] < received:
            checks.add("due_date", f"due date {values['due_date']} is before the received date {received}")
    checks.done()
    return values


def _job_checks(s: Session, values: dict[str, Any], client_id: int, job_id: int | None = None) -> None:
    if s.get(Client, client_id) is None:
        refuse("client_id", "choose a registered client")
    found = s.exec(select(Job).where(Job.code == values["code"])).first()
    if found and found.id != job_id:
        refuse("code", f"job number {values['code']} is already used")


def create_job(
    db: Database,
    actor: User | None,
    client_id: int,
    code: str,
    title: str = "",
    site: str = "",
    due_date: Day = None,
    **details: Any,
) -> Job:
    """Register a job (the job number unique in the laboratory); ``details`` are the other
    fields of ``JobForm`` (order reference, received date, standards, notes)."""
    return save_job(db, actor, JobForm(client_id, code, title, site, due_date=due_date, **details))


def save_job(db: Database, actor: User | None, form: JobForm, job_id: int | None = None) -> Job:
    """Create a job, or change one. The job number is printed on every report, so once a
    report of the job is issued the number no longer changes."""
    values = job_values(form)
    with db.transaction() as s:
        return job_in(s, actor, form.client_id, values, job_id)


def job_in(
    s: Session, actor: User | None, client_id: int, values: dict[str, Any], job_id: int | None = None
) -> Job:
    """Create (``job_id`` None) or change a job with checked values, in the caller's transaction."""
    _job_checks(s, values, client_id, job_id)
    if job_id is None:
        job = Job(client_id=client_id, **values)
        before = None
    else:
        found = s.get(Job, job_id)
        if found is None:
            raise NotFound(f"job {job_id} does not exist")
        job = found
        if values["code"] != job.code and _has_reports(s, job_id):
            refuse("code", f"job number {job.code} is on an issued report and cannot change")
        before = job.model_dump(mode="json")
        values.setdefault("received_at", job.received_at)
        job.client_id = client_id
        for key, value in values.items():
            setattr(job, key, value)
    s.add(job)
    s.flush()
    action = "create" if before is None else "update"
    audit.record(s, actor, "job", job.id or 0, action, before=before, after=job.model_dump(mode="json"))
    return job


def _has_reports(s: Session, job_id: int) -> bool:
    return s.exec(select(Report.id).where(Report.job_id == job_id).limit(1)).first() is not None


def request_tests(
    db: Database,
    actor: User,
    sample_ids: Iterable[int],
    methods: Iterable[str],
    assigned_to_id: int | None = None,
    *,
    skip_existing: bool = False,
) -> list[LabTest]:
    """Request each method on each sample (one transaction for the whole batch).

    With ``skip_existing`` a method a sample already has (a revision not superseded) is left
    out, so a bulk request can be repeated over a borehole without doubling its tests.
    """
    with db.transaction() as s:
        return requests_in(
            s, actor, list(sample_ids), list(methods), assigned_to_id, skip_existing=skip_existing
        )


def requests_in(
    s: Session,
    actor: User | None,
    sample_ids: list[int],
    methods: list[str],
    assigned_to_id: int | None = None,
    *,
    skip_existing: bool = False,
) -> list[LabTest]:
    """The test requests of ``request_tests`` inside the caller's transaction, for the
    use-cases that register a sample and request its tests in one go (a sample form, a
    delivery, an imported schedule)."""
    unknown = [m for m in methods if m not in METHODS]
    if unknown:
        raise invalid("methods", f"unknown method(s): {', '.join(unknown)}")
    if assigned_to_id is not None:
        assignee = s.get(User, assigned_to_id)
        if assignee is None or not assignee.active:
            raise invalid("assigned_to_id", f"user {assigned_to_id} does not exist or is not active")
    existing: set[tuple[int, str]] = set()
    if skip_existing and sample_ids:
        existing = {
            (sid, m)
            for sid, m in s.exec(
                select(LabTest.sample_id, LabTest.method).where(
                    col(LabTest.sample_id).in_(sample_ids), LabTest.status != Status.superseded.value
                )
            )
        }
    created: list[LabTest] = []
    for sample_id in sample_ids:
        sample = s.get(Sample, sample_id)
        if sample is None:
            raise NotFound(f"sample {sample_id} does not exist")
        if sample.withdrawn_at is not None:
            raise invalid("sample_ids", f"sample {sample.code} is withdrawn: no tests can be requested on it")
        for m in methods:
            if (sample_id, m) in existing:
                continue
            test = LabTest(
                sample_id=sample_id,
                method=m,
                status=Status.requested.value,
                requested_by_id=actor.id if actor else None,
                assigned_to_id=assigned_to_id,
            )
            s.add(test)
            s.flush()
            audit.record(
                s,
                actor,
                "lab_test",
                test.id or 0,
                "request",
                after={
                    "sample_id": sample_id,
                    "method": m,
                    "status": test.status,
                    "assigned_to_id": assigned_to_id,
                },
            )
            created.append(test)
    return created
