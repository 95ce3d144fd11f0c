"""The report-render queue: a signed report revision waits in ``report_render`` until a worker
renders it; the job page shows where it stands; a failed render can be retried.

Issuing is decided and signed in the request (every refusal a reviewer can act on — no approved
test, a wrong password, samples in another current report — is given there, field by field);
the render happens later in a worker process (``server/tasks``), which plans the same report
again from the records and refuses to render one whose tests changed since it was signed.
One render at a time per job: the report number is taken when the report is stored, so a
second issue of the same job waits until the first is done.
"""

from __future__ import annotations

import hashlib
from collections.abc import Collection
from dataclasses import dataclass
from datetime import datetime

from sqlalchemy import update
from sqlalchemy.orm import defer
from sqlmodel import Session, col, select

from server.db.session import Database
from server.db.tables import Report, ReportRender, User, WorkerHeartbeat, utcnow
from server.services import audit
from server.services.errors import Conflict, NotFound, invalid
from server.services.reports import REPORT_MEANING, Prepared, check_issuer, plan_issue, plan_reissue
from server.services.review import Signature, check_signature, signer_in
from server.services.workers import alive_since

WAITING = ("queued", "rendering")
MAX_ERROR = 1000


def signer_check(password_hash: str) -> str:
    """What the render keeps of the signer's password hash: enough to see that it changed
    since the signature (the signature then lapses), never the hash itself."""
    return hashlib.sha256(password_hash.encode("utf-8")).hexdigest()


def _queue(
    db: Database,
    actor: User,
    prepared: Prepared,
    kind: str,
    base_url: str,
    sample_ids: Collection[int] | None = None,
) -> ReportRender:
    """Add the signed revision to the queue (one transaction, with its audit event)."""
    data = prepared.data
    with db.transaction() as s:
        signer = signer_in(s, prepared.signature)
        busy = s.exec(
            select(ReportRender.number).where(
                ReportRender.job_id == prepared.job_id, col(ReportRender.status).in_(WAITING)
            )
        ).first()
        if busy is not None:
            raise Conflict(
                f"report {busy} of this job is being rendered: wait until it is issued, then try again"
            )
        render = ReportRender(
            job_id=prepared.job_id,
            kind=kind,
            previous_report_id=prepared.previous_id,
            number=data.report_number,
            revision=data.revision,
            requested_by_id=signer.id or 0,
            requested_at=datetime.fromisoformat(data.issued_at_iso),
            base_url=base_url,
            sample_ids=sorted(sample_ids) if sample_ids is not None else None,
            tests=sorted([r.test.id or 0, r.test.version] for r in prepared.rows),
            overlap_decision=prepared.overlap_decision,
            signature_meaning=prepared.signature.meaning,
            signer_check=signer_check(signer.password_hash),
        )
        s.add(render)
        s.flush()
        audit.record(
            s,
            actor,
            "report-render",
            render.id or 0,
            "queue",
            after={
                "kind": kind,
                "job_id": prepared.job_id,
                "number": render.number,
                "revision": render.revision,
                "tests": render.tests,
            },
        )
        return render


def request_issue(
    db: Database,
    actor: User,
    job_id: int,
    base_url: str,
    sample_ids: Collection[int] | None = None,
    *,
    password: str,
    overlap_decision: str = "",
) -> ReportRender:
    """Sign revision 1 of a new report of the job (or of the chosen samples) and queue its
    render. Issuing is a signature: the issuer's password is entered again and the meaning
    (``REPORT_MEANING``) is recorded; without it nothing is queued."""
    check_issuer(actor)
    signature = check_signature(db, actor, password, REPORT_MEANING)
    with db.session() as s:
        prepared = plan_issue(
            s, job_id, actor, utcnow(), base_url, sample_ids, signature, overlap_decision=overlap_decision
        )
    return _queue(db, actor, prepared, "issue", base_url, sample_ids)


def request_reissue(
    db: Database, actor: User, report_id: int, base_url: str, *, password: str
) -> ReportRender:
    """Sign revision n + 1 of an issued report after an amendment and queue its render."""
    check_issuer(actor)
    signature = check_signature(db, actor, password, REPORT_MEANING)
    with db.session() as s:
        prepared = plan_reissue(s, report_id, actor, utcnow(), base_url, signature)
    return _queue(db, actor, prepared, "reissue", base_url)


def prepared_for(session: Session, render: ReportRender) -> Prepared:
    """The report this render was signed for, planned again from the records at its signing
    time: refused (not rendered) when a test it carries changed since, or when the signer's
    account changed (deactivated, or a new password)."""
    issuer = session.get(User, render.requested_by_id)
    if issuer is None or not issuer.active or signer_check(issuer.password_hash) != render.signer_check:
        raise invalid("password", "the signer's account changed since signing: the report was not issued")
    signature = Signature(issuer.id or 0, issuer.password_hash, render.signature_meaning)
    if render.kind == "issue":
        prepared = plan_issue(
            session,
            render.job_id,
            issuer,
            render.requested_at,
            render.base_url,
            render.sample_ids,
            signature,
            overlap_decision=render.overlap_decision,
            number=render.number,
        )
    else:
        prepared = plan_reissue(
            session, render.previous_report_id or 0, issuer, render.requested_at, render.base_url, signature
        )
    now = sorted([r.test.id or 0, r.test.version] for r in prepared.rows)
    if now != sorted(render.tests):
        raise Conflict("a test changed after the report was signed: it was not issued; issue it again")
    return prepared


