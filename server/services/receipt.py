"""Receiving a delivery of samples: one row at a time, each saved on its own.

At the bench a technician books a delivery in row by row (so a dropped connection loses at
most the row being typed). A row names its location and sample; a sample the job's schedule
already lists is marked received, one it does not list is registered there and then. Every
receipt records when it arrived, who received it, its condition and where it is stored
(ISO/IEC 17025:2017 cl. 7.4: the receipt and condition of test items are recorded).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from datetime import UTC, datetime, timedelta
from typing import Any

from sqlmodel import Session, select

from server.db.session import Database
from server.db.tables import Job, Location, Sample, User
from server.services import audit
from server.services.errors import NotFound
from server.services.fields import Checks, Number, refuse
from server.services.jobs import requests_in
from server.services.samples import (
    LocationForm,
    SampleForm,
    identity_refusal,
    location_in,
    location_values,
    sample_in,
    sample_values,
)
from server.workflow.vocabulary import CONDITIONS

STORE_MAX = 64
FUTURE_SLACK = timedelta(minutes=10)  # a tablet's clock may run a little fast (common practice)


@dataclass(frozen=True)
class ReceiptRow:
    """One sample of a delivery as the receipt sheet sends it. For a sample the schedule
    already lists, blank location, depth and type keep the schedule's values, so that the
    technician types its code and what the delivery shows (condition, store)."""

    code: str
    location: str = ""
    depth_from_m: Number = None
    depth_to_m: Number = None
    sample_type: str = ""
    description: str = ""
    condition: str = "intact"
    stored_at: str = ""
    location_kind: str = "borehole"  # for a location the job does not have yet
    methods: tuple[str, ...] = ()


@dataclass(frozen=True)
class Receipt:
    sample: Sample
    created: bool  # registered at receipt (not on the schedule before)


def _blank(value: Number) -> bool:
    return value is None or (isinstance(value, str) and not value.strip())


def _as_scheduled(s: Session, job_id: int, row: ReceiptRow) -> ReceiptRow:
    """The row with the schedule's location, depth and type where it leaves them blank."""
    sample = s.exec(select(Sample).where(Sample.job_id == job_id, Sample.code == row.code.strip())).first()
    if sample is None:
        return row
    loc = s.get(Location, sample.location_id)
    keep_depth = _blank(row.depth_from_m) and _blank(row.depth_to_m)
    return replace(
        row,
        location=row.location.strip() or (loc.code if loc else ""),
        depth_from_m=sample.depth_from_m if keep_depth else row.depth_from_m,
        depth_to_m=sample.depth_to_m if keep_depth else row.depth_to_m,
        sample_type=row.sample_type.strip() or sample.sample_type,
    )


def receive_sample(
    db: Database,
    actor: User,
    job_id: int,
    row: ReceiptRow,
    received_at: datetime | None = None,
    received_by_id: int | None = None,
) -> Receipt:
    """Book one sample of a delivery in (one transaction with its audit events)."""
    with db.session() as s:
        row = _as_scheduled(s, job_id, row)
    checks = Checks()
    location = location_values(
        LocationForm(row.location, row.location_kind), checks, {"code": "location", "kind": "location_kind"}
    )
    if not row.sample_type.strip():
        checks.add("sample_type", "choose the sample type: the schedule does not list this sample")
    values = sample_values(
        SampleForm(
            row.code, row.depth_from_m, row.depth_to_m, row.sample_type or "disturbed", row.description
        ),
        checks,
    )
    receipt: dict[str, Any] = {
        "condition": checks.choice("condition", row.condition, "condition on receipt", CONDITIONS),
        "stored_at": checks.text("stored_at", row.stored_at, "store location", STORE_MAX),
    }
    if received_at is not None and received_at.tzinfo is None:
        received_at = received_at.replace(tzinfo=UTC)  # a time without a zone is taken as UTC
    if received_at is not None and received_at > datetime.now(UTC) + FUTURE_SLACK:
        checks.add("received_at", "the time of receipt is in the future")
    checks.done()
    when = received_at or datetime.now(UTC)
    with db.transaction() as s:
        if s.get(Job, job_id) is None:
            raise NotFound(f"job {job_id} does not exist")
        receiver = s.get(User, received_by_id) if received_by_id is not None else actor
        if receiver is None or not receiver.active:
            refuse("received_by_id", "choose an active member of the laboratory")
        loc = s.exec(
            select(Location).where(Location.job_id == job_id, Location.code == location["code"])
        ).first()
        if loc is None:
            loc = location_in(s, actor, job_id, location)
        sample = s.exec(select(Sample).where(Sample.job_id == job_id, Sample.code == values["code"])).first()
        receipt |= {"received_at": when, "received_by_id": receiver.id}
        created = sample is None
        if sample is None:
            sample = sample_in(s, actor, loc, values | receipt)
        else:
            _receive_scheduled(s, actor, sample, loc, values, receipt)
        requests_in(s, actor, [sample.id or 0], list(row.methods), skip_existing=True)
        return Receipt(sample, created)


def _receive_scheduled(
    s: Session, actor: User, sample: Sample, loc: Location, values: dict[str, Any], receipt: dict[str, Any]
) -> None:
    """Mark a scheduled sample received; what the delivery shows differently is corrected while
    nothing is entered, as at any other edit."""
    if sample.withdrawn_at is not None:
        refuse("code", f"sample {sample.code} is withdrawn")
    if sample.received_at is not None:
        refuse(
            "code", f"sample {sample.code} was received already, on {sample.received_at:%Y-%m-%d %H:%M} UTC"
        )
    values = {**values, "location_id": loc.id}
    if not values["description"]:
        values.pop("description")
    values.pop("remarks", None)
    refusal = identity_refusal(s, sample, values)
    if refusal:
        field, message = refusal
        refuse("location" if field == "location_id" else field, message)  # the receipt sheet's name
    before = sample.model_dump(mode="json")
    for key, value in (values | receipt).items():
        setattr(sample, key, value)
    s.add(sample)
    s.flush()
    audit.record(
        s, actor, "sample", sample.id or 0, "receive", before=before, after=sample.model_dump(mode="json")
    )
