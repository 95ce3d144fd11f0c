"""Every response carries the security headers, and nothing we serve needs an inline exception.

The header values are those of OWASP's Secure Headers Project and the W3C CSP Level 3 and
Permissions Policy specifications (frame-ancestors 'none' against clickjacking, nosniff, a
referrer policy); HSTS only in production (RFC 6797 section 7.2).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from fastapi.testclient import TestClient
from httpx import Response

from server.config import ROOT, Settings
from server.db.session import Database
from server.main import create_app
from server.services import links, reports
from tests.conftest import PASSWORDS, People
from tests.reports.issued import two_approved_samples
from tests.support.http import sign_in

BASE = "http://testserver"


def _policy(response: Response) -> dict[str, str]:
    """The CSP's directives by name."""
    directives = (d.strip().split(" ", 1) for d in response.headers["content-security-policy"].split(";"))
    return {d[0]: d[1] if len(d) > 1 else "" for d in directives}


def _assert_guarded(response: Response) -> None:
    policy = _policy(response)
    assert policy["frame-ancestors"] == "'none'" and policy["default-src"] == "'none'"
    assert policy["script-src"] == "'self'" and policy["object-src"] == "'none'"
    assert "unsafe-inline" not in response.headers["content-security-policy"]
    assert "unsafe-eval" not in response.headers["content-security-policy"]
    assert response.headers["x-content-type-options"] == "nosniff"
    assert response.headers["x-frame-options"] == "DENY"
    for feature in ("camera", "microphone", "geolocation", "payment", "usb"):
        assert f"{feature}=()" in response.headers["permissions-policy"]
    assert "strict-transport-security" not in response.headers  # not over plain HTTP


def test_pages_api_static_files_errors_and_redirects_all_carry_the_headers(
    app_client: TestClient, db: Database, people: People
) -> None:
    answers = [
        app_client.get("/signin"),
        app_client.get("/jobs", follow_redirects=False),  # a redirect to the sign-in page
        app_client.get("/static/claybench.css"),
        app_client.get("/no-such-page"),
        app_client.post("/api/calc/atterberg", json={}),
        app_client.get("/api/v1/jobs"),  # 401 problem
        app_client.get("/openapi.json"),
    ]
    sign_in(app_client, "tech", PASSWORDS["tech"])
    answers.append(app_client.get("/jobs"))
    assert [a.status_code for a in answers][:3] == [200, 303, 200]
    for answer in answers:
        _assert_guarded(answer)
        assert answer.headers["referrer-policy"] == "same-origin"  # keeps Origin on our own posts


def test_a_share_page_keeps_its_own_no_referrer_and_the_other_headers(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    reports.issue_report(db, people.review, two.job_id, BASE, password=PASSWORDS["review"])
    made = links.create_link(db, people.review, two.job_id, 7)
    page = app_client.get(f"/share/{made.token}")
    assert page.status_code == 200
    _assert_guarded(page)
    assert page.headers["referrer-policy"] == "no-referrer"  # its path holds the token


def test_the_report_preview_allows_its_one_style_element_by_a_fresh_nonce(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    nonces = []
    for _ in range(2):
        page = app_client.get(f"/jobs/{two.job_id}/reports/preview")
        assert page.status_code == 200
        _assert_guarded(page)
        (nonce,) = re.findall(r"<style nonce=\"([^\"]+)\">", page.text)
        assert _policy(page)["style-src"] == f"'self' 'nonce-{nonce}'"
        assert len(re.findall(r"<style", page.text)) == 1 and " style=" not in page.text
        nonces.append(nonce)
    assert nonces[0] != nonces[1]


def test_production_sends_hsts_and_marks_the_session_cookie_secure(db: Database) -> None:
    settings = Settings(environment="production", secret_key="k" * 40, DATABASE_URL=db.url)
    with TestClient(create_app(settings, db), base_url="https://testserver") as client:
        page = client.get("/signin")
        assert page.headers["strict-transport-security"] == "max-age=31536000; includeSubDomains"
        assert "secure" in page.headers["set-cookie"].lower()


SERVED_TEMPLATES = sorted(
    p for p in (ROOT / "templates").rglob("*.html") if p.parent.name != "reports"
)  # reports/ become PDFs; the one shown in a browser (the preview) is checked above


@pytest.mark.parametrize("template", SERVED_TEMPLATES, ids=lambda p: str(p.relative_to(ROOT / "templates")))
def test_no_served_template_has_inline_script_style_or_handlers(template: Path) -> None:
    text = template.read_text(encoding="utf-8")
    assert not re.search(r"\sstyle\s*=", text), "a style attribute: use a class in static/claybench.css"
    assert not re.search(r"<style", text), "a <style> element: put it in static/claybench.css"
    inline = re.search(r"<script(?![^>]*\ssrc=)(?![^>]*type=\"application/json\")", text)  # JSON is data
    assert not inline, "an inline <script>: put it in static/"
    assert not re.search(r"\son[a-z]+\s*=", text), "an inline event handler: bind it in static/*.js"
    assert not re.search(r"hx-on|javascript:", text), "script in an attribute"
