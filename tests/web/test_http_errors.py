"""A page's refusal reads as a page: status, message and a way back, not FastAPI's raw JSON;
scripts that ask for JSON, htmx and the API keep their own forms."""

from __future__ import annotations

from fastapi.testclient import TestClient

from server.db.session import Database
from tests.conftest import PASSWORDS, People
from tests.support.http import sign_in


def test_a_missing_job_is_a_not_found_page_for_a_browser(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    page = app_client.get("/jobs/999")
    assert page.status_code == 404 and page.headers["content-type"].startswith("text/html")
    assert "<h1>Not found</h1>" in page.text and "No such job." in page.text
    assert 'href="/"' in page.text  # a way back, inside the app's own layout
    assert "tech" in page.text  # the signed-in person's menu is there


def test_scripts_htmx_and_the_api_keep_their_forms(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    as_json = app_client.get("/jobs/999", headers={"Accept": "application/json"})
    assert (as_json.status_code, as_json.json()) == (404, {"detail": "no such job"})
    fragment = app_client.get("/jobs/999", headers={"HX-Request": "true"})
    assert fragment.status_code == 404 and fragment.text == '<p class="problem" role="alert">no such job</p>'
    problem = app_client.get("/api/v1/no-such-route")
    assert problem.status_code == 404 and problem.headers["content-type"] == "application/problem+json"


def test_unknown_paths_and_methods_are_pages_too(
    app_client: TestClient, db: Database, people: People
) -> None:
    unknown = app_client.get("/no-such-page")
    assert unknown.status_code == 404 and "<h1>Not found</h1>" in unknown.text
    wrong_method = app_client.put("/signin")
    assert wrong_method.status_code == 405 and "<h1>Not here</h1>" in wrong_method.text
    assert "allow" in wrong_method.headers  # RFC 9110 section 15.5.6
