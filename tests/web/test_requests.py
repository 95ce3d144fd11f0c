"""Requesting tests in bulk: what will be created is shown first, then created in one go."""

from __future__ import annotations

from dataclasses import dataclass

from fastapi.testclient import TestClient
from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import AuditEvent, LabTest
from server.services import jobs, samples
from tests.conftest import PASSWORDS, People
from tests.support.http import post_form, sign_in


@dataclass
class Boreholes:
    job_id: int
    bh1: int
    samples: dict[str, int]  # by code


def _two_boreholes(db: Database, people: People) -> Boreholes:
    """BH1 with two clays and a sand, BH2 with one clay; one BH1 clay already has the Atterberg set."""
    client = jobs.create_client(db, people.admin, "Bulk Client Ltd")
    job = jobs.create_job(db, people.admin, client.id or 0, "B-200", "Bulk job")
    by_code: dict[str, int] = {}
    locations: dict[str, int] = {}
    for loc_code, rows in {
        "BH1": [
            ("BH1-U1", 1.0, "U100", "Firm brown CLAY"),
            ("BH1-D2", 2.0, "disturbed", "Dense SAND"),
            ("BH1-U3", 3.0, "U100", "Stiff grey silty clay"),
        ],
        "BH2": [("BH2-U1", 1.0, "U100", "Soft CLAY")],
    }.items():
        loc = samples.add_location(db, people.admin, job.id or 0, loc_code)
        locations[loc_code] = loc.id or 0
        for code, top, kind, description in rows:
            made = samples.add_sample(db, people.admin, loc.id or 0, code, top, top + 0.45, kind, description)
            by_code[code] = made.id or 0
    jobs.request_tests(db, people.admin, [by_code["BH1-U3"]], ["atterberg"])
    return Boreholes(job.id or 0, locations["BH1"], by_code)


def _tests(db: Database) -> list[tuple[int, str, int | None]]:
    with db.session() as s:
        rows = s.exec(select(LabTest).order_by(col(LabTest.sample_id), col(LabTest.method)))
        return [(t.sample_id, t.method, t.assigned_to_id) for t in rows]


def _clay_of_bh1(bh: Boreholes) -> str:
    return (
        f"/requests?job_id={bh.job_id}&location_id={bh.bh1}&described=clay"
        "&methods=atterberg&methods=hydrometer&preview=1"
    )


def test_the_preview_shows_each_clay_sample_of_the_borehole_and_creates_nothing(
    app_client: TestClient, db: Database, people: People
) -> None:
    bh = _two_boreholes(db, people)
    before = _tests(db)
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.get(_clay_of_bh1(bh))
    assert reply.status_code == 200 and reply.template.name == "pages/requests.html"  # type: ignore[attr-defined]
    plan = {p.sample.code: (p.new, p.existing) for p in reply.context["plan"]}  # type: ignore[attr-defined]
    assert plan == {
        "BH1-U1": (["atterberg", "hydrometer"], []),
        "BH1-U3": (["hydrometer"], ["atterberg"]),  # has the Atterberg set already: left out
    }
    assert "Request 3 test(s)" in reply.text
    assert _tests(db) == before


def test_confirming_creates_every_test_shown_assigned_to_the_technician(
    app_client: TestClient, db: Database, people: People
) -> None:
    bh = _two_boreholes(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    fields = [
        ("job_id", str(bh.job_id)),
        ("sample_ids", str(bh.samples["BH1-U1"])),
        ("sample_ids", str(bh.samples["BH1-U3"])),
        ("methods", "atterberg"),
        ("methods", "hydrometer"),
        ("assign_to", str(people.tech.id)),
    ]
    reply = post_form(app_client, _clay_of_bh1(bh), "/requests", fields)
    assert reply.status_code == 200 and "3 test(s) requested on" in reply.text
    u1, u3, tech = bh.samples["BH1-U1"], bh.samples["BH1-U3"], people.tech.id
    assert _tests(db) == [
        (u1, "atterberg", tech),
        (u1, "hydrometer", tech),
        (u3, "atterberg", None),  # the earlier request, untouched
        (u3, "hydrometer", tech),
    ]
    with db.session() as s:
        events = s.exec(
            select(AuditEvent).where(AuditEvent.action == "request", AuditEvent.actor == "review")
        )
        assert len(list(events)) == 3


def test_a_request_that_fails_part_way_creates_nothing(
    app_client: TestClient, db: Database, people: People
) -> None:
    bh = _two_boreholes(db, people)
    before = _tests(db)
    sign_in(app_client, "admin", PASSWORDS["admin"])
    fields = [
        ("job_id", str(bh.job_id)),
        ("sample_ids", str(bh.samples["BH1-U1"])),
        ("sample_ids", "999999"),  # removed since the preview, say
        ("methods", "atterberg"),
    ]
    reply = post_form(app_client, f"/requests?job_id={bh.job_id}", "/requests", fields)
    assert reply.status_code == 404 and "sample 999999 does not exist" in reply.text
    assert _tests(db) == before


def test_no_method_chosen_is_refused_at_the_methods_field(
    app_client: TestClient, db: Database, people: People
) -> None:
    bh = _two_boreholes(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.get(f"/requests?job_id={bh.job_id}&described=clay&preview=1")
    assert reply.status_code == 422
    assert reply.context["errors"] == {"methods": "choose at least one method"}  # type: ignore[attr-defined]
    assert reply.context["plan"] == []  # type: ignore[attr-defined]


def test_a_filter_by_sample_type_covers_every_borehole(
    app_client: TestClient, db: Database, people: People
) -> None:
    bh = _two_boreholes(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.get(f"/requests?job_id={bh.job_id}&sample_type=U100&methods=vane&preview=1")
    assert [p.sample.code for p in reply.context["plan"]] == ["BH1-U1", "BH1-U3", "BH2-U1"]  # type: ignore[attr-defined]


def test_an_assignee_who_does_not_exist_is_refused_and_nothing_is_created(
    app_client: TestClient, db: Database, people: People
) -> None:
    bh = _two_boreholes(db, people)
    before = _tests(db)
    sign_in(app_client, "review", PASSWORDS["review"])
    fields = [
        ("job_id", str(bh.job_id)),
        ("sample_ids", str(bh.samples["BH1-U1"])),
        ("methods", "atterberg"),
        ("assign_to", "424242"),
    ]
    reply = post_form(app_client, f"/requests?job_id={bh.job_id}", "/requests", fields)
    assert reply.status_code == 422 and "assign_to" in reply.context["errors"]  # type: ignore[attr-defined]
    assert _tests(db) == before


def test_technicians_do_not_request_tests(app_client: TestClient, db: Database, people: People) -> None:
    bh = _two_boreholes(db, people)
    before = _tests(db)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    assert app_client.get("/requests").status_code == 403
    fields = [("job_id", str(bh.job_id)), ("sample_ids", str(bh.samples["BH1-U1"])), ("methods", "vane")]
    assert post_form(app_client, "/bench", "/requests", fields).status_code == 403
    assert _tests(db) == before


def test_a_bulk_request_leaves_out_a_withdrawn_sample(
    app_client: TestClient, db: Database, people: People
) -> None:
    bh = _two_boreholes(db, people)
    samples.withdraw_sample(db, people.admin, bh.samples["BH1-U1"], "Tube found empty on extrusion")
    sign_in(app_client, "review", PASSWORDS["review"])
    page = app_client.get(_clay_of_bh1(bh))
    assert page.status_code == 200
    assert "BH1-U1" not in page.text and "BH1-U3" in page.text  # the withdrawn clay is not offered
