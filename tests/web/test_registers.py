"""The registers over HTTP: the bench's look-ups (JSON or an htmx fragment) and the admin pages."""

from __future__ import annotations

from datetime import date, timedelta

from fastapi.testclient import TestClient
from sqlmodel import select

from server.db.session import Database
from server.db.tables import Container, Equipment
from server.services import bench, registers
from tests.conftest import PASSWORDS, People
from tests.support.http import post_form, sign_in
from tests.support.scenario import small_job
from tests.workflow.flows import STANDS


def test_a_tin_picked_by_its_code_answers_its_tare(
    app_client: TestClient, db: Database, people: People
) -> None:
    registers.add_container(db, people.admin, "T-17", 15.20)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    reply = app_client.get("/registers/containers/t-17")
    assert reply.status_code == 200
    assert reply.json() == {"code": "T-17", "tare_g": 15.20, "active": True}


def test_an_unknown_tin_answers_404_with_a_message(app_client: TestClient, db: Database) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    reply = app_client.get("/registers/containers/T-404")
    assert reply.status_code == 404
    assert reply.json() == {"detail": "container T-404 is not in the register"}
    fragment = app_client.get("/registers/containers/T-404", headers={"HX-Request": "true"})
    assert (
        fragment.status_code == 404
        and "not in the register" in fragment.text
        and "<html" not in fragment.text
    )


def test_equipment_picked_by_its_code_answers_its_calibration_state(
    app_client: TestClient, db: Database, people: People
) -> None:
    due = registers.today() - timedelta(days=3)
    registers.add_equipment(db, people.admin, "BAL-02", "balance", "bench 2", due)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    reply = app_client.get("/registers/equipment/bal-02")
    assert reply.status_code == 200
    body = reply.json()
    assert {k: body[k] for k in ("code", "kind", "state", "days_left")} == {
        "code": "BAL-02",
        "kind": "balance",
        "state": "past due",  # 3 days after the due date (server/engine/equipment.py rule)
        "days_left": -3,
    }
    assert body["calibration_due"] == (registers.today() - timedelta(days=3)).isoformat()
    assert body["reading"] == {"id": "BAL-02", "calibration_due": body["calibration_due"]}
    fragment = app_client.get("/registers/equipment/BAL-02", headers={"HX-Request": "true"})
    assert "✖ past due" in fragment.text and "3 day(s) past" in fragment.text  # symbol and words


def test_the_equipment_picker_lists_only_instruments_of_the_kind_in_service(
    app_client: TestClient, db: Database, people: People
) -> None:
    due = registers.today() + timedelta(days=90)
    registers.add_equipment(db, people.admin, "BAL-01", "balance", "", due)
    retired = registers.add_equipment(db, people.admin, "BAL-03", "balance", "", due)
    registers.set_equipment_active(db, people.admin, retired.id or 0, False)
    registers.add_equipment(db, people.admin, "OVN-01", "oven", "", due)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    reply = app_client.get("/registers/equipment", params={"kind": "balance"})
    assert [(i["code"], i["state"]) for i in reply.json()] == [("BAL-01", "in calibration")]
    assert app_client.get("/registers/equipment", params={"kind": "scale"}).status_code == 422


def test_the_look_ups_need_a_signed_in_person(app_client: TestClient) -> None:
    reply = app_client.get("/registers/containers/T-01", follow_redirects=False)
    assert reply.status_code == 303 and reply.headers["location"].startswith("/signin")


def test_the_register_pages_are_for_admins_only(app_client: TestClient, db: Database) -> None:
    sign_in(app_client, "review", PASSWORDS["review"])
    for path in ("/registers", "/registers/admin/containers", "/registers/admin/equipment"):
        assert app_client.get(path).status_code == 403


def test_an_admin_adds_a_tin_and_the_page_confirms_it(app_client: TestClient, db: Database) -> None:
    sign_in(app_client, "admin", PASSWORDS["admin"])
    path = "/registers/admin/containers"
    reply = post_form(app_client, path, path, {"code": "t-21", "tare_g": "14,37"})  # a decimal comma
    assert reply.status_code == 200 and "Container T-21 added with tare 14.37 g." in reply.text
    with db.session() as s:
        assert [(c.code, c.tare_g) for c in s.exec(select(Container))] == [("T-21", 14.37)]


