"""The JSON API v1 routes (DESIGN.md section 7): the same services and the same role rules as
the pages, one error format (RFC 9457 problem details), cursor pages, filters and rate limits.

Who may do what on the pages (server/web): registration (clients, jobs, locations, samples) and
import are for reviewers and admins (intake.py, imports.py: ``require_roles("reviewer",
"admin")``); the review desk too (review.py); the job pages, the bench and report downloads are
for anyone signed in (job_page.py, bench.py, client.py).
"""

from __future__ import annotations

import base64
import hashlib
from collections.abc import Iterator
from dataclasses import dataclass
from datetime import timedelta
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlmodel import select

from server.config import Settings
from server.db.session import Database
from server.db.tables import Job, LabTest, ReportAgs4, Sample, utcnow
from server.exchange import downloads, results_sheet
from server.main import create_app
from server.services import jobs, reports, samples, tokens
from tests.conftest import PASSWORDS, People
from tests.services.test_imports import CREATED, NONE, ROWS, csv_bytes
from tests.support.http import sign_in
from tests.support.records import INTAKE_TABLES, audit_events, row_counts
from tests.support.scenario import NATURAL, small_job

PROBLEM = "application/problem+json"  # RFC 9457 section 3
ROLES = ("tech", "review", "admin")


@dataclass
class Api:
    """A test client with one write token per person and a read token for the admin."""

    client: TestClient
    db: Database
    people: People
    job_id: int
    sample_id: int
    test_id: int
    tokens: dict[str, str]

    def call(self, who: str, method: str, path: str, **kwargs: Any) -> Any:
        headers = {"Authorization": f"Bearer {self.tokens[who]}"}  # RFC 6750 section 2.1
        return self.client.request(method, path, headers=headers, **kwargs)


def _tokens(db: Database, people: People) -> dict[str, str]:
    made = {
        name: tokens.create_token(
            db, getattr(people, name), getattr(people, name), "tests", "write", 7
        ).plaintext
        for name in ROLES
    }
    made["reader"] = tokens.create_token(db, people.admin, people.admin, "read only", "read", 7).plaintext
    return made


@pytest.fixture
def api(app_client: TestClient, db: Database, people: People) -> Api:
    job = small_job(db, people.admin, method="water-content")
    return Api(app_client, db, people, job.job_id, job.sample_id, job.test_id, _tokens(db, people))


def problem_of(reply: Any, status: int) -> dict[str, Any]:
    """The reply's problem details, checked for the members RFC 9457 section 3.1 defines."""
    assert reply.status_code == status, reply.text
    assert reply.headers["content-type"].startswith(PROBLEM), reply.headers["content-type"]
    body: dict[str, Any] = reply.json()
    assert body["status"] == status and isinstance(body["title"], str) and isinstance(body["detail"], str)
    assert body["type"] == "about:blank"  # RFC 9457 section 4.2.1
    return body


def version_of(api: Api, test_id: int) -> int:
    with api.db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None
    return test.version


# --- authentication (RFC 6750) ------------------------------------------------------------------


def test_a_request_without_a_token_gets_the_bearer_challenge(api: Api) -> None:
    body = problem_of(api.client.get("/api/v1/jobs"), 401)
    # RFC 6750 section 3 and 3.1: the challenge, and no error code when no token was sent
    reply = api.client.get("/api/v1/jobs")
    assert reply.headers["www-authenticate"] == 'Bearer realm="claybench"'
    assert "token" in body["detail"]


def test_an_unknown_token_is_an_invalid_token(api: Api) -> None:
    reply = api.client.get("/api/v1/jobs", headers={"Authorization": "Bearer not-a-real-token"})
    problem_of(reply, 401)
    assert 'error="invalid_token"' in reply.headers["www-authenticate"]  # RFC 6750 section 3.1


def test_the_session_cookie_is_not_accepted(api: Api) -> None:
    sign_in(api.client, "admin", PASSWORDS["admin"])
    assert api.client.get("/jobs").status_code == 200  # the pages know the person
    problem_of(api.client.get("/api/v1/jobs"), 401)  # tokens only: no CSRF-able credential (the brief)
    problem_of(api.client.post("/api/v1/jobs", json={"client_id": 1, "code": "X-1"}), 401)


