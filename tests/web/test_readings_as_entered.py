"""Original observations are kept as entered (S7 point 1): "44.20" typed at the bench is "44.20"
on the bench after a reload, on the review page, in the audit trail, in the issued report's
"readings as entered" and in the bench's JSON answers, while the engine computes with the number.

Source of the rule: ISO/IEC 17025:2017 cl. 7.5.1 (original observations are recorded at the
time they are made; every digit read off the balance is part of the record). Check values are
computed with the ASTM D2216-19 formula w = (wet - dry) / (dry - tare) x 100.
"""

from __future__ import annotations

import copy
import csv
import io
import json
import re
from io import BytesIO
from typing import Any

from fastapi.testclient import TestClient
from pypdf import PdfReader

from server.db.session import Database
from server.db.tables import LabTest
from server.engine import evaluate
from server.engine.readings import as_entered
from server.services import bench, reports, review
from tests.conftest import PASSWORDS, People
from tests.support.http import csrf_of, post_form, sign_in
from tests.support.records import audit_events
from tests.support.scenario import ATTERBERG, form_fields, small_job

BASE = "http://testserver"
WET = "water_content.determinations.0.wet_tare_g"
# The natural water content as the technician types it: every mass to 0.01 g, trailing zeros
# included. ASTM D2216-19: (44.20 - 36.20) / (36.20 - 10.00) x 100 = 30.534 % (computed).
TYPED_NATURAL = {"container": "N1", "tare_g": "10.00", "wet_tare_g": "44.20", "dry_tare_g": "36.20"}
W_NATURAL = (44.20 - 36.20) / (36.20 - 10.00) * 100  # computed


def _typed_atterberg() -> dict[str, Any]:
    readings = copy.deepcopy(ATTERBERG)
    readings["water_content"]["determinations"] = [dict(TYPED_NATURAL)]
    return readings


def _stored(db: Database, test_id: int) -> LabTest:
    with db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None
    return test


def _hand_in_typed_sheet(client: TestClient, test_id: int) -> None:
    """The technician types the whole sheet (no script) and hands it in."""
    path = f"/tests/{test_id}"
    fields = [*form_fields(_typed_atterberg()), ("version", "1"), ("then", "submit")]
    reply = post_form(client, path, f"{path}/readings", fields, follow_redirects=False)
    assert reply.status_code == 303, reply.text


