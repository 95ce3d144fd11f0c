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


# -- S9 point 6: what the pages load of ours (favicon, symbol font), and the preview's address --

# The symbol blocks the pages draw from (Unicode 15.1 code charts): arrows, mathematical operators,
# miscellaneous technical, geometric shapes, miscellaneous symbols, dingbats, and the rest of
# U+27C0-2BFF; the font's @font-face names these code points (static/claybench.css).
SYMBOL_BLOCKS = range(0x2190, 0x2C00)


def _symbols_shown() -> set[str]:
    """Every symbol character a template, a script or a page module writes."""
    found: set[str] = set()
    for folder, pattern in (("templates", "*.html"), ("static", "*.js"), ("server/web", "*.py")):
        for path in (ROOT / folder).rglob(pattern):
            if "htmx" not in path.name and "reports" not in path.parts:  # the PDF embeds its own fonts
                found |= {c for c in path.read_text(encoding="utf-8") if ord(c) in SYMBOL_BLOCKS}
    return found


def test_every_symbol_the_pages_show_is_in_the_font_we_ship(app_client: TestClient) -> None:
    """Chromium drew the ⧗ of a handed-in test as an empty box: no installed font had it."""
    from fontTools.ttLib import TTFont

    font = app_client.get("/static/claybench-symbols.woff2")
    assert font.status_code == 200 and font.content[:4] == b"wOF2"  # W3C WOFF 2.0, section 4.1
    assert _policy(app_client.get("/signin"))["font-src"] == "'self'"
    cmap = TTFont(ROOT / "static" / "claybench-symbols.woff2").getBestCmap()
    missing = sorted(c for c in _symbols_shown() if ord(c) not in cmap)
    assert not missing, f"symbols not in static/claybench-symbols.woff2: {' '.join(missing)}"
    css = (ROOT / "static" / "claybench.css").read_text()
    assert 'url("/static/claybench-symbols.woff2")' in css
    declared = re.search(r'font-family: "Claybench Symbols";[^}]*unicode-range: ([^;]+);', css)
    assert declared, "the @font-face names the code points it serves"
    spans = [[int(x, 16) for x in part.strip()[2:].split("-")] for part in declared.group(1).split(",")]
    outside = sorted(c for c in _symbols_shown() if not any(s[0] <= ord(c) <= s[-1] for s in spans))
    assert not outside, f"symbols outside the font's unicode-range: {' '.join(outside)}"
    assert re.search(r'body \{[^}]*font-family: "Claybench Symbols"', css)  # first, for its code points
    assert (ROOT / "static" / "claybench-symbols-LICENSE.txt").exists()  # its licence beside it


def test_the_favicon_is_linked_served_and_asked_for_at_its_usual_address(app_client: TestClient) -> None:
    signin = app_client.get("/signin")
    assert '<link rel="icon" href="/static/favicon.svg" type="image/svg+xml">' in signin.text
    assert _policy(signin)["img-src"].split()[0] == "'self'"
    old_address = app_client.get("/favicon.ico", follow_redirects=False)
    assert old_address.status_code == 308 and old_address.headers["location"] == "/static/favicon.svg"
    icon = app_client.get("/favicon.ico")
    assert icon.status_code == 200 and icon.headers["content-type"].startswith("image/svg+xml")
    assert icon.text.startswith("<svg") and "<script" not in icon.text


def test_the_report_preview_is_posted_so_its_address_carries_no_csrf_token(
    app_client: TestClient, db: Database, people: People
) -> None:
    two = two_approved_samples(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    job_page = app_client.get(f"/jobs/{two.job_id}").text
    button = re.search(r'<button[^>]*formaction="/jobs/\d+/reports/preview"[^>]*>', job_page)
    assert button and 'formmethod="post"' in button.group(0)
    token = re.search(r'name="csrf_token" value="([^"]+)"', job_page)
    assert token
    preview = app_client.post(
        f"/jobs/{two.job_id}/reports/preview", data={"csrf_token": token.group(1), "choice": "all"}
    )
    assert preview.status_code == 200 and "PREVIEW" in preview.text
    # A preview is no report: it carries no number of its own (the next would be T-100-R01,
    # server/services/reports.py next_report_number), so nobody mistakes it for one issued.
    assert "T-100-R01" not in preview.text and "Report PREVIEW" in preview.text
    assert "csrf_token" not in str(preview.url)
    assert preview.headers["cache-control"] == "private, no-store"
    _assert_guarded(preview)
    refused = app_client.post(f"/jobs/{two.job_id}/reports/preview", data={"choice": "all"})
    assert refused.status_code == 403  # a POST without the session's token is refused
