"""Receiving a delivery at the bench, and printing sample labels (any signed-in person).

``/jobs/{id}/receive`` is one row a sample: a row posts on its own (htmx swaps the saved row
into the list and a fresh row, focused, in its place; without JavaScript the page posts and
comes back the same way), so that a delivery of forty tubes is forty short rows, typed or
tapped, and a dropped connection loses only the row being typed. The delivery's time, receiver,
condition and store stay filled in from row to row.

Labels are PDFs (``server.reports.labels``): an A4 sheet or one label a page for a small label
printer, each with a QR code of the sample page's address.
"""

from __future__ import annotations

import re
from datetime import UTC, datetime
from typing import Annotated, Any
from urllib.parse import urlencode

from fastapi import APIRouter, Depends, Form, HTTPException, Request
from fastapi.responses import RedirectResponse
from sqlmodel import Session, col, select
from starlette.responses import Response

from server.auth.sessions import csrf_protect, database, require_user
from server.db.queries import users_by_id
from server.db.tables import Job, Location, Sample, User
from server.reports.labels import Label, label_sheet_pdf, single_label_pdf
from server.services import receipt
from server.services.errors import ServiceError, http_status
from server.services.fields import refuse
from server.web.forms import record_id, refusal_of
from server.web.params import IdPath, IdsQuery, PageRoute
from server.web.templating import is_htmx, render
from server.workflow.vocabulary import CONDITIONS, LOCATION_KINDS, SAMPLE_TYPES

router = APIRouter(route_class=PageRoute, dependencies=[Depends(csrf_protect)], include_in_schema=False)
Staff = Annotated[User, Depends(require_user)]
Text = Annotated[str, Form()]

STICKY = (
    "location",
    "location_kind",
    "sample_type",
    "condition",
    "stored_at",
    "received_at",
    "received_by_id",
)
"""What the next row of a delivery starts with: the delivery's own facts and the last location."""

LAYOUTS = {"sheet": label_sheet_pdf, "single": single_label_pdf}
LABELS_MAX = 500  # samples on one label request: 21 A4 sheets (common practice: a delivery is far fewer)


def _minute(value: datetime) -> str:
    """A time as a datetime-local input shows it (UTC, to the minute)."""
    return value.strftime("%Y-%m-%dT%H:%M")


def _received_at(text: str) -> datetime | None:
    """The typed time of receipt (UTC), or None for a blank one (now)."""
    text = text.strip()
    if not text:
        return None
    try:
        value = datetime.fromisoformat(text)
    except ValueError:
        refuse("received_at", f"{text[:40]!r} is not a date and time (YYYY-MM-DD HH:MM)")
    return value.replace(tzinfo=UTC) if value.tzinfo is None else value.astimezone(UTC)


def _job(s: Session, job_id: int) -> Job:
    job = s.get(Job, job_id)
    if job is None:
        raise HTTPException(404, "no such job")
    return job


def _delivery(received: list[Sample], typed: str) -> str:
    """The minute of the delivery whose labels the page ticks: the one being typed in, or
    else the latest one received."""
    minutes = {_minute(x.received_at) for x in received if x.received_at is not None}
    if typed in minutes or not received or received[0].received_at is None:
        return typed
    return _minute(received[0].received_at)


def _receipt_context(s: Session, job: Job, form: dict[str, Any]) -> dict[str, Any]:
    """Everything the receipt page shows besides the row being typed."""
    samples = list(s.exec(select(Sample).where(Sample.job_id == job.id).order_by(col(Sample.code))))
    locations = {loc.id: loc for loc in s.exec(select(Location).where(Location.job_id == job.id))}
    received = sorted(
        (x for x in samples if x.received_at is not None),
        key=lambda x: (x.received_at, x.id),
        reverse=True,
    )
    expected = [x for x in samples if x.received_at is None and x.withdrawn_at is None]
    staff = {
        str(u.id): u.full_name
        for u in s.exec(select(User).where(col(User.active).is_(True)).order_by(col(User.full_name)))
    }
    return {
        "job": job,
        "received": received,
        "expected": expected,
        "locations": locations,
        "people": users_by_id(s, [x.received_by_id for x in received]),
        "staff": staff,
        "delivery_at": _delivery(received, form.get("received_at", "")),
        "kinds": LOCATION_KINDS,
        "sample_types": SAMPLE_TYPES,
        "conditions": CONDITIONS,
    }


