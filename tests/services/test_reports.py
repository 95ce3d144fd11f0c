"""Issuing a report: rendered once, stored with its SHA-256, verifiable, refused when empty."""

from __future__ import annotations

import hashlib

import pytest
from sqlmodel import select

from server.db.session import Database
from server.db.tables import AuditEvent, Report, ReportTest
from server.services import bench, reports, review
from server.services.errors import Forbidden, Invalid
from tests.conftest import PASSWORDS, People
from tests.support.scenario import ATTERBERG, small_job


def _approved_job(db: Database, people: People) -> int:
    job = small_job(db, people.admin)
    saved = bench.save_readings(db, people.tech, job.test_id, ATTERBERG, 1)
    test = bench.submit(db, people.tech, job.test_id, saved.test.version)
    review.approve(db, people.review, job.test_id, PASSWORDS["review"], test.version)
    return job.job_id


def test_stores_the_pdf_its_hash_and_an_audit_event_together(db: Database, people: People) -> None:
    job_id = _approved_job(db, people)
    report = reports.issue_report(db, people.review, job_id, "http://lab.example")
    with db.session() as s:
        stored = s.get(Report, report.id)
        carried = s.exec(select(ReportTest).where(ReportTest.report_id == report.id)).all()
        event = s.exec(select(AuditEvent).where(AuditEvent.entity == "report")).one()
    assert stored is not None and stored.pdf.startswith(b"%PDF")
    assert stored.sha256 == hashlib.sha256(stored.pdf).hexdigest()
    assert (stored.number, stored.revision, len(carried)) == ("T-100-R01", 1, 1)
    assert event.after is not None and event.after["sha256"] == stored.sha256


def test_verification_knows_an_issued_report_by_file_hash_or_printed_fingerprint(
    db: Database, people: People
) -> None:
    job_id = _approved_job(db, people)
    report = reports.issue_report(db, people.review, job_id, "http://lab.example")
    with db.session() as s:
        pdf = s.get(Report, report.id).pdf  # type: ignore[union-attr]
    assert reports.verify(db, pdf=pdf).state == "current"
    assert reports.verify(db, sha256=report.fingerprint).state == "current"
    changed = bytearray(pdf)
    changed[len(changed) // 2] ^= 0x01
    assert reports.verify(db, pdf=bytes(changed)).state == "unknown"
    assert reports.verify(db, sha256="00" * 32).state == "unknown"


def test_refuses_a_report_with_no_approved_test(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    with pytest.raises(Invalid):
        reports.issue_report(db, people.review, job.job_id, "http://lab.example")


def test_a_technician_cannot_issue_a_report(db: Database, people: People) -> None:
    job_id = _approved_job(db, people)
    with pytest.raises(Forbidden):
        reports.issue_report(db, people.tech, job_id, "http://lab.example")
