"""The container and equipment registers: changes audited, bad values refused at their field,
look-ups for the bench, and the calibration state that drives the reviewer's error flag."""

from __future__ import annotations

from datetime import date, timedelta

import pytest
from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import AuditEvent, Container, Equipment, LabTest
from server.engine import evaluate
from server.services import bench, registers
from server.services.errors import Conflict, Invalid, NotFound
from tests.conftest import People
from tests.support.scenario import small_job
from tests.workflow.flows import STANDS


def _events(db: Database, entity: str) -> list[AuditEvent]:
    with db.session() as s:
        return list(
            s.exec(select(AuditEvent).where(AuditEvent.entity == entity).order_by(col(AuditEvent.id)))
        )


def test_adding_a_container_stores_its_code_in_capitals_and_audits_it(db: Database, people: People) -> None:
    made = registers.add_container(db, people.admin, " t-17 ", 15.20)
    assert (made.code, made.tare_g, made.active) == ("T-17", 15.20, True)
    (event,) = _events(db, "container")
    assert (event.action, event.actor, event.after["code"]) == ("create", "admin", "T-17")  # type: ignore[index]


def test_a_container_code_is_refused_when_it_is_in_the_register_in_any_case(
    db: Database, people: People
) -> None:
    registers.add_container(db, people.admin, "T-17", 15.20)
    with pytest.raises(Conflict, match="T-17 is already in the register"):
        registers.add_container(db, people.admin, "t-17", 14.00)
    with db.session() as s:
        assert len(list(s.exec(select(Container)))) == 1


@pytest.mark.parametrize(
    ("code", "tare", "fields"),
    [
        ("T-1", 0.0, {"tare_g"}),  # a tin has mass (common practice)
        ("T-1", -3.5, {"tare_g"}),
        ("T-1", 15000.0, {"tare_g"}),  # 15 kg: grams typed as milligrams, say
        ("", 15.2, {"code"}),
        ("T 1", float("nan"), {"code", "tare_g"}),  # both named at once
    ],
)
def test_a_bad_container_is_refused_at_its_fields_and_nothing_is_stored(
    db: Database, people: People, code: str, tare: float, fields: set[str]
) -> None:
    with pytest.raises(Invalid) as refused:
        registers.add_container(db, people.admin, code, tare)
    assert {e.loc[0] for e in refused.value.errors} == fields
    with db.session() as s:
        assert list(s.exec(select(Container))) == []
    assert _events(db, "container") == []


def test_reweighing_a_tin_keeps_the_old_tare_in_the_audit_trail(db: Database, people: People) -> None:
    made = registers.add_container(db, people.admin, "T-05", 12.34)
    registers.reweigh_container(db, people.admin, made.id or 0, 12.38, "annual re-weigh")
    assert registers.container_lookup(db, "t-05") == {"code": "T-05", "tare_g": 12.38, "active": True}
    event = _events(db, "container")[-1]
    assert event.action == "reweigh" and event.reason == "annual re-weigh"
    assert (event.before["tare_g"], event.after["tare_g"]) == (12.34, 12.38)  # type: ignore[index]


def test_a_deactivated_tin_is_kept_and_looked_up_as_out_of_use(db: Database, people: People) -> None:
    made = registers.add_container(db, people.admin, "T-09", 14.02)
    registers.set_container_active(db, people.admin, made.id or 0, False, "dented")
    assert registers.container_lookup(db, "T-09")["active"] is False
    assert [e.action for e in _events(db, "container")] == ["create", "deactivate"]


def test_looking_up_a_tin_that_is_not_in_the_register_says_so(db: Database) -> None:
    with pytest.raises(NotFound, match="container T-99 is not in the register"):
        registers.container_lookup(db, "T-99")


def test_equipment_needs_a_known_kind_and_a_due_date_and_names_both_at_once(
    db: Database, people: People
) -> None:
    with pytest.raises(Invalid) as refused:
        registers.add_equipment(db, people.admin, "BAL-09", "scale", "", None)
    assert {e.loc[0] for e in refused.value.errors} == {"kind", "calibration_due"}
    with db.session() as s:
        assert list(s.exec(select(Equipment))) == []


