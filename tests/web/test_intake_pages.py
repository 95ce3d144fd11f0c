"""The registration pages through the real app: clients, jobs, locations and samples.

Each form either stores and redirects to a page that says so, or answers 422 with the typed
values kept and a message at each refused field, storing nothing. Every create and edit leaves
an audit event with before and after. The scenario (Marsh Lane culvert) is fictional.
"""

from __future__ import annotations

import re

import pytest
from fastapi.testclient import TestClient
from sqlmodel import select

from server.db.session import Database
from server.db.tables import Client, Job, LabTest, Location, Sample
from server.services import bench, jobs, reports, samples
from tests.conftest import PASSWORDS, People
from tests.reports.issued import two_approved_samples
from tests.support.http import post_form, sign_in
from tests.support.records import audit_events, row_count
from tests.support.scenario import ATTERBERG

BASE = "http://testserver"
HOSTILE = "<script>alert(1)</script> & <b>x</b>"


def _error_at(page_text: str, field: str) -> str:
    found = re.search(rf'id="err-{re.escape(field)}">([^<]*)<', page_text)
    assert found, f"no refusal shown at {field}"
    return found.group(1)


def _job(db: Database, people: People, code: str = "ML-2026-007") -> Job:
    client = jobs.create_client(db, people.admin, "Marsh Lane Partnership")
    return jobs.create_job(db, people.admin, client.id or 0, code, "Marsh Lane culvert", "Marsh Lane")