def test_me_names_the_tokens_user_and_scope(api: Api) -> None:
    me = api.call("tech", "GET", "/api/v1/me").json()
    assert (me["username"], me["role"], me["token"]["scope"]) == ("tech", "technician", "write")


# --- jobs in ----------------------------------------------------------------------------------------


def _client_id(api: Api) -> int:
    with api.db.session() as s:
        job = s.get(Job, api.job_id)
    assert job is not None
    return job.client_id


def test_a_reviewer_registers_a_job(api: Api) -> None:
    body = {"client_id": _client_id(api), "code": "T-200", "title": "Second job", "due_date": "2026-12-20"}
    reply = api.call("review", "POST", "/api/v1/jobs", json=body)
    assert reply.status_code == 201, reply.text
    job = reply.json()
    assert (job["code"], job["title"], job["due_date"], job["status"]) == (
        "T-200",
        "Second job",
        "2026-12-20",
        "open",
    )
    assert api.call("tech", "GET", f"/api/v1/jobs/{job['id']}").json() == job  # anyone reads it


def test_a_technicians_token_cannot_register_a_job(api: Api) -> None:
    before = row_counts(api.db, INTAKE_TABLES)
    body = problem_of(
        api.call("tech", "POST", "/api/v1/jobs", json={"client_id": _client_id(api), "code": "T-9"}), 403
    )
    assert "reviewer or admin" in body["detail"]  # the page's rule: require_roles("reviewer", "admin")
    assert row_counts(api.db, INTAKE_TABLES) == before


def test_a_read_token_is_refused_on_a_write(api: Api) -> None:
    reply = api.call("reader", "POST", "/api/v1/jobs", json={"client_id": _client_id(api), "code": "T-9"})
    problem_of(reply, 403)
    # RFC 6750 section 3.1: insufficient_scope, naming the scope needed
    assert 'error="insufficient_scope"' in reply.headers["www-authenticate"]
    assert 'scope="write"' in reply.headers["www-authenticate"]


def test_refused_job_fields_are_listed_in_errors(api: Api) -> None:
    reply = api.call(
        "admin", "POST", "/api/v1/jobs", json={"client_id": 99999, "code": "  ", "due_date": "2026-01-01"}
    )
    body = problem_of(reply, 422)
    locs = {tuple(e["loc"]) for e in body["errors"]}
    assert ("code",) in locs  # the service's field name, as the page shows it beside the field
    assert all(set(e) >= {"loc", "msg", "type"} for e in body["errors"])  # the brief: loc, msg, type


def test_a_request_that_does_not_validate_is_a_problem_with_field_errors(api: Api) -> None:
    body = problem_of(api.call("admin", "POST", "/api/v1/jobs", json={"code": "T-9"}), 422)
    assert ["body", "client_id"] in [e["loc"] for e in body["errors"]]  # FastAPI's own locations
    body = problem_of(
        api.client.post(
            "/api/v1/jobs",
            content=b"{not json",
            headers={"Authorization": f"Bearer {api.tokens['admin']}", "Content-Type": "application/json"},
        ),
        422,
    )
    assert body["errors"][0]["type"] == "json_invalid"


def test_an_unknown_record_and_an_unknown_path_are_problems(api: Api) -> None:
    assert "999" in problem_of(api.call("tech", "GET", "/api/v1/jobs/999"), 404)["detail"]
    problem_of(api.call("tech", "GET", "/api/v1/no-such-thing"), 404)
    problem_of(api.call("tech", "DELETE", "/api/v1/jobs"), 405)


