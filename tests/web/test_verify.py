"""The public verification page: genuine and current, genuine but superseded (with the current
revision), or unknown; by report number with either SHA-256, or by uploading the PDF.

SHA-256 itself is FIPS 180-4; the page's answers come from the stored reports, so each check
value here is the hash of bytes the test itself holds.
"""

from __future__ import annotations

import hashlib

from fastapi.testclient import TestClient

from server.db.session import Database
from server.db.tables import Report, ReportAgs4
from server.services import reports
from tests.conftest import PASSWORDS, People
from tests.reports.issued import amend_and_approve, two_approved_samples

BASE = "http://testserver"


def _verdict(page_text: str) -> str:
    marker = 'data-verdict="'
    at = page_text.index(marker) + len(marker)
    return page_text[at : page_text.index('"', at)]


def _issued(db: Database, people: People) -> tuple[Report, bytes]:
    two = two_approved_samples(db, people)
    report = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    with db.session() as s:
        stored = s.get(Report, report.id)
        assert stored is not None
    return report, stored.pdf


def test_answers_current_for_the_number_with_the_file_hash_or_the_printed_fingerprint(
    app_client: TestClient, db: Database, people: People
) -> None:
    report, pdf = _issued(db, people)
    file_hash = hashlib.sha256(pdf).hexdigest()
    by_file = app_client.get("/verify", params={"number": report.number, "sha256": file_hash})
    assert _verdict(by_file.text) == "current" and "the SHA-256 of the PDF file" in by_file.text
    by_content = app_client.get("/verify", params={"number": report.number, "sha256": report.fingerprint})
    assert _verdict(by_content.text) == "current" and "the content fingerprint" in by_content.text


def test_the_address_printed_on_the_report_with_its_fingerprint_answers_current(
    app_client: TestClient, db: Database, people: People
) -> None:
    report, _ = _issued(db, people)
    address = f"/verify?number={report.number}&revision={report.revision}&sha256={report.fingerprint}"
    assert _verdict(app_client.get(address).text) == "current"  # what the QR code on each page holds


def test_answers_superseded_with_the_current_revision_after_a_reissue(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    first = reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    amend_and_approve(db, people, two.tests[0])
    second = reports.reissue_report(db, people.review, first.id or 0, BASE, password=PASSWORDS["review"])
    page = app_client.get("/verify", params={"number": first.number, "sha256": first.sha256})
    assert _verdict(page.text) == "superseded"
    assert "revision 2</b>" in page.text and second.sha256 in page.text
    now = app_client.get("/verify", params={"number": second.number, "sha256": second.fingerprint})
    assert _verdict(now.text) == "current"


def test_an_uploaded_genuine_pdf_is_current_and_one_changed_byte_makes_it_unknown(
    app_client: TestClient, db: Database, people: People
) -> None:
    report, pdf = _issued(db, people)
    genuine = app_client.post("/verify", files={"pdf": ("report.pdf", pdf, "application/pdf")})
    assert genuine.status_code == 200 and _verdict(genuine.text) == "current"
    assert report.number in genuine.text
    changed = bytearray(pdf)
    changed[len(changed) // 3] ^= 0x20  # one byte, one bit of it
    altered = app_client.post("/verify", files={"pdf": ("report.pdf", bytes(changed), "application/pdf")})
    assert _verdict(altered.text) == "unknown" and hashlib.sha256(bytes(changed)).hexdigest() in altered.text


def test_an_uploaded_ags4_file_issued_with_a_report_is_known_by_its_own_sha256(
    app_client: TestClient, db: Database, people: People
) -> None:
    report, _ = _issued(db, people)
    with db.session() as s:
        frozen = s.get(ReportAgs4, report.id)
    assert frozen is not None
    upload = app_client.post("/verify", files={"pdf": ("results.ags", frozen.data, "text/plain")})
    assert _verdict(upload.text) == "current" and "the AGS4 data file issued with it" in upload.text
    by_code = app_client.get("/verify", params={"number": report.number, "sha256": frozen.sha256})
    assert _verdict(by_code.text) == "current" and frozen.sha256 in by_code.text


def test_answers_unknown_for_an_unknown_code_or_a_genuine_code_under_another_number(
    app_client: TestClient, db: Database, people: People
) -> None:
    report, _ = _issued(db, people)
    assert _verdict(app_client.get("/verify", params={"sha256": "ab" * 32}).text) == "unknown"
    assert _verdict(app_client.get("/verify", params={"sha256": "not a hash"}).text) == "unknown"
    other = app_client.get("/verify", params={"number": "T-999-R01", "sha256": report.sha256})
    assert _verdict(other.text) == "unknown"


def test_the_page_says_plainly_which_hash_the_report_prints(app_client: TestClient) -> None:
    page = app_client.get("/verify")
    assert page.status_code == 200 and "data-verdict" not in page.text
    assert "A file cannot\nprint the SHA-256 of its own bytes" in page.text


def test_an_empty_upload_is_refused_with_a_message(app_client: TestClient) -> None:
    page = app_client.post("/verify", files={"pdf": ("empty.pdf", b"", "application/pdf")})
    assert page.status_code == 422 and "Choose the PDF file" in page.text


def test_the_qr_code_address_shows_its_verdict_first_and_names_it_in_the_title(
    app_client: TestClient, db: Database, people: People
) -> None:
    """Opened from the QR code on a phone, the answer is the first thing under the heading; how
    the check works is folded away below it."""
    report, _ = _issued(db, people)
    address = f"/verify?number={report.number}&revision={report.revision}&sha256={report.fingerprint}"
    page = app_client.get(address).text
    assert "<title>✔ Genuine and current · Check a test report · Claybench</title>" in page
    assert page.index('id="verdict"') < page.index("When a report is issued") < page.index("<form")
    assert '<details class="how"><summary>How this check works</summary>' in page
    blank = app_client.get("/verify").text  # nothing asked yet: the explanation stays open
    assert "<details" not in blank and "When a report is issued" in blank
