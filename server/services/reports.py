"""Issuing a report: gather a job's approved tests, render the PDF once, store it with its hash.

The PDF is rendered outside the write transaction (it takes a second or more and the SQLite
write lock must not be held that long); the transaction then checks that every test is still
the approved revision that was rendered, and stores the bytes, SHA-256 and audit event
together. A stored report is never rendered again: downloads serve the stored bytes.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from datetime import datetime

from sqlalchemy.orm import defer
from sqlmodel import Session, col, func, select

from server.db.queries import TestRow, current_tests
from server.db.session import Database
from server.db.tables import Client, Job, Laboratory, LabTest, Report, ReportTest, User, utcnow
from server.engine import METHODS
from server.reports.context import LabInfo, MethodNote, ReportData, Signatory, TestEntry, content_fingerprint
from server.reports.pdf import render_report_pdf
from server.services import audit
from server.services.errors import Conflict, Forbidden, NotFound, invalid
from server.workflow.states import CHECKERS, Role

REPORT_MEANING = "Authorised for issue: the results were reviewed and approved as listed"


def _entry(row: TestRow) -> TestEntry:
    method = METHODS.get(row.test.method)
    return TestEntry(
        sample_code=row.sample.code,
        location_code=row.location.code,
        depth_from_m=row.sample.depth_from_m,
        depth_to_m=row.sample.depth_to_m,
        sample_type=row.sample.sample_type,
        description=row.sample.description,
        method=row.test.method,
        method_title=method.title if method else row.test.method,
        results=row.test.results or {},
        readings=row.test.readings or {},
        flags=row.test.flags or [],
        revision=row.test.revision,
    )


def next_report_number(session: Session, job: Job) -> str:
    """Report numbers run per job: JOB-R01, JOB-R02, ... (revisions keep their number)."""
    count = session.exec(
        select(func.count(func.distinct(Report.number))).where(Report.job_id == job.id)
    ).one()
    return f"{job.code}-R{int(count) + 1:02d}"


def report_data(
    session: Session,
    job: Job,
    rows: list[TestRow],
    issuer: User,
    number: str,
    revision: int,
    issued_at: datetime,
    base_url: str,
) -> ReportData:
    """The report's content from records (pure apart from the two look-ups of lab and client)."""
    lab = session.exec(select(Laboratory)).first() or Laboratory(name="Laboratory")
    client = session.get(Client, job.client_id)
    methods = sorted({r.test.method for r in rows})
    return ReportData(
        lab=LabInfo(lab.name, lab.address, lab.accreditation),
        client_name=client.name if client else "",
        job_code=job.code,
        job_title=job.title,
        site=job.site,
        report_number=number,
        revision=revision,
        issue_date=issued_at.date(),
        issued_at_iso=issued_at.replace(microsecond=0).isoformat(),
        approver=Signatory(
            issuer.full_name, issuer.role, REPORT_MEANING, issued_at.replace(microsecond=0).isoformat()
        ),
        verify_url=f"{base_url.rstrip('/')}/verify?number={number}&revision={revision}",
        tests=[_entry(r) for r in rows],
        methods=[MethodNote(METHODS[m].title, METHODS[m].standard) for m in methods if m in METHODS],
    )


def issue_report(db: Database, actor: User, job_id: int, base_url: str) -> Report:
    """Issue revision 1 of a new report carrying every approved test of the job."""
    if Role(actor.role) not in CHECKERS:
        raise Forbidden("only a reviewer or admin issues reports")
    issued_at = utcnow()
    with db.session() as s:
        job = s.get(Job, job_id)
        if job is None:
            raise NotFound(f"job {job_id} does not exist")
        rows = [r for r in current_tests(s, job_id) if r.test.status == "approved"]
        if not rows:
            raise invalid("tests", "no approved test to report on this job")
        number = next_report_number(s, job)
        data = report_data(s, job, rows, actor, number, 1, issued_at, base_url)
    pdf = render_report_pdf(data)
    with db.transaction() as s:
        versions = dict(
            s.exec(
                select(LabTest.id, LabTest.version).where(col(LabTest.id).in_([r.test.id for r in rows]))
            ).all()
        )
        if any(versions.get(r.test.id) != r.test.version for r in rows):
            raise Conflict("a test changed while the report was being prepared; issue it again")
        report = Report(
            job_id=job_id,
            number=number,
            revision=1,
            status="issued",
            issued_at=issued_at,
            issued_by_id=actor.id or 0,
            sha256=hashlib.sha256(pdf).hexdigest(),
            fingerprint=content_fingerprint(data),
            pdf=pdf,
        )
        s.add(report)
        s.flush()
        for r in rows:
            s.add(ReportTest(report_id=report.id or 0, test_id=r.test.id or 0))
        audit.record(
            s,
            actor,
            "report",
            report.id or 0,
            "issue",
            after={
                "number": number,
                "revision": 1,
                "sha256": report.sha256,
                "tests": [r.test.id for r in rows],
            },
        )
        return report


@dataclass
class Verdict:
    """The answer of the verification page: genuine and current, superseded, or unknown."""

    state: str  # "current" | "superseded" | "unknown"
    report: Report | None = None
    current: Report | None = None  # the revision that replaces a superseded one


def verify(db: Database, *, sha256: str | None = None, pdf: bytes | None = None) -> Verdict:
    """Find the issued report whose PDF (or its SHA-256, or its printed content fingerprint)
    this is. Reads only: verifying stores nothing."""
    digest = hashlib.sha256(pdf).hexdigest() if pdf is not None else (sha256 or "").strip().lower()
    if len(digest) != 64:
        return Verdict("unknown")
    with db.session() as s:
        found = s.exec(
            select(Report)
            .options(defer(Report.pdf))  # type: ignore[arg-type]
            .where((Report.sha256 == digest) | (Report.fingerprint == digest))
        ).first()
        if found is None:
            return Verdict("unknown")
        if found.status != "superseded":
            return Verdict("current", found)
        newest = s.exec(
            select(Report)
            .options(defer(Report.pdf))  # type: ignore[arg-type]
            .where(Report.number == found.number)
            .order_by(col(Report.revision).desc())
        ).first()
        return Verdict("superseded", found, newest)