def test_locations_and_samples_are_added_and_listed(api: Api) -> None:
    loc = api.call(
        "review", "POST", f"/api/v1/jobs/{api.job_id}/locations", json={"code": "TP2", "kind": "trial pit"}
    )
    assert loc.status_code == 201, loc.text
    body = {
        "location_id": loc.json()["id"],
        "code": "TP2-B1",
        "depth_from_m": 0.5,
        "sample_type": "bulk",
        "methods": ["water-content", "atterberg"],
    }
    made = api.call("review", "POST", f"/api/v1/jobs/{api.job_id}/samples", json=body)
    assert made.status_code == 201, made.text
    sample = made.json()
    assert (sample["location"], sample["depth_to_m"]) == ("TP2", 0.5)  # blank base: the top (service rule)
    assert sorted(t["method"] for t in sample["tests"]) == ["atterberg", "water-content"]
    listed = api.call("tech", "GET", f"/api/v1/jobs/{api.job_id}/samples").json()
    assert [s["code"] for s in listed["items"]] == ["BH1-S1", "TP2-B1"] and listed["next"] is None
    codes = [
        x["code"] for x in api.call("tech", "GET", f"/api/v1/jobs/{api.job_id}/locations").json()["items"]
    ]
    assert codes == ["BH1", "TP2"]


def test_a_sample_at_another_jobs_location_is_refused(api: Api) -> None:
    other = jobs.create_job(api.db, api.people.admin, _client_id(api), "T-300")
    elsewhere = samples.add_location(api.db, api.people.admin, other.id or 0, "BH9")
    body = {"location_id": elsewhere.id, "code": "X1", "depth_from_m": 1.0}
    problem = problem_of(api.call("admin", "POST", f"/api/v1/jobs/{api.job_id}/samples", json=body), 422)
    assert [e["loc"] for e in problem["errors"]] == [["location_id"]]


def test_a_sample_with_bad_depths_is_refused_field_by_field(api: Api) -> None:
    with api.db.session() as s:
        sample = s.get(Sample, api.sample_id)
    assert sample is not None
    body = {"location_id": sample.location_id, "code": "BH1-S9", "depth_from_m": 3.0, "depth_to_m": 2.0}
    problem = problem_of(api.call("admin", "POST", f"/api/v1/jobs/{api.job_id}/samples", json=body), 422)
    assert [e["loc"] for e in problem["errors"]] == [["depth_to_m"]]  # base above top (services.samples)


def test_a_schedule_is_imported_after_a_dry_run(api: Api) -> None:
    path = f"/api/v1/jobs/{api.job_id}/imports"
    files = {"file": ("schedule.csv", csv_bytes(ROWS), "text/csv")}
    before = row_counts(api.db, INTAKE_TABLES)
    dry = api.call("review", "POST", path, params={"dry_run": "true"}, files=files)
    assert dry.status_code == 200, dry.text
    # DESIGN.md section 7: the outcome's keys; counts computed from ROWS (tests/services/test_imports.py)
    assert dry.json() == {
        "job": "T-100",
        "dry_run": True,
        "created": CREATED,
        "updated": NONE,
        "unchanged": NONE,
    }
    assert row_counts(api.db, INTAKE_TABLES) == before
    done = api.call("review", "POST", path, files=files)
    assert done.status_code == 200 and done.json()["created"] == CREATED


def test_a_refused_schedule_names_each_cell_and_stores_nothing(api: Api) -> None:
    rows = [list(r) for r in ROWS]
    rows[0][6] = "deep"  # the top depth of the first sample: not a number
    before = row_counts(api.db, INTAKE_TABLES)
    files = {"file": ("schedule.csv", csv_bytes(rows), "text/csv")}
    problem = problem_of(api.call("admin", "POST", f"/api/v1/jobs/{api.job_id}/imports", files=files), 422)
    (cell,) = problem["errors"]
    assert cell["row"] == 2  # DESIGN.md section 7: the row a spreadsheet shows, the header is row 1
    assert cell["loc"][:2] == ["file", 2] and {"column", "message", "msg", "type"} <= set(cell)
    assert row_counts(api.db, INTAKE_TABLES) == before


def test_a_technician_cannot_import(api: Api) -> None:
    files = {"file": ("schedule.csv", csv_bytes(ROWS), "text/csv")}
    problem_of(api.call("tech", "POST", f"/api/v1/jobs/{api.job_id}/imports", files=files), 403)


# --- tests: readings, submit, approve -----------------------------------------------------------