def test_a_tare_that_is_not_a_number_is_refused_at_its_field(app_client: TestClient, db: Database) -> None:
    sign_in(app_client, "admin", PASSWORDS["admin"])
    path = "/registers/admin/containers"
    reply = post_form(app_client, path, path, {"code": "T-21", "tare_g": "about 14"})
    assert reply.status_code == 422
    assert reply.template.name == "pages/containers.html"  # type: ignore[attr-defined]
    assert reply.context["errors"] == {"tare_g": "tare must be a number of grams, such as 15.32"}  # type: ignore[attr-defined]
    assert 'value="about 14"' in reply.text  # what was typed stays in the form
    with db.session() as s:
        assert list(s.exec(select(Container))) == []


def test_an_admin_reweighs_and_retires_a_tin(app_client: TestClient, db: Database, people: People) -> None:
    made = registers.add_container(db, people.admin, "T-03", 11.10)
    sign_in(app_client, "admin", PASSWORDS["admin"])
    path = "/registers/admin/containers"
    reply = post_form(app_client, path, f"{path}/{made.id}/tare", {"tare_g": "11.14"})
    assert "Container T-03 re-weighed: tare now 11.14 g." in reply.text
    reply = post_form(app_client, path, f"{path}/{made.id}/active", {"active": "0"})
    assert "Container T-03 is taken out of use." in reply.text and "⊘ out of use" in reply.text
    assert registers.container_lookup(db, "T-03") == {"code": "T-03", "tare_g": 11.14, "active": False}


def test_an_admin_adds_equipment_and_sees_its_calibration_state(app_client: TestClient, db: Database) -> None:
    sign_in(app_client, "admin", PASSWORDS["admin"])
    path = "/registers/admin/equipment"
    due = (registers.today() + timedelta(days=10)).isoformat()
    reply = post_form(
        app_client,
        path,
        path,
        {"code": "cup-01", "kind": "cup-device", "description": "", "calibration_due": due},
    )
    assert "Equipment CUP-01 added." in reply.text
    assert "⚠ due within 30 days" in reply.text and "10 day(s) left" in reply.text
    refused = post_form(app_client, path, path, {"code": "X-1", "kind": "", "calibration_due": "31/12/2026"})
    assert refused.status_code == 422
    assert set(refused.context["errors"]) == {"kind", "calibration_due"}  # type: ignore[attr-defined]
    assert refused.context["errors"]["calibration_due"] == (  # type: ignore[attr-defined]
        "due date must be written YYYY-MM-DD, not '31/12/2026'"
    )
    with db.session() as s:
        assert [e.code for e in s.exec(select(Equipment))] == ["CUP-01"]


def test_an_admin_sets_the_laboratory_details_printed_on_reports(
    app_client: TestClient, db: Database
) -> None:
    sign_in(app_client, "admin", PASSWORDS["admin"])
    reply = post_form(
        app_client,
        "/registers",
        "/registers/admin/laboratory",
        {"lab_name": "Fellside Soils Lab", "address": "Unit 4, Quarry Lane", "accreditation": ""},
    )
    assert reply.status_code == 200 and "Laboratory details saved." in reply.text
    lab = registers.laboratory(db)
    assert lab is not None and (lab.name, lab.address) == ("Fellside Soils Lab", "Unit 4, Quarry Lane")
    refused = post_form(
        app_client, "/registers", "/registers/admin/laboratory", {"lab_name": " ", "address": "x"}
    )
    assert refused.status_code == 422 and "name is required" in refused.text


def test_the_reviewer_sees_the_error_flag_of_a_test_run_on_past_due_equipment(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin, method="water-content")
    item = registers.add_equipment(
        db, people.admin, "BAL-02", "balance", "", date.today() - timedelta(days=1)
    )
    readings = {
        "tested_on": date.today().isoformat(),
        "equipment": [registers.equipment_view(item, date.today())["reading"]],
        "determinations": [{"tare_g": 10.00, "wet_tare_g": 36.00, "dry_tare_g": 30.00}],
    }
    saved = bench.save_readings(db, people.tech, job.test_id, readings, 1)
    bench.submit(db, people.tech, job.test_id, saved.test.version, STANDS)  # an error remark needs a reason
    sign_in(app_client, "review", PASSWORDS["review"])
    page = app_client.get(f"/review/{job.test_id}")
    assert page.status_code == 200
    assert "equipment BAL-02 was past its calibration due date" in page.text
