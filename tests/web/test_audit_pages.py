"""The audit trail pages: a job's and a sample's events in order, paged, and exported as CSV;
on the pages each event and person by name (server/reports/names.py), the ids in tooltips."""

from __future__ import annotations

import csv
import io
import json
import re

from fastapi.testclient import TestClient

from server.db.session import Database
from server.reports.names import event_name, state_name
from server.services import links, review
from server.services.audit import CSV_COLUMNS
from tests.conftest import PASSWORDS, People
from tests.support.http import sign_in
from tests.workflow.flows import Lab, load, version


def _two_jobs(db: Database, people: People) -> tuple[Lab, int, int, Lab]:
    lab = Lab(db, people.admin, "TR-1")
    returned = lab.submitted(people.tech)
    review.return_test(db, people.review, returned, '=HYPERLINK("http://x")', version(db, returned))
    other_sample_test = lab.submitted(people.tech, "water-content")
    links.create_link(db, people.review, lab.job.id or 0, 14, "designer")
    elsewhere = Lab(db, people.admin, "TR-2")
    elsewhere.submitted(people.tech)
    return lab, returned, other_sample_test, elsewhere


def _csv(reply: object) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(reply.text)))  # type: ignore[attr-defined]


def test_a_jobs_trail_holds_every_event_of_its_records_and_none_of_another_job(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab, returned, _, elsewhere = _two_jobs(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    reply = app_client.get(f"/jobs/{lab.job.id}/trail")
    assert reply.status_code == 200 and reply.template.name == "pages/trail.html"  # type: ignore[attr-defined]
    trail = reply.context["trail"]  # type: ignore[attr-defined]
    kinds = {(e.entity, e.action) for e in trail.events}
    assert {("client", "create"), ("job", "create"), ("location", "create"), ("sample", "create")} <= kinds
    assert {("lab_test", "request"), ("lab_test", "readings"), ("lab_test", "submit")} <= kinds
    assert {("lab_test", "return"), ("share_link", "create")} <= kinds
    ids = [e.id for e in trail.events]
    assert ids == sorted(ids) and trail.total == len(ids)  # in the order written, all on one page
    assert elsewhere.job.code not in reply.text
    assert all(e.entity_id != elsewhere.job.id for e in trail.events if e.entity == "job")
    label = trail.labels[("lab_test", returned)]  # the test's record in words (db/audit_queries.py)
    assert label.endswith("on S1") and label in reply.text


def test_a_samples_trail_holds_the_sample_and_its_tests_only(
    app_client: TestClient, db: Database, people: People
) -> None:
    _lab, returned, other_sample_test, _ = _two_jobs(db, people)
    sign_in(app_client, "admin", PASSWORDS["admin"])
    sample_id = load(db, returned).sample_id
    reply = app_client.get(f"/samples/{sample_id}/trail")
    events = reply.context["trail"].events  # type: ignore[attr-defined]
    assert {(e.entity, e.entity_id) for e in events} == {("sample", sample_id), ("lab_test", returned)}
    assert other_sample_test not in {e.entity_id for e in events if e.entity == "lab_test"}


def test_the_csv_export_has_every_event_with_before_after_and_why(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab, returned, _, _ = _two_jobs(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    page = app_client.get(f"/jobs/{lab.job.id}/trail")
    reply = app_client.get(f"/jobs/{lab.job.id}/trail.csv")
    assert reply.status_code == 200 and reply.headers["content-type"] == "text/csv; charset=utf-8"
    assert reply.headers["content-disposition"] == 'attachment; filename="audit-TR-1.csv"'
    rows = _csv(reply)
    assert tuple(rows[0]) == CSV_COLUMNS
    assert [int(r["event"]) for r in rows] == [e.id for e in page.context["trail"].events]  # type: ignore[attr-defined]
    back = next(r for r in rows if r["action"] == "return")
    assert (back["entity"], int(back["entity_id"]), back["actor"]) == ("lab_test", returned, "review")
    assert json.loads(back["before"]) == {"status": "submitted"}
    assert json.loads(back["after"])["status"] == "returned"
    # A reason that a spreadsheet would run as a formula is exported as text (OWASP, CSV injection).
    assert back["reason"] == '\'=HYPERLINK("http://x")'
    saved = next(r for r in rows if r["action"] == "readings")
    assert (
        json.loads(saved["after"])["readings"]["liquid_limit"]["trials"][0]["blows"] == 15
    )  # scenario (Das)


def test_a_long_trail_is_shown_a_page_at_a_time(app_client: TestClient, db: Database, people: People) -> None:
    lab, _, _, _ = _two_jobs(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    total = app_client.get(f"/jobs/{lab.job.id}/trail").context["trail"].total  # type: ignore[attr-defined]
    later = app_client.get(f"/jobs/{lab.job.id}/trail?offset={total - 2}").context["trail"]  # type: ignore[attr-defined]
    assert len(later.events) == 2 and not later.has_more and later.previous_offset == 0


def test_the_audit_page_shows_the_newest_events_and_leads_to_a_jobs_trail(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab, _, _, elsewhere = _two_jobs(db, people)
    sign_in(app_client, "admin", PASSWORDS["admin"])
    reply = app_client.get("/audit")
    events = reply.context["events"]  # type: ignore[attr-defined]
    assert [e.id for e in events] == sorted((e.id for e in events), reverse=True)
    assert (events[0].entity, events[0].action, events[0].actor) == ("session", "sign-in", "admin")
    assert events[1].entity == "lab_test" and events[1].action == "submit"  # the last thing done before
    jump = app_client.get(f"/audit/job?job_id={lab.job.id}", follow_redirects=False)
    assert jump.status_code == 303 and jump.headers["location"] == f"/jobs/{lab.job.id}/trail"


def test_a_technician_may_not_read_or_export_the_trail(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab, _, _, _ = _two_jobs(db, people)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    for path in ("/audit", f"/jobs/{lab.job.id}/trail", f"/jobs/{lab.job.id}/trail.csv"):
        assert app_client.get(path).status_code == 403, path


def test_audit_rows_name_the_person_the_event_and_the_states_with_the_ids_in_tooltips(
    app_client: TestClient, db: Database, people: People
) -> None:
    lab, returned, _, _ = _two_jobs(db, people)
    sign_in(app_client, "admin", PASSWORDS["admin"])
    for path in (f"/jobs/{lab.job.id}/trail", "/audit"):
        reply = app_client.get(path)
        ctx = reply.context  # type: ignore[attr-defined]
        events = ctx["events"] if path == "/audit" else ctx["trail"].events
        back = next(e for e in events if e.action == "return")
        row = re.search(rf'<tr id="event-{back.id}">.*?</tr>', reply.text, re.S)
        assert row, path
        cells = " ".join(re.sub(r"<[^>]*>", " ", row[0]).split())
        assert (
            people.review.full_name in cells and '<span title="review">' in row[0]
        )  # the username as a tooltip
        assert event_name("lab_test", "return") in cells and 'title="lab_test: return"' in row[0]
        assert state_name("submitted") in cells and state_name("returned") in cells
        who = re.findall(r"<td>(.*?)</td>", row[0], re.S)[1]  # when, who (the number's cell has a class)
        assert re.sub(r"<[^>]*>", "", who) == people.review.full_name  # not "user 3", not "review"
        assert f'title="lab_test {returned}"' in row[0]
    trail = app_client.get(f"/jobs/{lab.job.id}/trail").text
    total = len(re.findall(r'<tr id="event-', trail))
    assert f"Export all {total} events as CSV" in trail  # one plural helper
