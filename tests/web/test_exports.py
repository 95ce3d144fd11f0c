"""The downloads of a job's approved results from the job page (DESIGN.md section 7), on both
backends: any signed-in member of staff, an attachment with a safe name, a clear refusal when
nothing is approved. The job is that of tests/exchange/test_results_sheet.py."""

from __future__ import annotations

import csv
import io
from pathlib import Path

import openpyxl
from fastapi.testclient import TestClient

from server.db.session import Database
from server.services import jobs, samples
from tests.conftest import PASSWORDS, People
from tests.exchange.test_results_sheet import build_job
from tests.reports.issued import approve
from tests.support.ags4_files import checker_errors
from tests.support.http import sign_in
from tests.support.scenario import small_job

XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"  # ECMA-376 / IANA


def test_a_technician_downloads_the_xlsx_and_the_csv(
    app_client: TestClient, db: Database, people: People
) -> None:
    built = build_job(db, people)
    sign_in(app_client, "tech", PASSWORDS["tech"])

    xlsx = app_client.get(f"/jobs/{built.job_id}/export.xlsx")
    text = app_client.get(f"/jobs/{built.job_id}/export.csv")

    assert xlsx.status_code == 200 and xlsx.headers["content-type"] == XLSX
    assert xlsx.headers["content-disposition"] == 'attachment; filename="T-100-results.xlsx"'
    assert xlsx.headers["cache-control"] == "private, no-store"
    book = openpyxl.load_workbook(io.BytesIO(xlsx.content))
    assert book.sheetnames == ["Summary", "water-content", "atterberg", "classification", "vane"]
    assert text.status_code == 200 and text.headers["content-type"] == "text/csv; charset=utf-8"
    assert text.headers["content-disposition"] == 'attachment; filename="T-100-results.csv"'
    rows = list(csv.DictReader(io.StringIO(text.content.decode("utf-8-sig"))))
    # BH1-S1: Das, ASTM D4318 whole numbers; BH2-S1's classification takes its LL as a reading, and
    # the report's summary prints a dash for a limit no test of the sample determined
    assert [(r["Sample"], r["Liquid limit LL (%)"]) for r in rows] == [("BH1-S1", "40"), ("BH2-S1", "—")]


def test_the_job_page_links_both_downloads(app_client: TestClient, db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])

    page = app_client.get(f"/jobs/{job.job_id}")

    assert f'href="/jobs/{job.job_id}/export.xlsx"' in page.text and "⇩ Results (.xlsx)" in page.text
    assert f'href="/jobs/{job.job_id}/export.csv"' in page.text and "⇩ (.csv)" in page.text
    assert f'href="/jobs/{job.job_id}/export.ags"' in page.text and "⇩ (AGS4)" in page.text


def test_the_ags4_download_passes_the_checker_and_names_the_job(
    app_client: TestClient, db: Database, people: People, tmp_path: Path
) -> None:
    built = build_job(db, people)
    sign_in(app_client, "tech", PASSWORDS["tech"])

    reply = app_client.get(f"/jobs/{built.job_id}/export.ags")

    assert reply.status_code == 200 and reply.headers["content-type"] == "text/plain; charset=us-ascii"
    assert reply.headers["content-disposition"] == 'attachment; filename="T-100-results.ags"'
    text = reply.content.decode("ascii")
    assert checker_errors(text, tmp_path) == {}  # python-ags4's checker: zero errors
    assert '"DATA","T-100"' in text  # PROJ_ID: the job number (DESIGN.md section 7)


def test_nothing_approved_is_a_clear_refusal_on_the_job_page(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)  # one requested test, nothing approved
    sign_in(app_client, "review", PASSWORDS["review"])

    for suffix in ("xlsx", "csv", "ags"):
        reply = app_client.get(f"/jobs/{job.job_id}/export.{suffix}")
        assert reply.status_code == 422
        assert reply.template.name == "pages/job.html"  # type: ignore[attr-defined]
        assert "Nothing to download" in reply.context["error"]  # type: ignore[attr-defined]
        assert "no approved test" in reply.text


def test_an_unknown_job_is_404(app_client: TestClient, db: Database, people: People) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])

    for suffix in ("xlsx", "csv", "ags"):
        assert app_client.get(f"/jobs/999999/export.{suffix}").status_code == 404


def test_signing_in_comes_first(app_client: TestClient, db: Database, people: People) -> None:
    job = small_job(db, people.admin)

    reply = app_client.get(f"/jobs/{job.job_id}/export.xlsx", follow_redirects=False)

    assert reply.status_code == 303 and reply.headers["location"].startswith("/signin?")


def test_a_job_number_that_is_no_file_name_gives_a_safe_one(
    app_client: TestClient, db: Database, people: People
) -> None:
    client = jobs.create_client(db, people.admin, "Quote Client")
    job = jobs.create_job(db, people.admin, client.id or 0, 'Q"7/ä;x', "Odd number", "Site")
    location = samples.add_location(db, people.admin, job.id or 0, "BH1")
    sample = samples.add_sample(db, people.admin, location.id or 0, "S1", 1.0, 1.2, "U100")
    (test,) = jobs.request_tests(db, people.admin, [sample.id or 0], ["atterberg"])
    approve(db, people, test.id or 0)
    sign_in(app_client, "tech", PASSWORDS["tech"])

    reply = app_client.get(f"/jobs/{job.id}/export.csv")

    # only letters, digits, ".", "_" and "-" reach the header (RFC 6266 quoted filename)
    assert reply.headers["content-disposition"] == 'attachment; filename="Q_7_x-results.csv"'
