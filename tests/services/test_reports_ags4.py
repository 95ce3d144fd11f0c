"""The AGS4 file frozen with each issued report (server/services/reports.py, DESIGN.md section 7):
exactly the test revisions the report carries, checked by python-ags4, kept byte for byte with
its SHA-256, and known to verification like the PDF."""

from __future__ import annotations

import hashlib
from pathlib import Path

from sqlmodel import select

from server.db.queries import current_tests
from server.db.session import Database
from server.db.tables import AuditEvent, Report, ReportAgs4
from server.exchange.ags4_read import read_ags4
from server.services import reports
from tests.conftest import PASSWORDS, People
from tests.reports.issued import amend_and_approve, two_approved_samples
from tests.support.ags4_files import checker_errors

BASE = "http://lab.example"


def _frozen(db: Database, report: Report) -> ReportAgs4:
    with db.session() as s:
        found = s.get(ReportAgs4, report.id)
    assert found is not None
    return found


def _rows(text: str, group: str) -> list[list[str]]:
    """The DATA rows of one group, as written (every field quoted, AGS Format Rule 5)."""
    rows, inside = [], False
    for line in text.split("\r\n"):
        fields = [f.strip('"') for f in line.split('","')]
        if fields[0] == "GROUP":
            inside = fields[1] == group
        elif inside and fields[0] == "DATA":
            rows.append(fields[1:])
    return rows


def test_issuing_freezes_an_ags4_file_of_exactly_the_samples_reported(
    db: Database, people: People, tmp_path: Path
) -> None:
    two = two_approved_samples(db, people)
    report = reports.issue_report(
        db, people.review, two.job_id, BASE, [two.samples[0]], password=PASSWORDS["review"]
    )
    frozen = _frozen(db, report)
    text = frozen.data.decode("ascii")
    assert frozen.sha256 == hashlib.sha256(frozen.data).hexdigest()
    assert checker_errors(text, tmp_path) == {}  # python-ags4's checker: zero errors
    schedule = read_ags4(frozen.data)  # our own import reads it back
    assert schedule.errors == [] and [s.code for s in schedule.samples] == ["BH1-S1"]  # BH1-S2 not reported
    (tran,) = _rows(text, "TRAN")
    assert tran[0] == "1"  # TRAN_ISNO: the report's revision
    assert tran[1] == report.issued_at.date().isoformat()  # TRAN_DATE: the issue date
    assert f"report {report.number} revision 1" in text
    assert len(_rows(text, "LLPL")) == 1  # the one Atterberg test the report carries
    with db.session() as s:
        event = s.exec(select(AuditEvent).where(AuditEvent.entity == "report")).one()
    assert event.after is not None and event.after["ags4_sha256"] == frozen.sha256


def test_the_frozen_file_is_the_one_its_records_make_again_byte_for_byte(
    db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    report = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    frozen = _frozen(db, report)
    with db.session() as s:
        data, rows = reports.new_report_data(
            s, two.job_id, people.review, report.issued_at, BASE, number=report.number
        )
        again = reports.frozen_ags4(s, two.job_id, rows, data)
    assert again == frozen.data  # a stable SHA-256: the same records give the same bytes


def test_a_reissue_freezes_a_new_file_and_keeps_the_first_as_issued(db: Database, people: People) -> None:
    two = two_approved_samples(db, people)
    first = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    before = _frozen(db, first)
    amended = amend_and_approve(db, people, two.tests[0])
    second = reports.reissue_report(db, people.review, first.id or 0, BASE, password=PASSWORDS["review"])
    after = _frozen(db, second)
    assert _frozen(db, first).data == before.data  # never changed in place
    assert after.sha256 != before.sha256
    (tran,) = _rows(after.data.decode("ascii"), "TRAN")
    assert tran[0] == "2"  # TRAN_ISNO: revision 2
    with db.session() as s:
        carried = {r.test.id for r in current_tests(s, two.job_id) if r.test.status == "approved"}
    assert amended in carried
    verdict = reports.verify(db, sha256=before.sha256)
    assert (verdict.state, verdict.matched) == ("superseded", "ags4")
    assert verdict.current is not None and verdict.current.id == second.id


def test_verification_knows_a_report_by_its_frozen_ags4_file(db: Database, people: People) -> None:
    two = two_approved_samples(db, people)
    report = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    frozen = _frozen(db, report)
    by_file = reports.verify(db, upload=frozen.data)  # an uploaded file is hashed whatever its kind
    assert (by_file.state, by_file.matched) == ("current", "ags4")
    assert by_file.report is not None and by_file.report.id == report.id
    assert reports.verify(db, sha256=frozen.sha256, number=report.number).state == "current"
    assert reports.verify(db, sha256=frozen.sha256, number="T-999-R01").state == "unknown"
    changed = bytearray(frozen.data)
    changed[len(changed) // 2] ^= 0x01
    assert reports.verify(db, upload=bytes(changed)).state == "unknown"