def test_a_reviewer_registers_a_client_and_the_audit_keeps_what_was_typed(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = post_form(
        app_client,
        "/clients",
        "/clients",
        {
            "name": "Fenwick Drainage Board",
            "contact": "R. Amberley",
            "email": "r.amberley@fenwick.example",
            "postal_address": "1 Sluice Row\nFenwick",
        },
    )
    assert reply.status_code == 200 and "Client registered." in reply.text
    assert "Fenwick Drainage Board" in reply.text
    (event,) = audit_events(db, "client", action="create")
    assert event.actor_id == people.review.id and event.after["email"] == "r.amberley@fenwick.example"


def test_a_client_form_with_several_mistakes_shows_each_at_its_field_and_stores_nothing(
    app_client: TestClient, db: Database
) -> None:
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = post_form(app_client, "/clients", "/clients", {"name": "", "email": "not-an-address"})
    assert reply.status_code == 422
    assert "required" in _error_at(reply.text, "name")
    assert "not an e-mail address" in _error_at(reply.text, "email")
    assert 'value="not-an-address"' in reply.text  # the typed value is kept
    assert row_count(db, Client) == 0


def test_technicians_cannot_register_clients_or_jobs(app_client: TestClient, db: Database) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    assert app_client.get("/clients").status_code == 403
    assert app_client.get("/jobs/new").status_code == 403


def test_a_job_is_registered_and_edited_with_before_and_after_in_the_audit(
    app_client: TestClient, db: Database, people: People
) -> None:
    client = jobs.create_client(db, people.admin, "Marsh Lane Partnership")
    sign_in(app_client, "review", PASSWORDS["review"])
    fields = {
        "client_id": str(client.id),
        "code": "ML-2026-007",
        "title": "Marsh Lane culvert",
        "site": "Marsh Lane",
        "order_reference": "PO 4471",
        "received_on": "2026-11-30",
        "due_date": "2026-12-14",
        "standards": "bs-iso",
        "notes": "Cone liquid limits, please.",
    }
    reply = post_form(app_client, "/jobs/new", "/jobs/new", fields, follow_redirects=False)
    assert reply.status_code == 303
    job_path = reply.headers["location"].split("?")[0]
    page = app_client.get(reply.headers["location"])
    assert page.status_code == 200 and "Job registered." in page.text and "PO 4471" in page.text
    samples.add_location(db, people.review, int(job_path.rsplit("/", 1)[1]), "BH1")
    page = app_client.get(job_path)
    # a BS/ISO job offers the cone liquid limit and not the cup before it (DESIGN.md section 7)
    offered = re.findall(r'name="methods" value="([^"]+)"', page.text)
    assert offered.index("ll-cone") < offered.index("ll-cup-multipoint")

    edited = fields | {"title": "Marsh Lane culvert and headwall"}
    reply = post_form(app_client, f"{job_path}/edit", f"{job_path}/edit", edited, follow_redirects=False)
    assert reply.status_code == 303
    (event,) = audit_events(db, "job", action="update")
    assert event.before["title"] == "Marsh Lane culvert"
    assert event.after["title"] == "Marsh Lane culvert and headwall"


def test_a_due_date_before_receipt_then_a_duplicate_job_number_are_refused_at_their_fields(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    fields = {
        "client_id": str(job.client_id),
        "code": "ML-2026-008",
        "title": "Another",
        "received_on": "2026-12-01",
        "due_date": "2026-11-01",
        "standards": "astm",
    }
    reply = post_form(app_client, "/jobs/new", "/jobs/new", fields)
    assert reply.status_code == 422 and "before the received date" in _error_at(reply.text, "due_date")
    reply = post_form(app_client, "/jobs/new", "/jobs/new", fields | {"code": job.code, "due_date": ""})
    assert reply.status_code in (409, 422) and job.code in _error_at(reply.text, "code")
    assert row_count(db, Job) == 1


def test_the_job_number_is_locked_once_a_report_is_issued(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    with db.session() as s:
        job = s.get(Job, two.job_id)
        assert job is not None
    sign_in(app_client, "review", PASSWORDS["review"])
    path = f"/jobs/{two.job_id}/edit"
    fields = {
        "client_id": str(job.client_id),
        "code": job.code + "-B",
        "title": job.title,
        "received_on": job.received_at.date().isoformat(),
        "standards": job.standards,
    }
    reply = post_form(app_client, path, path, fields)
    assert reply.status_code == 422 and "issued" in _error_at(reply.text, "code")
    with db.session() as s:
        assert (s.get(Job, two.job_id) or job).code == job.code


def test_locations_and_samples_are_added_from_the_job_page_with_tests_requested(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    path = f"/jobs/{job.id}"
    reply = post_form(
        app_client,
        path,
        f"{path}/locations",
        {
            "code": "BH3",
            "kind": "borehole",
            "easting": "412345.2",
            "northing": "298765,4",
            "ground_level_m": "12.35",
        },
    )
    assert reply.status_code == 200 and "Location added." in reply.text
    with db.session() as s:
        loc = s.exec(select(Location).where(Location.job_id == job.id)).one()
    assert loc.northing == pytest.approx(298765.4)  # a decimal comma is read (common practice)
    reply = post_form(
        app_client,
        path,
        f"{path}/samples",
        [
            ("location_id", str(loc.id)),
            ("code", "BH3-U4"),
            ("depth_from_m", "4.00"),
            ("depth_to_m", "4.45"),
            ("sample_type", "U100"),
            ("description", "Firm grey CLAY"),
            ("methods", "water-content"),
            ("methods", "atterberg"),
        ],
    )
    assert reply.status_code == 200 and "Sample registered." in reply.text
    with db.session() as s:
        sample = s.exec(select(Sample).where(Sample.job_id == job.id)).one()
        methods = sorted(s.exec(select(LabTest.method).where(LabTest.sample_id == sample.id)))
    assert methods == ["atterberg", "water-content"]
    assert sample.received_at is None  # registered from a schedule, not received yet
    assert [e.after["code"] for e in audit_events(db, "sample", action="create")] == ["BH3-U4"]


def test_a_sample_with_base_above_top_and_an_unknown_type_is_refused_and_nothing_stored(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    loc = samples.add_location(db, people.admin, job.id or 0, "TP1", "trial pit")
    sign_in(app_client, "review", PASSWORDS["review"])
    path = f"/jobs/{job.id}"
    reply = post_form(
        app_client,
        path,
        f"{path}/samples",
        {
            "location_id": str(loc.id),
            "code": "TP1-B1",
            "depth_from_m": "1.20",
            "depth_to_m": "0.80",
            "sample_type": "bucket",
            "methods": "water-content",
        },
    )
    assert reply.status_code == 422
    assert "above depth top" in _error_at(reply.text, "depth_to_m")  # base >= top (DESIGN.md section 7)
    assert _error_at(reply.text, "sample_type")
    assert row_count(db, Sample) == 0 and row_count(db, LabTest) == 0


def test_a_sample_with_readings_cannot_move_but_its_description_can_be_corrected(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    bh1 = samples.add_location(db, people.admin, job.id or 0, "BH1")
    bh2 = samples.add_location(db, people.admin, job.id or 0, "BH2")
    sample = samples.add_sample(
        db, people.admin, bh1.id or 0, "BH1-D1", 1.0, 1.2, "disturbed", "Brown CLAY", methods=["atterberg"]
    )
    with db.session() as s:
        test = s.exec(select(LabTest).where(LabTest.sample_id == sample.id)).one()
    bench.save_readings(db, people.tech, test.id or 0, ATTERBERG, test.version)
    sign_in(app_client, "review", PASSWORDS["review"])
    path = f"/samples/{sample.id}/edit"
    fields = {
        "location_id": str(bh2.id),
        "code": "BH1-D1",
        "depth_from_m": "1.0",
        "depth_to_m": "1.2",
        "sample_type": "disturbed",
        "description": "Brown silty CLAY",
    }
    reply = post_form(app_client, path, path, fields)
    assert reply.status_code == 422 and "moved to another location" in _error_at(reply.text, "location_id")
    reply = post_form(app_client, path, path, fields | {"location_id": str(bh1.id)}, follow_redirects=False)
    assert reply.status_code == 303
    with db.session() as s:
        stored = s.get(Sample, sample.id)
        assert stored is not None
    assert (stored.location_id, stored.description) == (bh1.id, "Brown silty CLAY")


def test_withdrawing_a_sample_needs_a_reason_and_shows_on_the_job_page(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = _job(db, people)
    loc = samples.add_location(db, people.admin, job.id or 0, "BH1")
    sample = samples.add_sample(db, people.admin, loc.id or 0, "BH1-B2", 2.0, 2.5, "bulk")
    sign_in(app_client, "review", PASSWORDS["review"])
    path = f"/samples/{sample.id}/edit"
    reply = post_form(app_client, path, f"/samples/{sample.id}/withdraw", {"reason": "  "})
    assert reply.status_code == 422 and _error_at(reply.text, "reason")
    reason = "Bag split in transit; material mixed with the next sample"
    reply = post_form(app_client, path, f"/samples/{sample.id}/withdraw", {"reason": reason})
    assert reply.status_code == 200
    job_page = app_client.get(f"/jobs/{job.id}")
    assert "withdrawn" in job_page.text.lower() and reason in job_page.text
    (event,) = audit_events(db, "sample", action="withdraw")
    assert event.reason == reason and event.before["withdrawn_at"] is None and event.after["withdrawn_at"]
    assert row_count(db, Sample) == 1  # kept, never deleted (DESIGN.md section 7)


def test_what_people_type_is_escaped_on_every_intake_page(
    app_client: TestClient, db: Database, people: People
) -> None:
    client = jobs.create_client(db, people.admin, HOSTILE)
    job = jobs.create_job(db, people.admin, client.id or 0, "ML-9", HOSTILE, HOSTILE)
    loc = samples.add_location(db, people.admin, job.id or 0, "BH<1>")
    sample = samples.add_sample(db, people.admin, loc.id or 0, "S<1>", 1, 1, "disturbed", HOSTILE)
    sign_in(app_client, "admin", PASSWORDS["admin"])
    for path in (
        "/clients",
        f"/clients/{client.id}",
        f"/jobs/{job.id}",
        f"/jobs/{job.id}/edit",
        f"/samples/{sample.id}",
        f"/samples/{sample.id}/edit",
        f"/locations/{loc.id}/edit",
        f"/jobs/{job.id}/receive",
        f"/jobs/{job.id}/import",
        "/jobs?q=ML",
    ):
        page = app_client.get(path)
        assert page.status_code == 200, path
        assert "<script>alert(1)</script>" not in page.text, path


@pytest.mark.parametrize(
    "path",
    [
        "/clients/999999",
        "/jobs/999999/edit",
        "/locations/999999/edit",
        "/samples/999999/edit",
        "/jobs/999999/receive",
        "/jobs/999999/import",
        "/jobs/999999/labels.pdf",
        "/samples/999999/label.pdf",
    ],
)
def test_pages_of_records_that_do_not_exist_answer_404(
    app_client: TestClient, db: Database, path: str
) -> None:
    sign_in(app_client, "admin", PASSWORDS["admin"])
    assert app_client.get(path).status_code == 404