WATER = {"determinations": NATURAL}  # w = (36.00 - 30.00) / (30.00 - 10.00) = 30.0 % (ASTM D2216 cl. 12.1)


def test_readings_are_saved_under_the_version_guard(api: Api) -> None:
    path = f"/api/v1/tests/{api.test_id}/readings"
    saved = api.call("tech", "PUT", path, json={"version": 1, "readings": WATER})
    assert saved.status_code == 200, saved.text
    body = saved.json()
    assert (body["status"], body["version"], body["changed"]) == ("draft", 2, True)
    assert body["results"]["water_content"] == pytest.approx(30.0)  # ASTM D2216 cl. 12.1
    stale = problem_of(
        api.call("review", "PUT", path, json={"version": 1, "readings": {"determinations": []}}), 409
    )
    assert "changed" in stale["detail"]
    stored = api.call("tech", "GET", f"/api/v1/tests/{api.test_id}").json()
    assert stored["readings"] == WATER  # not overwritten
    (event,) = audit_events(api.db, "lab_test", api.test_id, "readings")
    assert event.actor == "tech" and event.after is not None  # audited by the bench's own service
    assert event.after["readings"] == WATER


def test_readings_refused_by_the_engine_are_field_errors(api: Api) -> None:
    wrong = {"determinations": [{"container": "N1", "tare_g": 10.0, "wet_tare_g": 30.0, "dry_tare_g": 36.0}]}
    body = problem_of(
        api.call(
            "tech", "PUT", f"/api/v1/tests/{api.test_id}/readings", json={"version": 1, "readings": wrong}
        ),
        422,
    )
    # the bench's own refusal (a dry mass above the wet mass), at the field's JSON path
    assert any(e["loc"][:2] == ["readings", "determinations"] for e in body["errors"])
    assert version_of(api, api.test_id) == 1  # nothing stored


def test_a_draft_with_a_value_missing_says_so(api: Api) -> None:
    partial = {"determinations": [{"container": "N1", "tare_g": 10.0, "wet_tare_g": 36.0}]}
    body = api.call(
        "tech", "PUT", f"/api/v1/tests/{api.test_id}/readings", json={"version": 1, "readings": partial}
    ).json()
    assert [m["type"] for m in body["missing"]] == ["missing"]  # a draft may wait for the dry mass


def _submitted(api: Api) -> int:
    saved = api.call(
        "tech", "PUT", f"/api/v1/tests/{api.test_id}/readings", json={"version": 1, "readings": WATER}
    )
    reply = api.call(
        "tech", "POST", f"/api/v1/tests/{api.test_id}/submit", json={"version": saved.json()["version"]}
    )
    assert reply.status_code == 200, reply.text
    assert reply.json()["status"] == "submitted"
    return int(reply.json()["version"])


def test_a_technician_submits_and_a_reviewer_approves(api: Api) -> None:
    version = _submitted(api)
    refused = api.call(
        "tech",
        "POST",
        f"/api/v1/tests/{api.test_id}/approve",
        json={"version": version, "password": PASSWORDS["tech"]},
    )
    problem_of(refused, 403)  # the review desk is for reviewers and admins (web/review.py)
    approved = api.call(
        "review",
        "POST",
        f"/api/v1/tests/{api.test_id}/approve",
        json={"version": version, "password": PASSWORDS["review"]},
    )
    assert approved.status_code == 200, approved.text
    assert (approved.json()["status"], approved.json()["approver_role"]) == ("approved", "reviewer")


def test_approving_needs_the_signers_password(api: Api) -> None:
    version = _submitted(api)
    body = problem_of(
        api.call(
            "review",
            "POST",
            f"/api/v1/tests/{api.test_id}/approve",
            json={"version": version, "password": "wrong"},
        ),
        422,
    )
    assert [e["loc"] for e in body["errors"]] == [["password"]]


