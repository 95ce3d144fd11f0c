"""The receipt sheet and the labels, through the real app.

A technician books a delivery in row by row: each row is saved on its own (as an htmx fragment,
or with a redirect without JavaScript), the next row comes back focused with the delivery's
facts kept, and every receipt is audited. Labels are real WeasyPrint PDFs read back with pypdf.
The scenario (the Hollin Brook footbridge) is fictional.
"""

from __future__ import annotations

import re
from io import BytesIO

from fastapi.testclient import TestClient
from pypdf import PdfReader
from sqlmodel import col, func, select

from server.db.session import Database
from server.db.tables import AuditEvent, Job, Location, Sample
from server.services import jobs, samples
from tests.conftest import PASSWORDS, People
from tests.support.http import csrf_of, post_form, sign_in

MM = 72 / 25.4  # points in a millimetre (computed)


def _job(db: Database, people: People) -> Job:
    client = jobs.create_client(db, people.admin, "Hollin Brook Trust")
    return jobs.create_job(db, people.admin, client.id or 0, "HB-2026-031", "Footbridge", "Hollin Brook")


def _row(code: str, top: str, **extra: str) -> dict[str, str]:
    return {
        "code": code,
        "location": "BH1",
        "location_kind": "borehole",
        "depth_from_m": top,
        "depth_to_m": "",
        "sample_type": "U100",
        "condition": "intact",
        "stored_at": "Cold room rack C",
        "received_at": "2026-11-30T09:15",
        "received_by_id": "",
    } | extra


def _htmx_post(client: TestClient, path: str, data: dict[str, str]) -> object:
    token = csrf_of(client.get(path))
    return client.post(path, data=data, headers={"HX-Request": "true", "X-CSRF-Token": token})