def claim(db: Database, render_id: int, worker: str) -> int | None:
    """Take a queued render for this worker: its attempt number, or None when it is not queued
    (done, failed, or taken by another worker). A conditional UPDATE, so two workers never
    take the same render."""
    with db.transaction() as s:
        taken = s.execute(
            update(ReportRender)
            .where(col(ReportRender.id) == render_id, col(ReportRender.status) == "queued")
            .values(
                status="rendering",
                attempts=ReportRender.attempts + 1,
                worker=worker[:120],
                started_at=utcnow(),
                finished_at=None,
                error="",
            )
            .returning(col(ReportRender.attempts))
        ).first()
    return None if taken is None else int(taken[0])


def next_queued(db: Database) -> int | None:
    """The oldest queued render, for the SQLite worker that polls the table."""
    with db.session() as s:
        return s.exec(
            select(ReportRender.id)
            .where(ReportRender.status == "queued")
            .order_by(col(ReportRender.id))
            .limit(1)
        ).first()


def queued_before(db: Database, when: datetime) -> list[int]:
    """Renders queued before ``when`` and still not taken: on PostgreSQL, ones whose job was
    lost (deferring happens after the render's transaction) are deferred again."""
    with db.session() as s:
        found = s.exec(
            select(ReportRender.id).where(
                ReportRender.status == "queued", col(ReportRender.requested_at) < when
            )
        ).all()
    return [rid for rid in found if rid is not None]


def fail(db: Database, render_id: int, attempt: int, message: str) -> None:
    """Mark this attempt failed with its reason (nothing of the report was stored), recorded
    under no person: the worker's finding, not a person's change."""
    with db.transaction() as s:
        render = s.get(ReportRender, render_id, with_for_update=True)
        if render is None or render.status != "rendering" or render.attempts != attempt:
            return
        render.status, render.finished_at, render.error = "failed", utcnow(), message[:MAX_ERROR]
        s.add(render)
        audit.record(
            s,
            None,
            "report-render",
            render_id,
            "fail",
            before={"status": "rendering"},
            after={"status": "failed", "attempt": attempt, "error": render.error},
        )


def retry(db: Database, actor: User, render_id: int) -> ReportRender:
    """Queue a failed render again (a reviewer or admin); it renders from the same signature."""
    check_issuer(actor)
    with db.transaction() as s:
        render = s.get(ReportRender, render_id, with_for_update=True)
        if render is None:
            raise NotFound(f"render {render_id} does not exist")
        if render.status != "failed":
            raise Conflict(
                f"the render of {render.number} is {render.status}: only a failed render is retried"
            )
        busy = s.exec(
            select(ReportRender.id).where(
                ReportRender.job_id == render.job_id, col(ReportRender.status).in_(WAITING)
            )
        ).first()
        if busy is not None:
            raise Conflict("another report of this job is being rendered: retry when it is done")
        render.status, render.error, render.finished_at = "queued", "", None
        s.add(render)
        audit.record(
            s,
            actor,
            "report-render",
            render_id,
            "retry",
            before={"status": "failed"},
            after={"status": "queued", "attempts": render.attempts},
        )
        return render


def reap_stale(db: Database, now: datetime | None = None) -> list[int]:
    """Fail the renders whose worker stopped while rendering (killed, or its machine lost): the
    worker's heartbeat is older than a live worker's, so no one will finish them."""
    cutoff = alive_since(now)
    with db.session() as s:
        alive = set(s.exec(select(WorkerHeartbeat.name).where(WorkerHeartbeat.seen_at >= cutoff)).all())
        stale = [
            (r.id or 0, r.attempts)
            for r in s.exec(select(ReportRender).where(ReportRender.status == "rendering"))
            if r.worker not in alive and (r.started_at is None or r.started_at < cutoff)
        ]
    for render_id, attempt in stale:
        fail(db, render_id, attempt, "the worker stopped during the render; nothing was issued: retry it")
    return [rid for rid, _ in stale]


@dataclass(frozen=True)
class RenderState:
    """One render as the job page shows it."""

    render: ReportRender
    report: Report | None
    worker_alive: bool


def job_renders(session: Session, job_id: int, limit: int = 5) -> list[RenderState]:
    """The job's latest renders (waiting, failed, or recently done), newest first, with whether
    a worker is alive to take the waiting ones: two queries whatever the job's size."""
    renders = list(
        session.exec(
            select(ReportRender)
            .where(ReportRender.job_id == job_id)
            .order_by(col(ReportRender.id).desc())
            .limit(limit)
        )
    )
    if not renders:
        return []
    alive = (
        session.exec(
            select(WorkerHeartbeat.name).where(WorkerHeartbeat.seen_at >= alive_since()).limit(1)
        ).first()
        is not None
    )
    report_ids = [r.report_id for r in renders if r.report_id]
    unloaded = defer(Report.pdf)  # type: ignore[arg-type]
    reports = {
        r.id: r for r in session.exec(select(Report).options(unloaded).where(col(Report.id).in_(report_ids)))
    }
    return [RenderState(r, reports.get(r.report_id), alive) for r in renders]
