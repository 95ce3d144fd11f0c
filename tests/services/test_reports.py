"""Issuing and re-issuing reports: rendered once, stored with its SHA-256, verifiable, superseded
never deleted, refused when there is nothing (new) to report."""

from __future__ import annotations

import hashlib
from io import BytesIO

import pytest
from pypdf import PdfReader
from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import AuditEvent, LabTest, Report, ReportTest
from server.services import amendments, reports
from server.services.errors import Conflict, Forbidden, Invalid
from tests.conftest import PASSWORDS, People
from tests.reports.issued import amend_and_approve, approve, two_approved_samples
from tests.support.scenario import small_job

BASE = "http://lab.example"


def _approved_job(db: Database, people: People) -> int:
    job = small_job(db, people.admin)
    approve(db, people, job.test_id)
    return job.job_id


def test_stores_the_pdf_its_hash_and_an_audit_event_together(db: Database, people: People) -> None:
    job_id = _approved_job(db, people)
    report = reports.issue_report(db, people.review, job_id, BASE, password=PASSWORDS["review"])
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
    report = reports.issue_report(db, people.review, job_id, BASE, password=PASSWORDS["review"])
    with db.session() as s:
        pdf = s.get(Report, report.id).pdf  # type: ignore[union-attr]
    assert reports.verify(db, upload=pdf).state == "current"
    assert reports.verify(db, sha256=report.fingerprint).matched == "content"
    assert reports.verify(db, sha256=report.sha256.upper(), number="T-100-R01").matched == "file"
    changed = bytearray(pdf)
    changed[len(changed) // 2] ^= 0x01
    assert reports.verify(db, upload=bytes(changed)).state == "unknown"
    assert reports.verify(db, sha256="00" * 32).state == "unknown"


def test_verification_refuses_a_genuine_hash_given_with_another_report_number(
    db: Database, people: People
) -> None:
    job_id = _approved_job(db, people)
    report = reports.issue_report(db, people.review, job_id, BASE, password=PASSWORDS["review"])
    assert reports.verify(db, sha256=report.sha256, number="T-999-R01").state == "unknown"


def test_refuses_a_report_with_no_approved_test(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    with pytest.raises(Invalid):
        reports.issue_report(db, people.review, job.job_id, BASE, password=PASSWORDS["review"])


def test_a_technician_cannot_issue_or_reissue_a_report(db: Database, people: People) -> None:
    job_id = _approved_job(db, people)
    with pytest.raises(Forbidden):
        reports.issue_report(db, people.tech, job_id, BASE, password=PASSWORDS["tech"])
    report = reports.issue_report(db, people.review, job_id, BASE, password=PASSWORDS["review"])
    with pytest.raises(Forbidden):
        reports.reissue_report(db, people.tech, report.id or 0, BASE, password=PASSWORDS["tech"])


def test_issues_a_report_of_the_chosen_samples_only(db: Database, people: People) -> None:
    two = two_approved_samples(db, people)
    report = reports.issue_report(
        db, people.review, two.job_id, BASE, sample_ids=[two.samples[1]], password=PASSWORDS["review"]
    )
    with db.session() as s:
        carried = s.exec(select(ReportTest.test_id).where(ReportTest.report_id == report.id)).all()
    assert list(carried) == [two.tests[1]]
    rest = reports.unreported_sample_ids(db, two.job_id)
    assert rest == [two.samples[0]]  # "only samples not yet reported"
    whole = reports.issue_report(db, people.review, two.job_id, BASE, rest, password=PASSWORDS["review"])
    assert whole.number == "T-100-R02"  # a second report of the job takes the next number


def test_a_test_revision_in_a_current_report_is_issued_again_only_with_a_recorded_decision(
    db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    first = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    # S7 point 5: two current reports never carry the same revision without a recorded decision
    with pytest.raises(Invalid) as refused:
        reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    assert refused.value.errors[0].loc == ("overlap_decision",) and first.number in str(refused.value)
    with pytest.raises(Invalid):
        reports.issue_report(
            db, people.review, two.job_id, BASE, password=PASSWORDS["review"], overlap_decision="x"
        )
    decision = "The client asked for a separate report for the planning authority"
    second = reports.issue_report(
        db, people.review, two.job_id, BASE, password=PASSWORDS["review"], overlap_decision=decision
    )
    with db.session() as s:
        stored = s.get(Report, second.id)
        event = s.exec(
            select(AuditEvent).where(AuditEvent.entity == "report", AuditEvent.entity_id == second.id)
        ).one()
    assert stored is not None and stored.overlap_decision == decision
    assert event.reason == decision and event.after["overlap_decision"] == decision


def test_issuing_is_a_signature_refused_without_the_issuers_password(db: Database, people: People) -> None:
    two = two_approved_samples(db, people)
    for wrong in ("", "not-the-password"):
        with pytest.raises(Invalid) as refused:
            reports.issue_report(db, people.review, two.job_id, BASE, password=wrong)
        assert refused.value.errors[0].loc == ("password",)  # S7 point 4: nothing is issued
    with db.session() as s:
        assert s.exec(select(Report)).all() == []
    report = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    with db.session() as s:
        stored = s.get(Report, report.id)
        event = s.exec(select(AuditEvent).where(AuditEvent.entity == "report")).one()
    assert stored is not None and stored.signature_meaning == reports.REPORT_MEANING
    assert event.after["signed_by"] == "review" and event.after["signature_meaning"] == reports.REPORT_MEANING
    text = " ".join(
        " ".join((page.extract_text() or "").split()) for page in PdfReader(BytesIO(stored.pdf)).pages
    )
    # the authorising-signatory block prints the signature (S7 point 4)
    assert "Signed by Review Person" in text
    assert "entered their password again to issue this report" in text


def test_refuses_a_chosen_sample_without_an_approved_test_or_an_empty_choice(
    db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    with pytest.raises(Invalid, match="no approved test"):
        reports.issue_report(
            db,
            people.review,
            two.job_id,
            BASE,
            sample_ids=[two.samples[0], 999_999],
            password=PASSWORDS["review"],
        )
    with pytest.raises(Invalid, match="at least one sample"):
        reports.issue_report(db, people.review, two.job_id, BASE, sample_ids=[], password=PASSWORDS["review"])
    with db.session() as s:
        assert s.exec(select(Report)).all() == []


def test_reissue_after_an_amendment_is_revision_two_and_supersedes_revision_one(
    db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    first = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    amended = amend_and_approve(db, people, two.tests[0])
    second = reports.reissue_report(db, people.review, first.id or 0, BASE, password=PASSWORDS["review"])
    with db.session() as s:
        old = s.get(Report, first.id)
        carried = set(s.exec(select(ReportTest.test_id).where(ReportTest.report_id == second.id)).all())
        events = s.exec(
            select(AuditEvent.entity_id, AuditEvent.action)
            .where(AuditEvent.entity == "report")
            .order_by(col(AuditEvent.id))
        ).all()
    assert (second.number, second.revision, second.status) == (first.number, 2, "issued")
    assert old is not None and (old.status, old.superseded_by_id) == ("superseded", second.id)
    assert hashlib.sha256(old.pdf).hexdigest() == first.sha256  # kept as issued
    assert carried == {amended, two.tests[1]}  # the amended revision and the untouched test
    assert list(events) == [(first.id, "issue"), (first.id, "supersede"), (second.id, "reissue")]
    verdict = reports.verify(db, sha256=first.sha256)
    assert verdict.state == "superseded" and verdict.current is not None and verdict.current.id == second.id
    assert reports.verify(db, sha256=second.sha256).state == "current"


def test_reissue_waits_until_the_amended_revision_is_approved(db: Database, people: People) -> None:
    job_id = _approved_job(db, people)
    first = reports.issue_report(db, people.review, job_id, BASE, password=PASSWORDS["review"])
    with db.session() as s:
        test_id = s.exec(select(ReportTest.test_id).where(ReportTest.report_id == first.id)).one()
        version = s.get(LabTest, test_id).version  # type: ignore[union-attr]
    amendments.amend(db, people.review, test_id, "Tin N1 re-weighed", version)
    with pytest.raises(Invalid, match="draft, not approved"):
        reports.reissue_report(db, people.review, first.id or 0, BASE, password=PASSWORDS["review"])
    with db.session() as s:
        assert s.get(Report, first.id).status == "issued"  # type: ignore[union-attr]


def test_reissue_with_nothing_amended_is_refused(db: Database, people: People) -> None:
    job_id = _approved_job(db, people)
    first = reports.issue_report(db, people.review, job_id, BASE, password=PASSWORDS["review"])
    with pytest.raises(Invalid, match="nothing in revision 1 was amended"):
        reports.reissue_report(db, people.review, first.id or 0, BASE, password=PASSWORDS["review"])


def test_a_superseded_revision_cannot_be_reissued_again(db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    approve(db, people, job.test_id)
    first = reports.issue_report(db, people.review, job.job_id, BASE, password=PASSWORDS["review"])
    amend_and_approve(db, people, job.test_id)
    reports.reissue_report(db, people.review, first.id or 0, BASE, password=PASSWORDS["review"])
    with pytest.raises(Conflict, match="superseded"):
        reports.reissue_report(db, people.review, first.id or 0, BASE, password=PASSWORDS["review"])