def test_nobody_approves_a_test_they_entered(api: Api) -> None:
    saved = api.call(
        "review", "PUT", f"/api/v1/tests/{api.test_id}/readings", json={"version": 1, "readings": WATER}
    ).json()
    version = api.call(
        "review", "POST", f"/api/v1/tests/{api.test_id}/submit", json={"version": saved["version"]}
    ).json()["version"]
    reply = api.call(
        "review",
        "POST",
        f"/api/v1/tests/{api.test_id}/approve",
        json={"version": version, "password": PASSWORDS["review"]},
    )
    body = problem_of(reply, 403)  # DESIGN.md section 4: the service's Forbidden (segregation of duties)
    assert "another reviewer" in body["detail"]


def test_a_reviewer_returns_a_test_with_a_reason(api: Api) -> None:
    version = _submitted(api)
    reply = api.call(
        "review",
        "POST",
        f"/api/v1/tests/{api.test_id}/return",
        json={"version": version, "reason": "Tin N1 looks mistyped, please weigh it again"},
    )
    assert reply.status_code == 200 and reply.json()["status"] == "returned"


def test_submitting_a_test_twice_is_a_conflict(api: Api) -> None:
    version = _submitted(api)
    problem_of(
        api.call("tech", "POST", f"/api/v1/tests/{api.test_id}/submit", json={"version": version}), 409
    )


# --- lists: cursor pages and filters ------------------------------------------------------------


def _walk(api: Api, path: str, limit: int, **params: Any) -> list[dict[str, Any]]:
    seen: list[dict[str, Any]] = []
    cursor: str | None = None
    for _ in range(100):
        query = {**params, "limit": limit, **({"cursor": cursor} if cursor else {})}
        page = api.call("tech", "GET", path, params=query)
        assert page.status_code == 200, page.text
        body = page.json()
        assert set(body) == {"items", "next"}  # DESIGN.md section 7
        assert len(body["items"]) <= limit
        seen += body["items"]
        cursor = body["next"]
        if cursor is None:
            return seen
    raise AssertionError("the walk did not end")


def test_walking_the_jobs_sees_each_exactly_once(api: Api) -> None:
    client_id = _client_id(api)
    for n in range(7):
        jobs.create_job(api.db, api.people.admin, client_id, f"P-{n}")
    seen = _walk(api, "/api/v1/jobs", 3)
    assert sorted(j["code"] for j in seen) == sorted(["T-100", *(f"P-{n}" for n in range(7))])
    assert len({j["id"] for j in seen}) == len(seen) == 8


def test_walking_the_tests_sees_each_exactly_once(api: Api) -> None:
    jobs.request_tests(api.db, api.people.admin, [api.sample_id], ["atterberg", "plastic-limit", "ll-cone"])
    seen = _walk(api, f"/api/v1/jobs/{api.job_id}/tests", 2)
    assert len({t["id"] for t in seen}) == len(seen) == 4


def test_a_cursor_the_api_did_not_give_is_refused(api: Api) -> None:
    body = problem_of(api.call("tech", "GET", "/api/v1/jobs", params={"cursor": "%%%"}), 422)
    assert body["errors"][0]["loc"] == ["query", "cursor"]


def test_a_limit_above_200_is_read_as_200(api: Api) -> None:
    client_id = _client_id(api)
    with api.db.transaction() as s:
        for n in range(201):
            s.add(Job(code=f"B-{n:03d}", title="bulk", client_id=client_id))
    body = api.call("tech", "GET", "/api/v1/jobs", params={"limit": 1000}).json()
    assert len(body["items"]) == 200 and body["next"] is not None  # the brief: limit capped at 200


def test_jobs_are_filtered_by_status_client_and_change(api: Api) -> None:
    other_client = jobs.create_client(api.db, api.people.admin, "Other Client Ltd")
    yesterday = (utcnow() - timedelta(days=1)).date()
    late = jobs.create_job(
        api.db,
        api.people.admin,
        other_client.id or 0,
        "L-1",
        received_on=yesterday - timedelta(days=5),
        due_date=yesterday,
    )

    def codes(**params: Any) -> list[str]:
        return [j["code"] for j in api.call("tech", "GET", "/api/v1/jobs", params=params).json()["items"]]

    # server/db/job_list.py: overdue is open and past its due date; open includes overdue
    assert codes(status="overdue") == ["L-1"]
    assert codes(status="open") == ["T-100", "L-1"]
    assert codes(status="reported") == []
    assert codes(client_id=other_client.id) == ["L-1"]
    problem_of(api.call("tech", "GET", "/api/v1/jobs", params={"status": "closed"}), 422)

    mark = utcnow()
    assert codes(updated_since=mark.isoformat()) == []
    api.call("tech", "PUT", f"/api/v1/tests/{api.test_id}/readings", json={"version": 1, "readings": WATER})
    assert codes(updated_since=mark.isoformat()) == ["T-100"]  # a test's readings change its job
    samples.add_location(api.db, api.people.admin, late.id or 0, "BH2")
    assert codes(updated_since=mark.isoformat()) == ["T-100", "L-1"]
    assert codes(updated_since=mark.replace(tzinfo=None).isoformat()) == ["T-100", "L-1"]  # no zone: UTC