def test_a_technician_books_in_a_delivery_row_by_row_with_the_next_row_ready(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/jobs/{job.id}/receive"
    for n, top in enumerate(["1.00", "2.50", "4.00"], start=1):
        reply = _htmx_post(app_client, path, _row(f"BH1-U{n}", top))
        assert reply.status_code == 200  # type: ignore[attr-defined]
        text = reply.text  # type: ignore[attr-defined]
        assert text.lstrip().startswith('<div id="receipt">')  # a fragment, not the whole page
        assert f"Received BH1-U{n}" in text
        # the next row: code blank and focused, the delivery's facts kept (DESIGN.md: one row a sample)
        assert re.search(r'id="f-code" name="code" value=""[^>]*autofocus', text)
        assert 'value="Cold room rack C"' in text and 'value="2026-11-30T09:15"' in text
    with db.session() as s:
        rows = list(s.exec(select(Sample).where(Sample.job_id == job.id).order_by(col(Sample.code))))
        locations = list(s.exec(select(Location).where(Location.job_id == job.id)))
        events = list(s.exec(select(AuditEvent).where(AuditEvent.entity == "sample")))
    assert [x.code for x in rows] == ["BH1-U1", "BH1-U2", "BH1-U3"]
    assert len(locations) == 1  # BH1 was added by the first row and used by the next ones
    assert {(x.received_by_id, x.condition, x.stored_at) for x in rows} == {
        (people.tech.id, "intact", "Cold room rack C")
    }
    assert all(x.received_at is not None and x.received_at.hour == 9 for x in rows)  # typed UTC time kept
    assert [e.actor_id for e in events] == [people.tech.id] * 3


def test_a_refused_row_comes_back_with_its_message_and_nothing_is_stored(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/jobs/{job.id}/receive"
    reply = _htmx_post(app_client, path, _row("BH1-U1", "abc", condition="soggy"))
    assert reply.status_code == 422  # type: ignore[attr-defined]
    text = reply.text  # type: ignore[attr-defined]
    assert re.search(r'id="err-depth_from_m">[^<]*number', text)
    assert re.search(r'id="err-condition">[^<]*Intact', text)  # the allowed words are listed
    assert 'value="BH1-U1"' in text  # what was typed stays
    with db.session() as s:
        assert s.exec(select(func.count()).select_from(Sample)).one() == 0
        assert s.exec(select(func.count()).select_from(Location)).one() == 0


def test_a_scheduled_sample_is_received_by_its_code_alone_and_only_once(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    loc = samples.add_location(db, people.admin, job.id or 0, "TP2", "trial pit")
    scheduled = samples.add_sample(db, people.admin, loc.id or 0, "TP2-B1", 0.5, 1.0, "bulk", "Made ground")
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/jobs/{job.id}/receive"
    page = app_client.get(path)
    assert '<option value="TP2-B1">' in page.text  # offered as expected
    blank = {"location": "", "depth_from_m": "", "sample_type": "", "condition": "damaged"}
    reply = post_form(app_client, path, path, _row("TP2-B1", "", **blank), follow_redirects=False)
    assert reply.status_code == 303 and "saved=" in reply.headers["location"]
    follow = app_client.get(reply.headers["location"])
    assert "Received TP2-B1" in follow.text and 'value="TP2"' in follow.text  # the location is kept
    with db.session() as s:
        stored = s.get(Sample, scheduled.id)
        assert stored is not None
    # the schedule's values stay (blank cells keep them), the receipt adds its own
    assert (stored.depth_from_m, stored.depth_to_m, stored.sample_type) == (0.5, 1.0, "bulk")
    assert (stored.condition, stored.received_by_id) == ("damaged", people.tech.id)
    again = post_form(app_client, path, path, _row("TP2-B1", "", **blank))
    assert again.status_code == 422 and "received already" in again.text


def test_the_receiver_can_be_another_member_of_the_laboratory_but_not_a_stranger(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/jobs/{job.id}/receive"
    reply = post_form(app_client, path, path, _row("BH1-U1", "1.0", received_by_id=str(people.review.id)))
    assert reply.status_code == 200
    refused = post_form(app_client, path, path, _row("BH1-U2", "2.0", received_by_id="999999"))
    assert refused.status_code == 422 and re.search(r'id="err-received_by_id">[^<]+', refused.text)
    future = post_form(app_client, path, path, _row("BH1-U3", "3.0", received_at="2999-01-01T00:00"))
    assert future.status_code == 422 and "future" in future.text
    odd = post_form(app_client, path, path, _row("BH1-U4", "4.0", received_at="yesterday"))
    assert odd.status_code == 422 and "not a date and time" in odd.text
    with db.session() as s:
        received = list(s.exec(select(Sample.code, Sample.received_by_id)))
    assert received == [("BH1-U1", people.review.id)]


def _label_texts(pdf: bytes) -> list[str]:
    return [page.extract_text() or "" for page in PdfReader(BytesIO(pdf)).pages]


def test_labels_of_a_delivery_print_as_an_a4_sheet_and_one_label_a_page(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/jobs/{job.id}/receive"
    for n in range(1, 6):
        assert post_form(app_client, path, path, _row(f"BH1-U{n}", f"{n}.00")).status_code == 200
    with db.session() as s:
        ids = [x.id for x in s.exec(select(Sample).order_by(col(Sample.code)))]
    page = app_client.get(path)
    assert len(re.findall(r'name="sample" value="\d+"[^>]*checked', page.text)) == 5  # this delivery ticked
    query = "&".join(f"sample={i}" for i in ids[:3])
    sheet = app_client.get(f"/jobs/{job.id}/labels.pdf?layout=sheet&{query}")
    assert sheet.status_code == 200 and sheet.headers["content-type"] == "application/pdf"
    reader = PdfReader(BytesIO(sheet.content))
    assert len(reader.pages) == 1  # three labels fit one sheet of 24 (common practice: 3 x 8)
    width, height = float(reader.pages[0].mediabox.width), float(reader.pages[0].mediabox.height)
    assert (round(width), round(height)) == (595, 842)  # A4, 210 x 297 mm (ISO 216)
    text = _label_texts(sheet.content)[0]
    assert all(f"BH1-U{n}" in text for n in (1, 2, 3)) and "BH1-U4" not in text
    assert "HB-2026-031" in text and "1.00 m" in text

    single = app_client.get(f"/jobs/{job.id}/labels.pdf?layout=single")
    texts = _label_texts(single.content)
    assert len(texts) == 5 and [f"BH1-U{n}" in t for n, t in enumerate(texts, start=1)] == [True] * 5
    box = PdfReader(BytesIO(single.content)).pages[0].mediabox
    assert (round(float(box.width) / MM), round(float(box.height) / MM)) == (62, 29)  # a small roll label

    one = app_client.get(f"/samples/{ids[0]}/label.pdf")
    assert one.status_code == 200 and "BH1-U1" in _label_texts(one.content)[0]


def test_label_requests_that_cannot_be_printed_are_refused_without_a_server_error(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    assert app_client.get(f"/jobs/{job.id}/labels.pdf").status_code == 422  # no samples yet
    loc = samples.add_location(db, people.admin, job.id or 0, "BH1")
    samples.add_sample(db, people.admin, loc.id or 0, 'S"1\n', 1.0)
    for query in ("layout=poster", "sample=abc", "sample=99999999999999999999999", "sample=-1"):
        reply = app_client.get(f"/jobs/{job.id}/labels.pdf?{query}")
        assert reply.status_code in (200, 422), query


def test_labels_and_the_receipt_sheet_need_a_signed_in_person(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    for path in (f"/jobs/{job.id}/receive", f"/jobs/{job.id}/labels.pdf"):
        reply = app_client.get(path, follow_redirects=False)
        assert reply.status_code == 303 and reply.headers["location"].startswith("/signin")
