"""The bench page over HTTP: a page for every method, live results as typed, each field saved as
typed against what the page last saw, refusals at the field, nothing half-stored."""

from __future__ import annotations

import re
from typing import Any

from fastapi.testclient import TestClient
from httpx import Response

from server.db.session import Database
from server.db.tables import LabTest
from server.engine import METHODS, evaluate
from server.services import bench, jobs, review
from server.web.bench import sheet_view
from tests.conftest import PASSWORDS, People
from tests.support.bad_inputs import BAD_ATTERBERG
from tests.support.http import csrf_of, post_form, sign_in
from tests.support.scenario import ATTERBERG, form_fields, small_job

W1 = "water_content.determinations.0.wet_tare_g"


def _stored(db: Database, test_id: int) -> LabTest:
    with db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None
    return test


def _save_fields(client: TestClient, test_id: int, changes: list[dict[str, str]]) -> Response:
    token = csrf_of(client.get(f"/tests/{test_id}"))
    return client.post(f"/tests/{test_id}/fields", json={"changes": changes}, headers={"X-CSRF-Token": token})


def test_every_method_of_the_engine_has_a_bench_page_with_its_title(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    tests = jobs.request_tests(db, people.admin, [job.sample_id], sorted(METHODS))
    sign_in(app_client, "tech", PASSWORDS["tech"])
    for test in tests:
        page = app_client.get(f"/tests/{test.id}")
        assert page.status_code == 200, test.method
        assert f"<h1>{METHODS[test.method].title} " in page.text
        assert 'inputmode="decimal"' in page.text or 'type="radio"' in page.text


def test_number_fields_open_the_numeric_keypad_and_carry_their_unit(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    page = app_client.get(f"/tests/{job.test_id}").text
    wet = re.search(
        r'<input id="in-r-water_content-determinations-0-wet_tare_g"[^>]*>\s*<span class="unit"[^>]*>g<', page
    )
    assert wet and 'inputmode="decimal"' in wet.group(0)
    assert re.search(r'name="r.liquid_limit.trials.0.blows"[^>]*inputmode="numeric"', page)


def test_preview_shows_each_water_content_beside_its_row(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/tests/{job.test_id}"
    reply = post_form(
        app_client, path, f"{path}/preview", form_fields(ATTERBERG), headers={"HX-Request": "true"}
    )
    assert reply.status_code == 200 and "<html" not in reply.text  # a fragment, not a page
    # ASTM D2216 formula on the scenario's masses: trial 1 of the liquid limit is 42.0 % (Das problem set)
    row = re.search(r'id="out-liquid_limit-trials-0" hx-swap-oob="true">(.*?)</div>', reply.text, re.S)
    assert row and re.search(r"Water content</span> <b>42\.0</b> %", row.group(1))
    out = r'id="out-plastic_limit-determinations-1" hx-swap-oob="true">(.*?)</div>'
    row = re.search(out, reply.text, re.S)
    assert row and "<b>21.5</b>" in row.group(1)  # Liu & Evett
    assert re.search(r'id="res-liquid_limit"><dt>Liquid limit LL</dt><dd><b>40 %</b>', reply.text)  # Das: 40
    assert "<svg" in reply.text and "Flow curve" in reply.text
    assert _stored(db, job.test_id).readings is None  # preview stores nothing


def test_a_field_is_saved_as_typed_and_the_page_learns_the_new_version(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    reply = _save_fields(app_client, job.test_id, [{"path": W1, "value": "36,00", "base": ""}])
    assert reply.status_code == 200, reply.text
    body = reply.json()
    # kept as typed, the decimal comma as a point: "36,00" is "36.00" (ISO/IEC 17025:2017 cl. 7.5.1)
    assert body["version"] == 2 and body["stored"] == [W1] and body["values"][W1] == "36.00"
    typed = {"water_content": {"determinations": [{"wet_tare_g": "36.00"}]}}
    assert _stored(db, job.test_id).readings == typed


def test_a_field_changed_on_another_device_answers_409_with_both_values(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    bench.save_changes(db, people.review, job.test_id, [bench.Change(W1, 36.0, base=None)])
    sign_in(app_client, "tech", PASSWORDS["tech"])
    reply = _save_fields(app_client, job.test_id, [{"path": W1, "value": "36.5", "base": ""}])
    assert reply.status_code == 409
    assert reply.json()["conflicts"] == [{"path": W1, "theirs": "36.0", "yours": "36.5"}]
    assert "another device changed this field" in reply.json()["detail"]
    assert _stored(db, job.test_id).version == 2  # nothing overwritten


def test_a_refused_field_answers_422_with_its_message_and_stores_nothing(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    det = "water_content.determinations.0."
    typed = (("tare_g", "10"), ("wet_tare_g", "-3"))
    changes = [{"path": det + k, "value": v, "base": ""} for k, v in typed]
    reply = _save_fields(app_client, job.test_id, changes)
    assert reply.status_code == 422
    refused = reply.json()["errors"]
    assert [e["path"] for e in refused] == [det + "wet_tare_g"]
    assert "below 0 g" in refused[0]["message"]  # a mass is not negative (common practice)
    assert _stored(db, job.test_id).readings is None


def test_a_path_that_is_not_on_the_sheet_is_refused(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    changes = [{"path": "liquid_limit.balance.resolution_g", "value": "0.01", "base": ""}]
    reply = _save_fields(app_client, job.test_id, changes)
    assert reply.status_code == 422 and _stored(db, job.test_id).readings is None


def test_an_instrument_typed_at_the_bench_is_saved_and_flagged_when_past_due(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    changes = [
        {"path": "tested_on", "value": "2026-12-01", "base": ""},
        {"path": "equipment.0.id", "value": "BAL-1", "base": ""},
        {"path": "equipment.0.calibration_due", "value": "2026-11-30", "base": ""},
    ]
    reply = _save_fields(app_client, job.test_id, changes)
    assert reply.status_code == 200, reply.text
    stored = _stored(db, job.test_id)
    assert stored.readings is not None and stored.readings["equipment"] == [
        {"id": "BAL-1", "calibration_due": "2026-11-30"}
    ]
    # due 30 November, used 1 December: past due (common practice: valid up to and including the due date)
    assert "equipment-calibration-expired" in [f["code"] for f in stored.flags or []]


def test_the_hand_in_of_an_autosaved_sheet_submits_the_stored_draft(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    saved = bench.save_readings(db, people.tech, job.test_id, ATTERBERG, 1)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/tests/{job.test_id}"
    fields = [("then", "submit"), ("autosaved", "1"), ("version", str(saved.test.version))]
    reply = post_form(app_client, path, f"{path}/readings", fields, follow_redirects=False)
    assert reply.status_code == 303 and reply.headers["location"] == f"{path}?handed_in=1"
    test = _stored(db, job.test_id)
    assert test.status == "submitted" and test.readings == ATTERBERG
    page = app_client.get(path).text
    assert 'id="read-only"' in page and "readonly" in page and "data-fields" not in page
    locked = _save_fields(app_client, job.test_id, [{"path": "fines", "value": "86", "base": ""}])
    assert locked.status_code == 409 and locked.json()["locked"] is True


def test_a_refused_value_is_named_at_its_field_and_nothing_is_saved(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/tests/{job.test_id}"
    readings, loc, _ = BAD_ATTERBERG["dry mass above wet mass"]
    reply = post_form(app_client, path, f"{path}/readings", [*form_fields(readings), ("version", "1")])
    assert reply.status_code == 422
    field_id = "err-r-" + "-".join(str(p) for p in loc)
    message = rf'id="{field_id}" data-kind="invalid">✖ [^<]*dry mass plus tare \(38\.5 g\) is above'
    assert re.search(message, reply.text)
    assert 'value="38.5"' in reply.text  # what was typed is still on the sheet
    test = _stored(db, job.test_id)
    assert (test.readings, test.version) == (None, 1)


def test_a_second_page_on_the_same_test_gets_a_conflict_message(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/tests/{job.test_id}"
    first = post_form(app_client, path, f"{path}/readings", [*form_fields(ATTERBERG), ("version", "1")])
    assert first.status_code == 200 and "Draft saved" in first.text
    second = post_form(app_client, path, f"{path}/readings", [*form_fields(ATTERBERG), ("version", "1")])
    assert second.status_code == 409 and "changed by someone else" in second.text


def test_the_whole_sheet_save_keeps_readings_the_sheet_does_not_show(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    extra = {**ATTERBERG, "tested_on": "2026-12-01"}
    saved = bench.save_readings(db, people.tech, job.test_id, extra, 1)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/tests/{job.test_id}"
    fields = [*form_fields({"fines": 86}), ("version", str(saved.test.version))]
    reply = post_form(app_client, path, f"{path}/readings", fields)
    assert reply.status_code == 200
    assert _stored(db, job.test_id).readings == {**extra, "fines": "86"}  # typed: kept as its text


def test_the_returned_reason_is_shown_on_the_bench(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    saved = bench.save_readings(db, people.tech, job.test_id, ATTERBERG, 1)
    test = bench.submit(db, people.tech, job.test_id, saved.test.version)
    review.return_test(db, people.review, job.test_id, "Tin L2 tare <re-check>", test.version)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    page = app_client.get(f"/tests/{job.test_id}")
    assert "Tin L2 tare &lt;re-check&gt;" in page.text and "returned" in page.text


# -- the sheet view, without a database ---------------------------------------------------------


def _view(method: str, readings: dict[str, Any]) -> list[Any]:
    return sheet_view(method, readings, evaluate(method, readings))


def _trials(readings: dict[str, Any]) -> Any:
    views = _view("atterberg", readings)
    return next(v for v in views if v.kind == "rows" and v.section.path.endswith("trials"))


def test_sieves_typed_in_any_order_show_their_own_percent_passing() -> None:
    readings = {
        "dry_mass_g": 500.0,
        "sieves": [
            {"size_mm": 0.075, "retained_g": 100.0},
            {"size_mm": 2.0, "retained_g": 50.0},
            {"size_mm": 4.75, "retained_g": 0.0},
            {"size_mm": 0.425, "retained_g": 100.0},
        ],
    }
    rows = next(v for v in _view("sieve", readings) if v.kind == "rows").rows
    shown = [r.outputs[0].text if r.outputs else None for r in rows[:4]]
    # ASTM D6913 cumulative percent passing: 4.75 mm 100 %, 2 mm 90 %, 0.425 mm 70 %, 75 µm 50 %
    assert shown == ["50", "90", "100", "70"]


def test_a_trial_flag_is_shown_beside_its_trial() -> None:
    readings = {**ATTERBERG, "liquid_limit": {**ATTERBERG["liquid_limit"]}}
    trials = [dict(t) for t in ATTERBERG["liquid_limit"]["trials"]]
    trials[0]["blows"] = 12  # ASTM D4318 Method A: 15 to 35 blows; 12 is flagged
    readings["liquid_limit"]["trials"] = trials
    view = _trials(readings)
    assert [f.code for f in view.rows[0].flags] == ["blows-out-of-range"]
    assert view.rows[1].flags == []


def test_the_cone_inputs_of_an_atterberg_set_show_only_once_the_cone_is_chosen() -> None:
    def trial_cells(readings: dict[str, Any]) -> dict[str, bool]:
        view = _trials(readings)
        return {c.input.key: c.hidden for c in view.rows[0].cells}

    nothing = trial_cells({})
    assert nothing["blows"] and nothing["penetration_mm.0"] and not nothing["tare_g"]
    cone = trial_cells({"liquid_limit": {"method": "ll-cone"}})
    assert cone["blows"] and not cone["penetration_mm.0"]
    cup = trial_cells({"liquid_limit": {"method": "ll-cup-one-point"}})
    assert not cup["blows"] and cup["penetration_mm.0"]


# -- S9 point 6: the bench on a tablet ----------------------------------------------------------


def test_every_date_on_a_bench_sheet_opens_the_date_picker(
    app_client: TestClient, db: Database, people: People
) -> None:
    """The test date and each instrument's calibration due date are typed as dates
    (HTML Living Standard, input type=date), on the sheet of every method."""
    job = small_job(db, people.admin)
    tests = jobs.request_tests(db, people.admin, [job.sample_id], sorted(METHODS))
    sign_in(app_client, "tech", PASSWORDS["tech"])
    for test in tests:
        page = app_client.get(f"/tests/{test.id}").text
        dates = re.findall(r'<input id="in-r-[^"]*"\s+name="r\.([^"]+)"[^>]*type="date"', page)
        assert "tested_on" in dates, test.method
        assert any(d.endswith("calibration_due") for d in dates), test.method


def test_a_refused_hand_in_is_said_at_the_hand_in_button(
    app_client: TestClient, db: Database, people: People
) -> None:
    """Pressed at the foot of a long sheet, the refusal must be read there, not only at the top."""
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/tests/{job.test_id}"
    partial = {"water_content": ATTERBERG["water_content"]}  # no liquid or plastic limit yet
    reply = post_form(
        app_client, path, f"{path}/readings", [*form_fields(partial), ("version", "1"), ("then", "submit")]
    )
    assert reply.status_code in (409, 422), reply.text
    at_button = re.search(
        r'<p class="problem hand-in-state" id="hand-in-state" role="alert">([^<]*)</p>', reply.text
    )
    assert at_button and "not handed in" in at_button.group(1), reply.text
    actions = reply.text.index('class="actions bench-actions"')
    assert actions < reply.text.index('id="hand-in-state"') < reply.text.index("</form>", actions)