def _blank_row(user: User, sticky: dict[str, str]) -> dict[str, str]:
    row = {
        "code": "",
        "location": "",
        "location_kind": "borehole",
        "depth_from_m": "",
        "depth_to_m": "",
        "sample_type": "",
        "description": "",
        "condition": "intact",
        "stored_at": "",
        "received_at": _minute(datetime.now(UTC)),
        "received_by_id": str(user.id),
    }
    row.update({k: v for k, v in sticky.items() if k in STICKY and isinstance(v, str)})
    return row


def _page(
    request: Request,
    job_id: IdPath,
    form: dict[str, str],
    status_code: int = 200,
    fragment: bool = False,
    **extra: Any,
) -> Response:
    with database(request).session() as s:
        context = _receipt_context(s, _job(s, job_id), form)
    name = "partials/receipt_entry.html" if fragment else "pages/receive.html"
    return render(
        request,
        name,
        status_code=status_code,
        form=form,
        errors=extra.get("errors", {}),
        problem=extra.get("problem"),
        saved=extra.get("saved"),
        **context,
    )


@router.get("/jobs/{job_id}/receive")
def receive_page(request: Request, job_id: IdPath, user: Staff, saved: str = "") -> Response:
    """The receipt sheet; after a row posted without JavaScript, the query carries the delivery
    facts to keep and the code just saved."""
    sticky = {k: v for k, v in request.query_params.items() if k in STICKY}
    saved_id = record_id(saved)
    saved_sample = None
    if saved_id is not None:
        with database(request).session() as s:
            saved_sample = s.get(Sample, saved_id)
    return _page(request, job_id, _blank_row(user, sticky), saved=saved_sample)


@router.post("/jobs/{job_id}/receive")
def receive_row(
    request: Request,
    job_id: IdPath,
    user: Staff,
    code: Text = "",
    location: Text = "",
    location_kind: Text = "borehole",
    depth_from_m: Text = "",
    depth_to_m: Text = "",
    sample_type: Text = "",
    description: Text = "",
    condition: Text = "intact",
    stored_at: Text = "",
    received_at: Text = "",
    received_by_id: Text = "",
) -> Response:
    """Save one row of the delivery: the saved row and a fresh one, or the row with its refusals."""
    form = {
        "code": code,
        "location": location,
        "location_kind": location_kind,
        "depth_from_m": depth_from_m,
        "depth_to_m": depth_to_m,
        "sample_type": sample_type,
        "description": description,
        "condition": condition,
        "stored_at": stored_at,
        "received_at": received_at,
        "received_by_id": received_by_id,
    }
    with database(request).session() as s:
        _job(s, job_id)
    row = receipt.ReceiptRow(
        code=code,
        location=location,
        depth_from_m=depth_from_m,
        depth_to_m=depth_to_m,
        sample_type=sample_type,
        description=description,
        condition=condition,
        stored_at=stored_at,
        location_kind=location_kind,
    )
    fragment = is_htmx(request)
    try:
        when = _received_at(received_at)
        receiver = record_id(received_by_id) if received_by_id.strip() else user.id
        done = receipt.receive_sample(database(request), user, job_id, row, when, receiver or -1)
    except ServiceError as exc:
        errors, problem = refusal_of(exc)
        return _page(request, job_id, form, http_status(exc), fragment, errors=errors, problem=problem)
    with database(request).session() as s:
        loc = s.get(Location, done.sample.location_id)
    sticky = {k: form[k] for k in STICKY} | {"location": loc.code if loc else location}
    if not received_at.strip() and done.sample.received_at is not None:
        sticky["received_at"] = _minute(done.sample.received_at)
    if fragment:
        return _page(request, job_id, _blank_row(user, sticky), fragment=True, saved=done.sample)
    query = urlencode(sticky | {"saved": str(done.sample.id)})
    return RedirectResponse(f"/jobs/{job_id}/receive?{query}#entry", status_code=303)


