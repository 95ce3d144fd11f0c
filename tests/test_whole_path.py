"""One Atterberg test from the bench to the client's download, through HTTP only.

Runs on SQLite and on PostgreSQL (the ``backend`` fixture). Check values and their sources are
in tests/support/scenario.py: LL 40 (Das), PL 21 (Liu & Evett), PI = LL - PL = 19 (ASTM D4318
cl. 3.1 definition, from the reported whole-number limits), USCS CL (ASTM D2487 Fig. 4: LL 40,
PI 19 lies above the A-line PI = 0.73 (40 - 20) = 14.6 and PI > 7).
"""

from __future__ import annotations

import hashlib
import io
import re

from fastapi.testclient import TestClient
from pypdf import PdfReader

from server.db.session import Database
from tests.conftest import PASSWORDS, People
from tests.support.http import post_form, sign_in
from tests.support.renders import run_queued
from tests.support.scenario import ATTERBERG, form_fields, small_job


def test_atterberg_test_goes_from_bench_to_client_download(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    bench_path = f"/tests/{job.test_id}"

    # The technician enters the readings and hands the test in.
    sign_in(app_client, "tech", PASSWORDS["tech"])
    page = app_client.get(bench_path)
    assert page.status_code == 200
    version = re.search(r'name="version" value="(\d+)"', page.text).group(1)  # type: ignore[union-attr]
    preview = post_form(
        app_client,
        bench_path,
        f"{bench_path}/preview",
        form_fields(ATTERBERG),
        headers={"HX-Request": "true"},
    )
    assert 'id="res-liquid_limit"' in preview.text and "40 %" in preview.text  # LL 39.67 shown as 40 (Das)
    saved = post_form(
        app_client,
        bench_path,
        f"{bench_path}/readings",
        [*form_fields(ATTERBERG), ("version", version), ("then", "submit")],
        follow_redirects=False,
    )
    assert saved.status_code == 303, saved.text
    assert "submitted" in app_client.get(bench_path).text
    app_client.post("/signout", data={"csrf_token": ""})
    app_client.cookies.clear()

    # The reviewer signs the approval with their password, issues the report, creates a link.
    sign_in(app_client, "review", PASSWORDS["review"])
    review_path = f"/review/{job.test_id}"
    page = app_client.get(review_path)
    version = re.search(r'name="version" value="(\d+)"', page.text).group(1)  # type: ignore[union-attr]
    approved = post_form(
        app_client,
        review_path,
        f"{review_path}/approve",
        {"version": version, "password": PASSWORDS["review"]},
        follow_redirects=False,
    )
    assert approved.status_code == 303, approved.text
    job_path = f"/jobs/{job.job_id}"
    signed = {"password": PASSWORDS["review"]}  # issuing is a signature (S7 point 4)
    issued = post_form(app_client, job_path, f"{job_path}/reports", signed, follow_redirects=False)
    assert issued.status_code == 303 and "done=rendering" in issued.headers["location"], issued.text
    assert len(run_queued(db)) == 1  # the render worker's task code renders and stores it
    made = post_form(app_client, job_path, f"{job_path}/links", {"days_valid": "14", "label": "designer"})
    link = re.search(r"http://testserver(/share/[\w-]+)", made.text).group(1)  # type: ignore[union-attr]
    app_client.cookies.clear()

    # An anonymous client opens the link and downloads the PDF.
    listing = app_client.get(link)
    assert listing.status_code == 200
    pdf_path = re.search(r'href="(/share/[\w-]+/reports/\d+\.pdf)"', listing.text).group(1)  # type: ignore[union-attr]
    pdf = app_client.get(pdf_path)
    assert pdf.status_code == 200 and pdf.headers["content-type"] == "application/pdf"
    assert pdf.headers["x-content-sha256"] == hashlib.sha256(pdf.content).hexdigest()
    assert hashlib.sha256(pdf.content).hexdigest() in listing.text
    text = " ".join(page.extract_text() for page in PdfReader(io.BytesIO(pdf.content)).pages)
    text = re.sub(r"\s+", " ", text)
    assert "BH1-S1" in text
    rows = [m.group(0) for m in re.finditer(r"BH1-S1.{0,200}", text)]
    # the summary row: LL 40, PL 21, PI 19 in that order, and the USCS symbol CL
    assert any(re.search(r"\b40 21 19\b.*\bCL\b", row) for row in rows), rows
    assert "relate only to the samples as received and tested" in text