def test_recalibrated_equipment_gets_its_new_due_date_with_the_old_one_audited(
    db: Database, people: People
) -> None:
    made = registers.add_equipment(db, people.admin, "cone-1", "cone", "80 g / 30°", date(2026, 1, 31))
    registers.update_equipment(
        db, people.admin, made.id or 0, "80 g / 30°", date(2027, 1, 31), "recalibrated"
    )
    looked = registers.equipment_lookup(db, "CONE-1", on=date(2026, 12, 2))
    assert (looked["calibration_due"], looked["state"]) == ("2027-01-31", "in calibration")
    event = _events(db, "equipment")[-1]
    assert (event.before["calibration_due"], event.after["calibration_due"]) == (  # type: ignore[index]
        "2026-01-31",
        "2027-01-31",
    )


# In calibration up to and including the due date (the engine's rule, server/engine/equipment.py:
# a certificate is "valid until", common practice); a warning in the last 30 days (common practice).
@pytest.mark.parametrize(
    ("due", "state", "days_left"),
    [
        (date(2026, 12, 2), "due within 30 days", 0),  # the due date itself is still in calibration
        (date(2027, 1, 1), "due within 30 days", 30),
        (date(2027, 1, 2), "in calibration", 31),
        (date(2026, 12, 1), "past due", -1),
        (None, "past due", None),  # a calibration that cannot be shown is not relied on
    ],
)
def test_calibration_state_warns_in_the_last_30_days_and_fails_after_the_due_date(
    due: date | None, state: str, days_left: int | None
) -> None:
    found = registers.calibration_state(due, date(2026, 12, 2))
    assert (found.state, found.days_left) == (state, days_left)


def test_the_reading_entry_of_past_due_equipment_makes_the_engine_flag_the_test(
    db: Database, people: People
) -> None:
    registers.add_equipment(db, people.admin, "BAL-02", "balance", "bench 2", date(2026, 11, 30))
    looked = registers.equipment_lookup(db, "bal-02", on=date(2026, 12, 2))
    assert looked["state"] == "past due" and looked["days_left"] == -2
    readings = {
        "tested_on": "2026-12-02",
        "equipment": [looked["reading"]],
        "determinations": [{"tare_g": 10.00, "wet_tare_g": 36.00, "dry_tare_g": 30.00}],  # ASTM D2216: 30.0 %
    }
    flags = [(f.code, f.severity) for f in evaluate("water-content", readings).flags]
    assert ("equipment-calibration-expired", "error") in flags


def test_a_test_saved_with_past_due_equipment_carries_the_error_flag_for_the_reviewer(
    db: Database, people: People
) -> None:
    job = small_job(db, people.admin, method="water-content")
    item = registers.add_equipment(
        db, people.admin, "BAL-02", "balance", "", date.today() - timedelta(days=3)
    )
    reading = registers.equipment_view(item, date.today())["reading"]
    readings = {
        "tested_on": date.today().isoformat(),
        "equipment": [reading],
        "determinations": [{"container": "T-01", "tare_g": 10.00, "wet_tare_g": 36.00, "dry_tare_g": 30.00}],
    }
    saved = bench.save_readings(db, people.tech, job.test_id, readings, 1)
    bench.submit(db, people.tech, job.test_id, saved.test.version, STANDS)  # an error remark needs a reason
    with db.session() as s:
        test = s.get(LabTest, job.test_id)
    assert test is not None and test.status == "submitted"
    assert [f["code"] for f in test.flags or [] if f["severity"] == "error"] == [
        "equipment-calibration-expired"
    ]


def test_laboratory_details_need_a_name(db: Database, people: People) -> None:
    with pytest.raises(Invalid, match="name is required"):
        registers.set_laboratory(db, people.admin, "  ", "Unit 4", "")
    registers.set_laboratory(db, people.admin, "Fellside Soils Lab", "Unit 4", "none")
    lab = registers.laboratory(db)
    assert lab is not None and (lab.name, lab.address) == ("Fellside Soils Lab", "Unit 4")
