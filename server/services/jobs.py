"""Use-cases for the register of work: clients, jobs, locations, samples, test requests."""

from __future__ import annotations

from collections.abc import Iterable
from datetime import date

from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import Client, Job, Laboratory, LabTest, Location, Sample, User
from server.engine import METHODS
from server.services import audit
from server.services.errors import Conflict, NotFound, invalid
from server.workflow.states import Status


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


def create_client(db: Database, actor: User, name: str, contact: str = "") -> Client:
    name = name.strip()
    if not name:
        raise invalid("name", "a client name is required")
    with db.transaction() as s:
        if s.exec(select(Client).where(Client.name == name)).first():
            raise Conflict(f"client {name!r} exists already")
        client = Client(name=name, contact=contact.strip())
        s.add(client)
        s.flush()
        audit.record(s, actor, "client", client.id or 0, "create", after=client.model_dump())
        return client


def create_job(
    db: Database,
    actor: User,
    client_id: int,
    code: str,
    title: str,
    site: str = "",
    due_date: date | None = None,
) -> Job:
    code = code.strip()
    if not code:
        raise invalid("code", "a job code is required")
    with db.transaction() as s:
        if s.get(Client, client_id) is None:
            raise NotFound(f"client {client_id} does not exist")
        if s.exec(select(Job).where(Job.code == code)).first():
            raise Conflict(f"job {code!r} exists already")
        job = Job(
            client_id=client_id, code=code, title=title.strip() or code, site=site.strip(), due_date=due_date
        )
        s.add(job)
        s.flush()
        audit.record(s, actor, "job", job.id or 0, "create", after=job.model_dump(mode="json"))
        return job


def add_location(db: Database, actor: User, job_id: int, code: str, kind: str = "borehole") -> Location:
    with db.transaction() as s:
        if s.get(Job, job_id) is None:
            raise NotFound(f"job {job_id} does not exist")
        loc = Location(job_id=job_id, code=code.strip(), kind=kind)
        s.add(loc)
        s.flush()
        audit.record(s, actor, "location", loc.id or 0, "create", after=loc.model_dump())
        return loc


def add_sample(
    db: Database,
    actor: User,
    location_id: int,
    code: str,
    depth_from_m: float,
    depth_to_m: float,
    sample_type: str = "disturbed",
    description: str = "",
) -> Sample:
    if depth_from_m < 0:
        raise invalid("depth_from_m", "depth from must be 0 m or more")
    if depth_to_m < depth_from_m:
        raise invalid("depth_to_m", f"depth to ({depth_to_m:g} m) is above depth from ({depth_from_m:g} m)")
    with db.transaction() as s:
        if s.get(Location, location_id) is None:
            raise NotFound(f"location {location_id} does not exist")
        sample = Sample(
            location_id=location_id,
            code=code.strip(),
            depth_from_m=depth_from_m,
            depth_to_m=depth_to_m,
            sample_type=sample_type,
            description=description.strip(),
        )
        s.add(sample)
        s.flush()
        audit.record(s, actor, "sample", sample.id or 0, "create", after=sample.model_dump(mode="json"))
        return sample


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
    methods = list(methods)
    sample_ids = list(sample_ids)
    unknown = [m for m in methods if m not in METHODS]
    if unknown:
        raise invalid("methods", f"unknown method(s): {', '.join(unknown)}")
    created: list[LabTest] = []
    with db.transaction() as s:
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
        for sample_id in sample_ids:
            if s.get(Sample, sample_id) is None:
                raise NotFound(f"sample {sample_id} does not exist")
            for m in methods:
                if (sample_id, m) in existing:
                    continue
                test = LabTest(
                    sample_id=sample_id,
                    method=m,
                    status=Status.requested.value,
                    requested_by_id=actor.id,
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