def test_tests_are_filtered_by_status_and_method(api: Api) -> None:
    jobs.request_tests(api.db, api.people.admin, [api.sample_id], ["atterberg"])
    api.call("tech", "PUT", f"/api/v1/tests/{api.test_id}/readings", json={"version": 1, "readings": WATER})

    def methods(**params: Any) -> list[str]:
        reply = api.call("tech", "GET", "/api/v1/tests", params={"job_id": api.job_id, **params})
        assert reply.status_code == 200, reply.text
        return [t["method"] for t in reply.json()["items"]]

    assert methods() == ["water-content", "atterberg"]
    assert methods(status="draft") == ["water-content"]
    assert methods(status="requested") == ["atterberg"]
    assert methods(method="atterberg") == ["atterberg"]
    assert methods(method="atterberg", status="draft") == []
    assert problem_of(api.call("tech", "GET", "/api/v1/tests", params={"method": "no-such"}), 422)["errors"]


# --- rate limits --------------------------------------------------------------------------------


@pytest.fixture
def limited(settings: Settings, db: Database, people: People) -> Iterator[tuple[TestClient, dict[str, str]]]:
    app = create_app(settings.model_copy(update={"api_rate_limit": "3/minute"}), db)
    with TestClient(app, base_url="http://testserver") as client:
        yield client, _tokens(db, people)


def test_past_its_rate_limit_a_token_gets_429_with_retry_after(
    limited: tuple[TestClient, dict[str, str]],
) -> None:
    client, made = limited
    headers = {"Authorization": f"Bearer {made['tech']}"}
    for _ in range(3):
        assert client.get("/api/v1/me", headers=headers).status_code == 200
    reply = client.get("/api/v1/me", headers=headers)
    problem_of(reply, 429)  # RFC 6585 section 4
    assert 1 <= int(reply.headers["retry-after"]) <= 60  # RFC 9110 section 10.2.3: seconds; a minute's window
    other = client.get("/api/v1/me", headers={"Authorization": f"Bearer {made['review']}"})
    assert other.status_code == 200  # per token (the brief)


# --- reports and exports out ------------------------------------------------------------------


def test_a_jobs_issued_report_is_listed_and_its_pdf_is_the_issued_bytes(api: Api) -> None:
    _submitted(api)
    version = version_of(api, api.test_id)
    api.call(
        "review",
        "POST",
        f"/api/v1/tests/{api.test_id}/approve",
        json={"version": version, "password": PASSWORDS["review"]},
    )
    issued = reports.issue_report(
        api.db, api.people.review, api.job_id, "http://testserver", password=PASSWORDS["review"]
    )
    listed = api.call("tech", "GET", f"/api/v1/jobs/{api.job_id}/reports").json()
    (report,) = listed["items"]
    assert (report["number"], report["status"], report["sha256"]) == (issued.number, "issued", issued.sha256)
    pdf = api.call("tech", "GET", report["pdf"])
    assert pdf.status_code == 200 and pdf.headers["content-type"] == "application/pdf"
    # DESIGN.md section 4: issued once as a frozen PDF with its SHA-256
    assert hashlib.sha256(pdf.content).hexdigest() == issued.sha256
    digest = base64.b64encode(hashlib.sha256(pdf.content).digest()).decode()
    assert pdf.headers["repr-digest"] == f"sha-256=:{digest}:"  # RFC 9530 section 3
    reported = api.call("tech", "GET", "/api/v1/jobs", params={"status": "reported"}).json()["items"]
    assert [j["code"] for j in reported] == ["T-100"]  # server/db/job_list.py: an issued report