# --- labels -----------------------------------------------------------------------------------


def depth_text(sample: Sample) -> str:
    """A sample's depth as a label prints it: "1.00–1.45 m", or "1.00 m" for a point sample."""
    if sample.depth_to_m == sample.depth_from_m:
        return f"{sample.depth_from_m:.2f} m"
    return f"{sample.depth_from_m:.2f}–{sample.depth_to_m:.2f} m"


def _labels(request: Request, s: Session, job: Job, samples: list[Sample]) -> list[Label]:
    base = str(request.app.state.settings.public_base_url).rstrip("/")
    locations = {loc.id: loc for loc in s.exec(select(Location).where(Location.job_id == job.id))}
    out = []
    for sample in samples:
        loc = locations.get(sample.location_id)
        out.append(
            Label(
                sample_code=sample.code,
                job_number=job.code,
                location=loc.code if loc else "",
                depth=depth_text(sample),
                sample_type=SAMPLE_TYPES.get(sample.sample_type, sample.sample_type),
                url=f"{base}/samples/{sample.id}",
            )
        )
    return out


def _pdf(content: bytes, name: str) -> Response:
    """A PDF shown in the browser; the file name keeps only characters safe in a header."""
    filename = re.sub(r"[^A-Za-z0-9._-]+", "_", name)[:80]
    return Response(
        content,
        media_type="application/pdf",
        headers={"Content-Disposition": f'inline; filename="{filename}"', "Cache-Control": "no-store"},
    )


def _layout(layout: str) -> str:
    if layout not in LAYOUTS:
        raise HTTPException(422, "layout must be 'sheet' (A4) or 'single' (label printer)")
    return layout


@router.get("/jobs/{job_id}/labels.pdf")
def job_labels(
    request: Request,
    job_id: IdPath,
    user: Staff,
    layout: str = "sheet",
    sample: IdsQuery = None,
) -> Response:
    """Labels of the chosen samples of a job (``sample=id``, repeated), or of every sample not
    withdrawn when none is chosen."""
    chosen = set(sample or [])
    with database(request).session() as s:
        job = _job(s, job_id)
        stmt = select(Sample).where(Sample.job_id == job_id).order_by(col(Sample.code))
        if chosen:
            stmt = stmt.where(col(Sample.id).in_(chosen))
        else:
            stmt = stmt.where(col(Sample.withdrawn_at).is_(None))
        rows = list(s.exec(stmt.limit(LABELS_MAX + 1)))
        if not rows:
            raise HTTPException(422, "there are no samples to label: register or choose at least one")
        if len(rows) > LABELS_MAX:
            raise HTTPException(422, f"at most {LABELS_MAX} labels at a time: choose fewer samples")
        labels = _labels(request, s, job, rows)
    pdf = LAYOUTS[_layout(layout)](labels)
    return _pdf(pdf, f"labels-{job.code}.pdf")


@router.get("/samples/{sample_id}/label.pdf")
def sample_label(request: Request, sample_id: IdPath, user: Staff, layout: str = "single") -> Response:
    """One sample's label (for a label printer by default)."""
    with database(request).session() as s:
        found = s.get(Sample, sample_id)
        if found is None:
            raise HTTPException(404, "no such sample")
        job = _job(s, found.job_id)
        labels = _labels(request, s, job, [found])
    pdf = LAYOUTS[_layout(layout)](labels)
    return _pdf(pdf, f"label-{found.code}.pdf")
