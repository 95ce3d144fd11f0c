"""Plausible values at the front doors (S7 point 6): an absurd mass typed at the bench is refused
at its field with 422 and never stored, a record stored before these rules still opens (no server
error), and the equipment register keeps a balance's capacity, which the bench carries into the
readings so that a heavier mass is refused.

Sources: a balance does not read above its capacity, so a heavier mass is a typing or unit slip
(common practice); the 10 kg bound where no balance is named and the probe's values (1e300 g,
1,000 kg) are those of the S7 issue.
"""

from __future__ import annotations

from fastapi.testclient import TestClient
from httpx import Response
from sqlmodel import select

from server.db.session import Database
from server.db.tables import Equipment, LabTest
from server.engine.readings import as_entered
from server.services import registers
from tests.conftest import PASSWORDS, People
from tests.support.http import csrf_of, post_form, sign_in
from tests.support.records import audit_events
from tests.support.scenario import small_job

WET = "water_content.determinations.0.wet_tare_g"
FAR = registers.today().replace(year=registers.today().year + 1)  # a due date a year ahead


def _save(client: TestClient, test_id: int, changes: list[dict[str, str]]) -> Response:
    token = csrf_of(client.get(f"/tests/{test_id}"))
    return client.post(f"/tests/{test_id}/fields", json={"changes": changes}, headers={"X-CSRF-Token": token})


def _readings(db: Database, test_id: int) -> object:
    with db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None
    return test.readings


def test_absurd_masses_are_refused_at_the_field_and_never_stored(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    for typed, words in (
        ("1e300", "too large to be a reading"),
        ("1000000", "above 10000 g"),
        ("nan", "number"),
    ):
        reply = _save(app_client, job.test_id, [{"path": WET, "value": typed, "base": ""}])
        assert reply.status_code == 422, (typed, reply.text)
        (error,) = reply.json()["errors"]
        assert error["path"] == WET and words in error["message"], typed
    assert _readings(db, job.test_id) is None and not audit_events(db, "lab_test", job.test_id, "readings")


def test_a_record_stored_before_these_rules_still_opens_with_the_refusal_shown(
    app_client: TestClient, db: Database, people: People
) -> None:
    """Such a record is not changed (no migration): its pages show the refusal at the field."""
    job = small_job(db, people.admin)
    absurd = {
        "water_content": {"determinations": [{"tare_g": 10.0, "wet_tare_g": 1e300, "dry_tare_g": 30.0}]}
    }
    with db.transaction() as s:  # as the probe left it, written before the engine refused it
        test = s.get(LabTest, job.test_id)
        assert test is not None
        test.readings, test.status = absurd, "draft"
        s.add(test)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    page = app_client.get(f"/tests/{job.test_id}")
    assert page.status_code == 200 and "too large to be a reading" in page.text
    stored = _readings(db, job.test_id)  # PostgreSQL's jsonb gives 1e300 back as an integer
    shown = as_entered(stored["water_content"]["determinations"][0]["wet_tare_g"])  # type: ignore[index]
    assert float(shown) == 1e300 and f'value="{shown}"' in page.text  # shown by its own text, unchanged
    sign_in(app_client, "review", PASSWORDS["review"])
    assert app_client.get(f"/review/{job.test_id}").status_code == 200


def test_a_balance_keeps_its_capacity_and_the_bench_refuses_a_heavier_mass(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "admin", PASSWORDS["admin"])
    page = "/registers/admin/equipment"
    added = post_form(
        app_client,
        page,
        page,
        {
            "code": "bal-05",
            "kind": "balance",
            "description": "",
            "calibration_due": FAR.isoformat(),
            "capacity_g": "620,0",
        },
        follow_redirects=False,
    )
    assert added.status_code == 303, added.text
    with db.session() as s:
        item = s.exec(select(Equipment).where(Equipment.code == "BAL-05")).one()
    assert item.capacity_g == 620.0
    assert "capacity 620 g" in app_client.get(page).text
    (event,) = audit_events(db, "equipment", item.id, "create")
    assert event.after is not None and event.after["capacity_g"] == 620.0

    sign_in(app_client, "tech", PASSWORDS["tech"])
    look_up = app_client.get("/registers/equipment/BAL-05").json()
    assert look_up["reading"] == {"id": "BAL-05", "calibration_due": FAR.isoformat(), "capacity_g": 620.0}
    job = small_job(db, people.admin, method="water-content")
    named = [
        {"path": "equipment.0.id", "value": "BAL-05", "base": ""},
        {"path": "equipment.0.calibration_due", "value": FAR.isoformat(), "base": ""},
        {"path": "equipment.0.capacity_g", "value": "620", "base": ""},
    ]
    assert _save(app_client, job.test_id, named).status_code == 200
    heavy = _save(
        app_client, job.test_id, [{"path": "determinations.0.wet_tare_g", "value": "712.40", "base": ""}]
    )
    assert heavy.status_code == 422
    assert "above the capacity of balance BAL-05 (620 g)" in heavy.json()["errors"][0]["message"]
    light = _save(
        app_client, job.test_id, [{"path": "determinations.0.wet_tare_g", "value": "612.40", "base": ""}]
    )
    assert light.status_code == 200


def test_only_a_balance_has_a_capacity_and_a_capacity_must_be_a_number(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "admin", PASSWORDS["admin"])
    page = "/registers/admin/equipment"
    base = {"description": "", "calibration_due": FAR.isoformat()}
    oven = post_form(app_client, page, page, {**base, "code": "OVN-09", "kind": "oven", "capacity_g": "5000"})
    assert oven.status_code == 422 and "only a balance has a capacity" in oven.text
    words = post_form(
        app_client, page, page, {**base, "code": "BAL-09", "kind": "balance", "capacity_g": "lots"}
    )
    assert words.status_code == 422 and "capacity must be a number of grams" in words.text
    zero = post_form(app_client, page, page, {**base, "code": "BAL-09", "kind": "balance", "capacity_g": "0"})
    assert zero.status_code == 422 and "capacity must be more than 0 g" in zero.text
    with db.session() as s:
        assert not s.exec(select(Equipment)).all()  # nothing stored


def test_an_update_changes_the_capacity_only_when_the_form_carries_it(
    app_client: TestClient, db: Database, people: People
) -> None:
    item = registers.add_equipment(db, people.admin, "BAL-06", "balance", "", FAR, 600.0)
    registers.update_equipment(db, people.admin, item.id or 0, "bench 6", FAR)  # as before: no capacity
    sign_in(app_client, "admin", PASSWORDS["admin"])
    page = "/registers/admin/equipment"
    kept = post_form(
        app_client, page, f"{page}/{item.id}", {"description": "bench 6", "calibration_due": FAR.isoformat()}
    )
    assert kept.status_code in (200, 303)
    on_form = {"description": "bench 6", "calibration_due": FAR.isoformat(), "capacity_on_form": "1"}
    changed = {**on_form, "capacity_g": "6200"}
    assert (
        post_form(app_client, page, f"{page}/{item.id}", changed, follow_redirects=False).status_code == 303
    )
    cleared = {**on_form, "capacity_g": ""}
    with db.session() as s:
        assert s.get(Equipment, item.id).capacity_g == 6200.0  # type: ignore[union-attr]
    assert (
        post_form(app_client, page, f"{page}/{item.id}", cleared, follow_redirects=False).status_code == 303
    )
    with db.session() as s:
        assert s.get(Equipment, item.id).capacity_g is None  # type: ignore[union-attr]