def test_a_number_typed_with_a_trailing_zero_is_stored_and_shown_again_as_typed(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    path = f"/tests/{job.test_id}"
    fields = [*form_fields({"water_content": {"determinations": [TYPED_NATURAL]}}), ("version", "1")]
    assert post_form(app_client, path, f"{path}/readings", fields).status_code == 200
    stored = _stored(db, job.test_id)
    assert stored.readings == {"water_content": {"determinations": [TYPED_NATURAL]}}
    page = app_client.get(path).text  # the bench after a reload
    assert re.search(r'name="r\.water_content\.determinations\.0\.wet_tare_g" value="44\.20"', page)
    assert re.search(r'name="r\.water_content\.determinations\.0\.tare_g" value="10\.00"', page)
    stored_values = re.search(
        r'<script type="application/json" id="stored-values">(.*?)</script>', page, re.S
    )
    assert stored_values and json.loads(stored_values.group(1))[WET] == "44.20"
    # the engine computes with the number: ASTM D2216-19 formula on the typed masses (computed)
    assert stored.results is not None
    assert abs(stored.results["water_content_determinations"][0] - W_NATURAL) < 1e-9


def test_a_field_typed_with_a_decimal_comma_keeps_its_digits_in_the_benchs_json_answer(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    token = csrf_of(app_client.get(f"/tests/{job.test_id}"))
    reply = app_client.post(
        f"/tests/{job.test_id}/fields",
        json={"changes": [{"path": WET, "value": "44,20", "base": ""}]},
        headers={"X-CSRF-Token": token},
    )
    assert reply.status_code == 200, reply.text
    # a decimal comma is a point, every digit kept (common practice: tablet keypads give either)
    assert reply.json()["values"][WET] == "44.20"
    again = app_client.post(  # the same text again, against what the page saw: no change, no conflict
        f"/tests/{job.test_id}/fields",
        json={"changes": [{"path": WET, "value": "44.20", "base": "44.20"}]},
        headers={"X-CSRF-Token": token},
    )
    assert again.status_code == 200 and again.json()["stored"] == []


def test_the_audit_event_keeps_the_reading_as_typed(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    _hand_in_typed_sheet(app_client, job.test_id)
    (event,) = audit_events(db, "lab_test", job.test_id, "readings")
    assert event.after is not None
    assert event.after["readings"]["water_content"]["determinations"][0]["wet_tare_g"] == "44.20"
    sign_in(app_client, "review", PASSWORDS["review"])
    trail = app_client.get(f"/jobs/{job.job_id}/trail.csv")  # the audit trail's CSV export
    assert trail.status_code == 200
    rows = [r for r in csv.DictReader(io.StringIO(trail.text)) if r["action"] == "readings"]
    after = json.loads(rows[0]["after"])
    assert after["readings"]["water_content"]["determinations"][0]["wet_tare_g"] == "44.20"


def test_the_review_page_shows_the_readings_as_typed(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    _hand_in_typed_sheet(app_client, job.test_id)
    sign_in(app_client, "review", PASSWORDS["review"])
    page = app_client.get(f"/review/{job.test_id}")
    assert page.status_code == 200
    raw = page.text[page.text.index('id="raw-readings"') :]
    assert '<td class="mono">44.20</td>' in raw and '<td class="mono">10.00</td>' in raw
    tables = {t.title: t for t in page.context["report"].readings}  # type: ignore[attr-defined]
    natural = tables["Water content — determinations"]  # the table the PDF prints
    assert natural.rows[0][natural.columns.index("Wet soil + tare (g)")] == "44.20"


def test_the_issued_report_prints_the_readings_as_entered(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    _hand_in_typed_sheet(app_client, job.test_id)
    review.approve(db, people.review, job.test_id, PASSWORDS["review"], _stored(db, job.test_id).version)
    report = reports.issue_report(db, people.review, job.job_id, BASE, password=PASSWORDS["review"])
    text = " ".join(" ".join((p.extract_text() or "").split()) for p in PdfReader(BytesIO(report.pdf)).pages)
    entered = text[text.index("Readings as entered") :]
    # the natural water content's row: tin N1, tare, wet, dry as typed, then its water content
    assert re.search(r"N1 10\.00 44\.20 36\.20 30\.5", entered), entered[:400]


def test_a_reading_stored_as_a_json_number_is_kept_and_shown_by_its_value(
    app_client: TestClient, db: Database, people: People
) -> None:
    """Readings stored before readings kept their text (and an API client's JSON numbers) stay
    as they are: no migration, no change of value; they show by the shortest text of the number."""
    job = small_job(db, people.admin)
    legacy = {"water_content": {"determinations": [{"tare_g": 10.0, "wet_tare_g": 44.2, "dry_tare_g": 36.2}]}}
    bench.save_readings(db, people.tech, job.test_id, legacy, 1)
    assert _stored(db, job.test_id).readings == legacy  # numbers stay numbers
    sign_in(app_client, "tech", PASSWORDS["tech"])
    page = app_client.get(f"/tests/{job.test_id}").text
    assert re.search(r'name="r\.water_content\.determinations\.0\.wet_tare_g" value="44\.2"', page)
    assert as_entered(44.2) == "44.2" and as_entered(10.0) == "10.0" and as_entered("44.20") == "44.20"


def test_the_calculation_api_takes_decimal_text_and_json_numbers_alike(app_client: TestClient) -> None:
    """A client keeps trailing zeros by sending decimal strings; numbers are accepted as well."""
    as_text = {"determinations": [TYPED_NATURAL]}
    as_numbers = {"determinations": [{"tare_g": 10.00, "wet_tare_g": 44.20, "dry_tare_g": 36.20}]}
    answers = [
        app_client.post("/api/v1/calculations", json={"method": "water-content", "readings": r})
        for r in (as_text, as_numbers)
    ]
    assert [a.status_code for a in answers] == [200, 200]
    results = [a.json()["results"]["water_content"] for a in answers]
    assert abs(results[0] - W_NATURAL) < 1e-9 and results[0] == results[1]  # computed
    assert evaluate("water-content", as_text).results == evaluate("water-content", as_numbers).results
