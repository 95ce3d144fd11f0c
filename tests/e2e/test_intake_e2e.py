"""Intake in a real browser on a tablet (768 x 1024): a delivery of five samples booked in row
by row with the keyboard, then their labels printed and read back from the PDF."""

from __future__ import annotations

import re
from io import BytesIO

from playwright.sync_api import Page, expect
from pypdf import PdfReader
from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import Sample
from server.services import jobs, samples
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import describe, horizontal_overflow, serious_violations, sign_in

DELIVERY = [  # fictional: the Hollin Brook footbridge job of our own scenario
    ("BH1-U1", "BH1", "1.00", "1.45"),
    ("BH1-U2", "BH1", "2.50", "2.95"),
    ("BH1-D3", "BH1", "3.20", ""),
    ("BH2-U1", "BH2", "1.00", "1.45"),
    ("BH2-B2", "BH2", "0.20", "0.80"),
]


def test_a_technician_books_in_five_samples_and_prints_their_labels(
    page: Page, live_db: Database, live_people: People
) -> None:
    client = jobs.create_client(live_db, live_people.admin, "Hollin Brook Trust")
    job = jobs.create_job(
        live_db, live_people.admin, client.id or 0, "HB-2026-031", "Footbridge", "Hollin Brook"
    )
    samples.add_location(live_db, live_people.admin, job.id or 0, "BH1")
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/jobs/{job.id}/receive")
    expect(page.get_by_label("Sample code")).to_be_focused()  # ready to type on arrival (autofocus)
    page.get_by_label("Store location").fill("Cold room, rack C")
    for code, location, top, base in DELIVERY:
        page.get_by_label("Sample code").fill(code)
        page.get_by_label("Location", exact=True).fill(location)
        page.get_by_label("Depth top (m)").fill(top)
        page.get_by_label("Depth base (m)").fill(base)
        page.get_by_label("Sample type").select_option("U100" if "-U" in code else "bulk")
        page.get_by_label("Depth base (m)").press("Enter")  # Enter saves the row, as on a keyboard
        expect(page.get_by_role("status")).to_contain_text(f"Received {code}")
        # the next row is ready: code blank and focused, the delivery's store kept
        expect(page.get_by_label("Sample code")).to_have_value("")
        expect(page.get_by_label("Sample code")).to_be_focused()
        expect(page.get_by_label("Store location")).to_have_value("Cold room, rack C")

    expect(page.get_by_role("heading", name="Received (5)")).to_be_visible()
    assert horizontal_overflow(page) == 0  # the wide list scrolls in its own box at 768 px
    violations = serious_violations(page)
    assert not violations, describe(violations)

    with live_db.session() as s:
        stored = list(s.exec(select(Sample).where(Sample.job_id == job.id).order_by(col(Sample.code))))
    assert sorted(x.code for x in stored) == sorted(code for code, *_ in DELIVERY)
    assert {x.stored_at for x in stored} == {"Cold room, rack C"}

    with page.expect_response(re.compile(r"/labels\.pdf\?")) as answer:
        page.get_by_role("button", name="⎙ A4 sheet").click()
    # the browser shows the PDF in its viewer; the same address fetched in the person's session
    # gives the bytes to read back
    labels = page.request.get(answer.value.url)
    assert labels.headers["content-type"] == "application/pdf"
    pdf = labels.body()
    text = "".join(p.extract_text() or "" for p in PdfReader(BytesIO(pdf)).pages)
    for code, *_ in DELIVERY:
        assert code in text, code  # every label of the delivery is on the sheet
    assert "HB-2026-031" in text
