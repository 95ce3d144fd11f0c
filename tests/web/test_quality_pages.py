"""The Quality page over HTTP: the register, charts, duplicates, proficiency rounds, the review
desk's extra flags and the quality report PDF (read back with pypdf)."""

from __future__ import annotations

import io

import pytest
from fastapi.testclient import TestClient
from pypdf import PdfReader
from sqlmodel import select

from server.db.session import Database
from server.db.tables import AuditEvent, ReferenceSoil
from server.services import quality_duplicates, quality_proficiency
from server.services.quality_proficiency import RoundForm
from tests.conftest import PASSWORDS, People
from tests.services.test_quality_charts import HISTORY, handed_in, reference_lab
from tests.support.http import post_form, sign_in


def test_a_reviewer_adds_a_reference_soil_and_lands_on_its_page(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = post_form(
        app_client,
        "/quality",
        "/quality/soils",
        {"code": "rs-9", "name": "Brown clay stock", "assigned_values": "atterberg liquid_limit 45,5"},
        follow_redirects=False,
    )
    assert reply.status_code == 303
    page = app_client.get(reply.headers["location"])
    assert page.status_code == 200 and "Reference soil RS-9" in page.text
    with db.session() as s:
        soil = s.exec(select(ReferenceSoil)).one()
    assert soil.assigned_values == {"atterberg": {"liquid_limit": 45.5}}  # decimal comma read as a point


def test_a_bad_soil_entry_comes_back_with_field_errors_and_nothing_stored(
    app_client: TestClient, db: Database
) -> None:
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = post_form(
        app_client,
        "/quality",
        "/quality/soils",
        {"code": "RS-1", "name": "", "assigned_values": "atterberg 45"},
    )
    assert reply.status_code == 422
    assert 'id="err-assigned_values"' in reply.text and "line 1" in reply.text
    reply = post_form(
        app_client, "/quality", "/quality/soils", {"code": "", "name": "", "assigned_values": ""}
    )
    assert reply.status_code == 422
    assert 'id="err-code"' in reply.text and 'id="err-name"' in reply.text
    with db.session() as s:
        assert s.exec(select(ReferenceSoil)).all() == []
        assert s.exec(select(AuditEvent).where(AuditEvent.entity == "reference_soil")).all() == []


def test_a_technician_sees_the_page_but_may_not_change_it(app_client: TestClient, db: Database) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    page = app_client.get("/quality")
    assert page.status_code == 200 and 'action="/quality/soils"' not in page.text
    refused = post_form(app_client, "/quality", "/quality/soils", {"code": "RS-1", "name": "Stock"})
    assert refused.status_code == 403


def test_a_form_without_the_csrf_token_is_refused(app_client: TestClient, db: Database) -> None:
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.post("/quality/soils", data={"code": "RS-1", "name": "Stock"})
    assert reply.status_code == 403
    with db.session() as s:
        assert s.exec(select(ReferenceSoil)).all() == []


def test_the_soil_page_draws_the_chart_with_its_limits_and_lists_the_rule_broken(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab = reference_lab(db, people)
    for w in HISTORY:
        handed_in(db, lab, people.tech, w)
    handed_in(db, lab, people.review2, 33.0)  # beyond 30 + 3 x 0.8165 (tests/quality/test_control_chart.py)
    sign_in(app_client, "review", PASSWORDS["review"])
    page = app_client.get(f"/quality/soils/{lab.soil_id}?chart=water-content:water_content")
    assert page.status_code == 200
    assert "<svg" in page.text and "±3σ action" in page.text and "±2σ warning" in page.text
    assert "beyond the action limit" in page.text
    assert page.context["chart"].current.n == 10  # type: ignore[attr-defined]  # the 33.0 stays out
    own = app_client.get(
        f"/quality/soils/{lab.soil_id}?chart=water-content:water_content&technician={people.tech.id}"
    )
    assert [p.value for p in own.context["chart"].points] == pytest.approx(HISTORY)  # type: ignore[attr-defined]
    assert "No rule broken." in own.text


def test_a_sample_is_linked_by_job_number_and_sample_code(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab = reference_lab(db, people)
    handed_in(db, lab, people.tech, 30.0, reference=False)  # sample P1 of job QC-2026, not linked
    sign_in(app_client, "review", PASSWORDS["review"])
    page = f"/quality/soils/{lab.soil_id}"
    wrong = post_form(app_client, page, f"{page}/samples", {"job_code": "QC-2026", "sample_code": "P9"})
    assert wrong.status_code == 422 and 'id="err-sample_code"' in wrong.text
    done = post_form(
        app_client,
        page,
        f"{page}/samples",
        {"job_code": "qc-2026", "sample_code": "P1"},
        follow_redirects=False,
    )
    assert done.status_code == 303
    assert "P1" in app_client.get(page).text


def test_marking_a_duplicate_of_another_sample_is_refused_on_its_field(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab = reference_lab(db, people)
    first = handed_in(db, lab, people.tech, 30.0)
    second = handed_in(db, lab, people.tech, 30.4)  # another portion: another sample
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = post_form(
        app_client, "/quality", "/quality/duplicates", {"test_id": str(second), "duplicate_of": str(first)}
    )
    assert reply.status_code == 422
    assert 'id="err-duplicate_of"' in reply.text and "another sample" in reply.text
    typed = post_form(app_client, "/quality", "/quality/duplicates", {"test_id": "x", "duplicate_of": ""})
    assert typed.status_code == 422 and 'id="err-test_id"' in typed.text
    assert quality_duplicates.pairs(db) == []


def test_a_proficiency_round_is_entered_and_shown_with_z_and_verdict(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "review", PASSWORDS["review"])
    fields = {
        "scheme": "Regional soils scheme",
        "round_code": "R-7",
        "method": "atterberg",
        "result_key": "plastic_limit",
        "assigned_value": "21.0",
        "sigma_pt": "1.2",
        "round_date": "2026-10-01",
        "result": "24.0",
    }
    bad = post_form(app_client, "/quality", "/quality/rounds", {**fields, "sigma_pt": "0", "result": ""})
    assert bad.status_code == 422 and 'id="err-sigma_pt"' in bad.text and 'id="err-result"' in bad.text
    reply = post_form(app_client, "/quality", "/quality/rounds", fields, follow_redirects=False)
    assert reply.status_code == 303
    page = app_client.get("/quality")
    # z = (24.0 - 21.0) / 1.2 = 2.50 -> questionable (ISO 13528:2015 cl. 9.4.1, from memory)
    assert "2.50" in page.text and "questionable" in page.text
    (entry,) = quality_proficiency.rounds(db)
    edit = app_client.get(f"/quality/rounds/{entry.entry.id}")
    assert edit.status_code == 200 and 'value="R-7"' in edit.text
    path = f"/quality/rounds/{entry.entry.id}"
    changed = post_form(app_client, path, path, {**fields, "result": "21.6", "reason": "typing slip"})
    assert changed.status_code == 200  # followed to the Quality page
    (entry,) = quality_proficiency.rounds(db)
    assert (entry.z, entry.verdict) == (
        pytest.approx(0.5),
        "satisfactory",
    )  # (21.6 - 21.0) / 1.2, hand-worked


def test_the_review_page_loads_the_reference_soil_flags_of_that_day(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab = reference_lab(db, people)
    for w in [*HISTORY, 33.0]:
        handed_in(db, lab, people.tech, w)
    ordinary = handed_in(db, lab, people.tech, 22.0, reference=False)
    sign_in(app_client, "review", PASSWORDS["review"])
    review_page = app_client.get(f"/review/{ordinary}")
    assert f'hx-get="/quality/tests/{ordinary}/flags"' in review_page.text
    fragment = app_client.get(f"/quality/tests/{ordinary}/flags", headers={"HX-Request": "true"})
    assert fragment.status_code == 200 and "<html" not in fragment.text
    assert "reference-soil-out-of-control" in fragment.text and "RS-1" in fragment.text


def test_the_quality_report_pdf_carries_the_charts_and_tables(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab = reference_lab(db, people)
    for w in [*HISTORY, 33.0]:
        handed_in(db, lab, people.tech, w)
    quality_proficiency.add_round(
        db,
        people.review,
        RoundForm(
            "Regional soils scheme",
            "R-7",
            "water-content",
            "water_content",
            "30.0",
            "1.5",
            "2026-10-01",
            "33.0",
        ),
    )
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.get("/quality/report.pdf")
    assert reply.status_code == 200 and reply.headers["content-type"] == "application/pdf"
    pages = PdfReader(io.BytesIO(reply.content)).pages
    text = " ".join(" ".join(page.extract_text().split()) for page in pages)  # lines joined
    assert "Quality control report" in text and "RS-1" in text
    assert "beyond the action limit" in text
    # z = (33.0 - 30.0) / 1.5 = 2.00 -> satisfactory (|z| <= 2, ISO 13528:2015 cl. 9.4.1, from memory)
    assert "R-7" in text and "2.00" in text and "satisfactory" in text
    tech = TestClient(app_client.app, base_url="http://testserver")
    sign_in(tech, "tech", PASSWORDS["tech"])
    assert tech.get("/quality/report.pdf").status_code == 403
