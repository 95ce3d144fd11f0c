"""The bench page over HTTP: live results as typed, refusals at the field, nothing half-stored."""

from __future__ import annotations

import re

from fastapi.testclient import TestClient

from server.db.session import Database
from server.db.tables import LabTest
from tests.conftest import PASSWORDS, People
from tests.support.bad_inputs import BAD_ATTERBERG
from tests.support.http import post_form, sign_in
from tests.support.scenario import ATTERBERG, form_fields, small_job


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
    assert re.search(r'id="out-liquid_limit-trials-0" hx-swap-oob="true">42\.0<', reply.text)
    assert re.search(
        r'id="out-plastic_limit-determinations-1" hx-swap-oob="true">21\.5<', reply.text
    )  # Liu & Evett
    with db.session() as s:
        assert s.get(LabTest, job.test_id).readings is None  # type: ignore[union-attr]  # preview stores nothing


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
    assert re.search(rf'id="{field_id}">[^<]*dry mass plus tare \(38\.5 g\) is above', reply.text)
    assert 'value="38.5"' in reply.text  # what was typed is still on the sheet
    with db.session() as s:
        test = s.get(LabTest, job.test_id)
    assert test is not None and (test.readings, test.version) == (None, 1)


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


def test_the_returned_reason_is_shown_on_the_bench(
    app_client: TestClient, db: Database, people: People
) -> None:
    from server.services import bench, review

    job = small_job(db, people.admin)
    saved = bench.save_readings(db, people.tech, job.test_id, ATTERBERG, 1)
    test = bench.submit(db, people.tech, job.test_id, saved.test.version)
    review.return_test(db, people.review, job.test_id, "Tin L2 tare <re-check>", test.version)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    page = app_client.get(f"/tests/{job.test_id}")
    assert "Tin L2 tare &lt;re-check&gt;" in page.text and "returned" in page.text