def _approve(api: Api) -> None:
    version = _submitted(api)
    reply = api.call(
        "review",
        "POST",
        f"/api/v1/tests/{api.test_id}/approve",
        json={"version": version, "password": PASSWORDS["review"]},
    )
    assert reply.status_code == 200, reply.text


def test_a_reports_frozen_ags4_file_is_listed_and_served_byte_for_byte(api: Api) -> None:
    _approve(api)
    issued = reports.issue_report(
        api.db, api.people.review, api.job_id, "http://testserver", password=PASSWORDS["review"]
    )
    with api.db.session() as s:
        frozen = s.get(ReportAgs4, issued.id)
    assert frozen is not None
    (report,) = api.call("tech", "GET", f"/api/v1/jobs/{api.job_id}/reports").json()["items"]
    assert (report["ags4"], report["ags4_sha256"]) == (f"/api/v1/reports/{issued.id}.ags", frozen.sha256)
    reply = api.call("reader", "GET", report["ags4"])
    assert reply.status_code == 200 and reply.headers["content-type"].startswith("text/plain")
    assert reply.content == frozen.data  # DESIGN.md section 7: frozen with the report, never made again
    digest = base64.b64encode(hashlib.sha256(reply.content).digest()).decode()
    assert reply.headers["repr-digest"] == f"sha-256=:{digest}:"  # RFC 9530 section 3
    problem_of(api.call("tech", "GET", "/api/v1/reports/999999.ags"), 404)


@pytest.mark.parametrize("kind", ["ags4", "csv", "xlsx"])
def test_an_export_is_the_same_file_as_the_job_pages_download(api: Api, kind: str) -> None:
    _approve(api)
    with api.db.session() as s:
        expected = downloads.job_download(s, api.job_id, kind, today=utcnow().date())  # type: ignore[arg-type]
    for who in ("tech", "review", "admin", "reader"):  # reading results is for anyone signed in
        reply = api.call(who, "GET", f"/api/v1/jobs/{api.job_id}/export", params={"format": kind})
        assert reply.status_code == 200, reply.text
        assert reply.content == expected.data
        assert reply.headers["content-type"] == expected.media_type
        assert expected.file_name in reply.headers["content-disposition"]
    if kind == "csv":
        header = reply.content.decode("utf-8-sig").splitlines()[0]
        assert header.split(",") == results_sheet.summary_headers()  # the documented example's columns


def test_an_export_of_a_job_with_nothing_approved_is_refused_as_a_read(api: Api) -> None:
    body = problem_of(
        api.call("tech", "GET", f"/api/v1/jobs/{api.job_id}/export", params={"format": "csv"}), 422
    )
    assert body["errors"][0]["loc"] == ["tests"] and "no approved test" in body["detail"]
    assert not body["detail"].startswith("nothing was stored")  # a read stores nothing anyway
    problem_of(api.call("tech", "GET", "/api/v1/jobs/999999/export", params={"format": "csv"}), 404)


def test_an_export_of_an_unknown_format_is_refused(api: Api) -> None:
    body = problem_of(
        api.call("tech", "GET", f"/api/v1/jobs/{api.job_id}/export", params={"format": "pdf"}), 422
    )
    assert body["errors"][0]["loc"] == ["query", "format"]


# --- the role x route matrix ----------------------------------------------------------------------

CHECKERS_ONLY = {"review", "admin"}
EVERYONE = {"tech", "review", "admin"}


def _matrix(api: Api) -> list[tuple[str, str, dict[str, Any], set[str]]]:
    """(method, path, request keywords, roles the pages allow), in an order that keeps each
    allowed call meaningful (the readings are in before the hand-in, the hand-in before review)."""
    client_id = _client_id(api)
    with api.db.session() as s:
        sample = s.get(Sample, api.sample_id)
    assert sample is not None
    t = api.test_id
    j = api.job_id
    csv = {"files": {"file": ("schedule.csv", csv_bytes(ROWS), "text/csv")}, "params": {"dry_run": "true"}}
    return [
        ("GET", "/api/v1/me", {}, EVERYONE),
        ("GET", "/api/v1/jobs", {}, EVERYONE),
        ("GET", f"/api/v1/jobs/{j}", {}, EVERYONE),
        ("GET", f"/api/v1/jobs/{j}/samples", {}, EVERYONE),
        ("GET", f"/api/v1/jobs/{j}/locations", {}, EVERYONE),
        ("GET", f"/api/v1/jobs/{j}/tests", {}, EVERYONE),
        ("GET", "/api/v1/tests", {}, EVERYONE),
        ("GET", f"/api/v1/tests/{t}", {}, EVERYONE),
        ("GET", f"/api/v1/jobs/{j}/reports", {}, EVERYONE),
        ("GET", "/api/v1/clients", {}, CHECKERS_ONLY),  # the clients page: intake.py, Checker
        ("POST", "/api/v1/clients", {"json": {"name": "Matrix {who}"}}, CHECKERS_ONLY),
        ("POST", "/api/v1/jobs", {"json": {"client_id": client_id, "code": "M-{who}"}}, CHECKERS_ONLY),
        ("POST", f"/api/v1/jobs/{j}/locations", {"json": {"code": "M{who}"}}, CHECKERS_ONLY),
        (
            "POST",
            f"/api/v1/jobs/{j}/samples",
            {"json": {"location_id": sample.location_id, "code": "M-{who}", "depth_from_m": 1.0}},
            CHECKERS_ONLY,
        ),
        ("POST", f"/api/v1/jobs/{j}/imports", csv, CHECKERS_ONLY),  # the import page: imports.py, Checker
        ("PUT", f"/api/v1/tests/{t}/readings", {"json": {"version": 1, "readings": WATER}}, EVERYONE),
        ("POST", f"/api/v1/tests/{t}/submit", {"json": {"version": 2}}, EVERYONE),
        ("POST", f"/api/v1/tests/{t}/return", {"json": {"version": 3, "reason": "no"}}, CHECKERS_ONLY),
        (
            "POST",
            f"/api/v1/tests/{t}/approve",
            {"json": {"version": 3, "password": "{password}"}},
            CHECKERS_ONLY,
        ),
    ]


def _filled(value: Any, who: str) -> Any:
    if isinstance(value, str):
        return value.replace("{who}", who).replace("{password}", PASSWORDS[who])
    if isinstance(value, dict) and "file" not in value:
        return {k: _filled(v, who) for k, v in value.items()}
    return value


def test_every_route_allows_the_roles_the_pages_allow_and_no_other(api: Api) -> None:
    refused: list[tuple[str, str, str]] = []
    wrongly: list[tuple[str, str, str, int]] = []
    for method, path, keywords, allowed in _matrix(api):
        for who in ("tech", "admin", "review"):  # the reviewer last: the approval is theirs to sign
            reply = api.call(who, method, path, **{k: _filled(v, who) for k, v in keywords.items()})
            if who in allowed:
                if reply.status_code in (401, 403):
                    wrongly.append((method, path, who, reply.status_code))
            elif reply.status_code != 403:
                refused.append((method, path, who))
            else:
                problem_of(reply, 403)
    assert wrongly == []  # a role the page allows is never refused by the API
    assert refused == []  # a role the page refuses is refused (403) by the API
    with api.db.session() as s:
        test = s.get(LabTest, api.test_id)
        made = s.exec(select(Job).where(Job.code == "M-tech")).first()
    assert test is not None and test.status == "approved" and made is None  # the allowed calls did their work


def test_a_read_token_reads_everything_and_writes_nothing(api: Api) -> None:
    for method, path, keywords, _ in _matrix(api):
        reply = api.call("reader", method, path, **{k: _filled(v, "admin") for k, v in keywords.items()})
        if method == "GET":
            assert reply.status_code == 200, (path, reply.text)
        else:
            problem_of(reply, 403)
            assert 'error="insufficient_scope"' in reply.headers["www-authenticate"]
