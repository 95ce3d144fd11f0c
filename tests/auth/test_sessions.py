"""Who is asking, through the app as a browser meets it: sign-in, the session cookie, its
revocation, roles, CSRF and the sign-in redirect."""

from __future__ import annotations

import base64
import importlib
import json
import pkgutil
from types import ModuleType
from typing import Any
from urllib.parse import urlencode

import pytest
from fastapi import APIRouter
from fastapi.routing import APIRoute
from fastapi.testclient import TestClient
from httpx import Response
from sqlmodel import select

import server.api
import server.web
from server.auth.sessions import require_user
from server.db.session import Database
from server.db.tables import AuditEvent, LabTest, User
from tests.conftest import PASSWORDS, People
from tests.support.http import csrf_of, post_form, sign_in
from tests.support.scenario import ATTERBERG, Job, form_fields, small_job

COOKIE = "claybench_session"


@pytest.fixture
def tech(people: People) -> User:
    return people.tech


@pytest.fixture
def reviewer(people: People) -> User:
    return people.review


@pytest.fixture
def job(db: Database, people: People) -> Job:
    """A requested atterberg test on a job the admin registered."""
    return small_job(db, people.admin)


def _signed_in(client: TestClient, user: User) -> TestClient:
    sign_in(client, user.username, PASSWORDS[user.username])
    return client


def _session_data(client: TestClient) -> dict[str, Any]:
    """What the signed (not encrypted) cookie holds: base64 JSON before the first dot."""
    value = client.cookies.get(COOKIE)
    if not value:
        return {}
    payload = value.split(".", 1)[0]
    return dict(json.loads(base64.b64decode(payload + "=" * (-len(payload) % 4))))


def _post_readings(
    client: TestClient, job: Job, token: str | None = None, headers: dict[str, str] | None = None
) -> Response:
    """The bench form of the test, posted as a browser would (with ``token`` when given)."""
    fields: dict[str, list[str]] = {}
    for key, value in [*form_fields(ATTERBERG), ("version", "1")]:
        fields.setdefault(key, []).append(value)
    if token is not None:
        fields["csrf_token"] = [token]
    return client.post(f"/tests/{job.test_id}/readings", data=fields, headers=headers, follow_redirects=False)


def _post_sign_in(client: TestClient, username: str, password: str, next_: str = "/jobs") -> Response:
    """The sign-in form, filled in and posted with the token of the page it came from."""
    token = csrf_of(client.get("/signin"))
    return client.post(
        "/signin",
        data={"username": username, "password": password, "csrf_token": token, "next": next_},
        follow_redirects=False,
    )


def _test_state(db: Database, job: Job) -> tuple[str, int, int]:
    """The test's status, its version and how many readings events the audit trail holds."""
    with db.session() as s:
        test = s.get(LabTest, job.test_id)
        assert test is not None
        events = s.exec(
            select(AuditEvent).where(AuditEvent.entity == "lab_test", AuditEvent.action == "readings")
        ).all()
        return test.status, test.version, len(events)


def _is_sign_in_redirect(reply: Response, path: str) -> bool:
    return reply.status_code == 303 and reply.headers["location"] == f"/signin?{urlencode({'next': path})}"


# Signed out


@pytest.mark.parametrize("path", ["/", "/jobs", "/jobs/1", "/samples/1", "/tests/1", "/review", "/review/1"])
def test_a_page_redirects_to_sign_in_with_next_when_signed_out(app_client: TestClient, path: str) -> None:
    reply = app_client.get(path, follow_redirects=False)
    assert _is_sign_in_redirect(reply, path), (reply.status_code, reply.headers.get("location"))


def test_an_htmx_request_signed_out_is_told_where_to_sign_in(app_client: TestClient) -> None:
    reply = app_client.get("/jobs", headers={"HX-Request": "true"}, follow_redirects=False)
    assert reply.status_code == 401
    assert reply.headers["hx-redirect"] == "/signin"


def _dependency_calls(route: APIRoute) -> list[Any]:
    calls, stack = [], list(route.dependant.dependencies)
    while stack:
        dep = stack.pop()
        calls.append(dep.call)
        stack.extend(dep.dependencies)
    return calls


def _needs_session(route: APIRoute) -> bool:
    return any(
        call is require_user or getattr(call, "__qualname__", "").startswith("require_roles.")
        for call in _dependency_calls(route)
    )


def _routes_of(package: ModuleType) -> list[APIRoute]:
    """Every route of every router module in a package (the routers' own paths carry their prefix)."""
    found: list[APIRoute] = []
    for info in pkgutil.iter_modules(package.__path__):
        router = getattr(importlib.import_module(f"{package.__name__}.{info.name}"), "router", None)
        if isinstance(router, APIRouter):
            found += [r for r in router.routes if isinstance(r, APIRoute)]
    return found


def test_a_protected_api_route_answers_401_json_when_signed_out(app_client: TestClient) -> None:
    # The detector itself works: it finds the pages that need a session, so a skip below is honest.
    assert {"/jobs", "/review"} <= {r.path for r in _routes_of(server.web) if _needs_session(r)}
    protected = [r for r in _routes_of(server.api) if _needs_session(r)]
    if not protected:
        pytest.skip("no API route needs a session yet (the calculation API is stateless and public)")
    for route in protected:
        path = route.path
        for name in route.param_convertors:
            path = path.replace("{" + name + "}", "1")
        methods = route.methods or {"GET"}
        method = "GET" if "GET" in methods else sorted(methods)[0]
        reply = app_client.request(method, path, follow_redirects=False)
        assert reply.status_code == 401, (method, path)
        assert reply.json() == {"detail": "sign in required"}


def test_healthz_answers_ok_without_signing_in(app_client: TestClient) -> None:
    reply = app_client.get("/healthz")
    assert reply.status_code == 200
    assert reply.json()["status"] == "ok"


# Signing in


def test_the_session_cookie_is_httponly_and_samesite_lax(app_client: TestClient, tech: User) -> None:
    reply = _post_sign_in(app_client, "tech", PASSWORDS["tech"])
    assert reply.status_code == 303
    cookies = [c for c in reply.headers.get_list("set-cookie") if c.startswith(f"{COOKIE}=")]
    assert len(cookies) == 1
    attributes = {part.strip().lower() for part in cookies[0].split(";")[1:]}
    assert "httponly" in attributes
    assert "samesite=lax" in attributes
    held = _session_data(app_client)
    assert set(held) == {"sid", "csrf"}  # a random session id, never the user's id
    assert len(held["sid"]) >= 43  # secrets.token_urlsafe(32): 256 bits (Python docs, secrets)


def test_a_wrong_password_is_refused_with_a_message_and_no_session(
    app_client: TestClient, tech: User
) -> None:
    reply = _post_sign_in(app_client, "tech", "not-the-password")
    assert reply.status_code == 400
    assert "Username or password not recognised" in reply.text
    assert "sid" not in _session_data(app_client)
    assert _is_sign_in_redirect(app_client.get("/jobs", follow_redirects=False), "/jobs")


def test_an_unknown_username_is_refused_like_a_wrong_password(app_client: TestClient, tech: User) -> None:
    reply = _post_sign_in(app_client, "nobody", PASSWORDS["tech"])
    assert reply.status_code == 400
    assert "Username or password not recognised" in reply.text


def test_a_deactivated_user_cannot_sign_in(app_client: TestClient, db: Database, tech: User) -> None:
    with db.transaction() as s:
        stored = s.get(User, tech.id)
        assert stored is not None
        stored.active = False
    reply = _post_sign_in(app_client, "tech", PASSWORDS["tech"])
    assert reply.status_code == 400
    assert "sid" not in _session_data(app_client)


def test_signing_in_goes_to_the_page_asked_for(app_client: TestClient, reviewer: User) -> None:
    reply = _post_sign_in(app_client, "review", PASSWORDS["review"], "/review")
    assert (reply.status_code, reply.headers["location"]) == (303, "/review")


OFF_SITE = [
    "//evil.example",
    "https://evil.example",
    "http://evil.example/jobs",
    "/\\evil.example",
    "/\t/evil.example",
    "evil.example",
    "javascript:alert(1)",
]


def _stays_on_site(location: str) -> bool:
    """Whether a browser following this Location stays here: browsers read a backslash as a slash
    and drop tabs and newlines (WHATWG URL Standard, "URL parsing"), so neither may make it "//"."""
    seen = location.replace("\\", "/").replace("\t", "").replace("\n", "").replace("\r", "")
    return seen.startswith("/") and not seen.startswith("//")


@pytest.mark.parametrize("target", ["//evil.example", "https://evil.example", "/\\evil.example"])
def test_next_cannot_send_someone_off_site_after_signing_in(
    app_client: TestClient, tech: User, target: str
) -> None:
    reply = _post_sign_in(app_client, "tech", PASSWORDS["tech"], target)
    assert reply.status_code == 303
    assert _stays_on_site(reply.headers["location"]), reply.headers["location"]


def test_next_cannot_send_someone_already_signed_in_off_site(app_client: TestClient, tech: User) -> None:
    _signed_in(app_client, tech)
    for target in OFF_SITE:
        reply = app_client.get("/signin", params={"next": target}, follow_redirects=False)
        assert reply.status_code == 303, target
        assert _stays_on_site(reply.headers["location"]), (target, reply.headers["location"])
    on_site = app_client.get("/signin", params={"next": "/review"}, follow_redirects=False)
    assert on_site.headers["location"] == "/review"


def test_the_sign_in_form_does_not_echo_an_off_site_next(app_client: TestClient) -> None:
    page = app_client.get("/signin", params={"next": "//evil.example"})
    assert "evil.example" not in page.text


# Revoking a session


def test_a_deactivated_user_is_signed_out_on_the_next_request(
    app_client: TestClient, db: Database, tech: User
) -> None:
    _signed_in(app_client, tech)
    assert app_client.get("/jobs").status_code == 200
    with db.transaction() as s:
        stored = s.get(User, tech.id)
        assert stored is not None
        stored.active = False
    assert _is_sign_in_redirect(app_client.get("/jobs", follow_redirects=False), "/jobs")


def test_signing_out_ends_the_session(app_client: TestClient, tech: User) -> None:
    _signed_in(app_client, tech)
    reply = post_form(app_client, "/jobs", "/signout", {}, follow_redirects=False)
    assert (reply.status_code, reply.headers["location"]) == (303, "/signin")
    assert _is_sign_in_redirect(app_client.get("/jobs", follow_redirects=False), "/jobs")


# Roles


def test_a_technician_is_refused_the_review_desk(app_client: TestClient, tech: User) -> None:
    _signed_in(app_client, tech)
    assert app_client.get("/review").status_code == 403


def test_a_reviewer_may_open_the_review_desk(app_client: TestClient, reviewer: User) -> None:
    _signed_in(app_client, reviewer)
    assert app_client.get("/review").status_code == 200


def test_a_technician_cannot_approve_even_with_a_valid_form(
    app_client: TestClient, db: Database, tech: User, job: Job
) -> None:
    _signed_in(app_client, tech)
    reply = post_form(
        app_client,
        "/jobs",
        f"/review/{job.test_id}/approve",
        {"version": "1", "password": PASSWORDS["tech"]},
        follow_redirects=False,
    )
    assert reply.status_code == 403
    assert _test_state(db, job) == ("requested", 1, 0)


# CSRF


def test_the_readings_form_with_its_token_is_saved(
    app_client: TestClient, db: Database, tech: User, job: Job
) -> None:
    # The control for the refusals below: the same post, with the page's token, goes through.
    _signed_in(app_client, tech)
    reply = _post_readings(app_client, job, csrf_of(app_client.get(f"/tests/{job.test_id}")))
    assert reply.status_code == 303, reply.text
    assert _test_state(db, job) == ("draft", 2, 1)


def test_a_post_without_a_csrf_token_is_refused_and_changes_nothing(
    app_client: TestClient, db: Database, tech: User, job: Job
) -> None:
    _signed_in(app_client, tech)
    reply = _post_readings(app_client, job)
    assert reply.status_code == 403
    assert _test_state(db, job) == ("requested", 1, 0)


def test_signing_out_without_a_csrf_token_is_refused(app_client: TestClient, tech: User) -> None:
    _signed_in(app_client, tech)
    assert app_client.post("/signout", follow_redirects=False).status_code == 403
    assert app_client.get("/jobs", follow_redirects=False).status_code == 200


def test_a_csrf_token_from_another_session_is_refused(
    app_client: TestClient, second_client: TestClient, db: Database, tech: User, reviewer: User, job: Job
) -> None:
    _signed_in(app_client, tech)
    _signed_in(second_client, reviewer)
    own = csrf_of(app_client.get("/jobs"))
    other = csrf_of(second_client.get("/jobs"))
    assert own != other
    reply = _post_readings(app_client, job, other)
    assert reply.status_code == 403
    assert _test_state(db, job) == ("requested", 1, 0)


def test_a_csrf_token_is_accepted_in_the_htmx_header(
    app_client: TestClient, db: Database, tech: User, job: Job
) -> None:
    _signed_in(app_client, tech)
    token = csrf_of(app_client.get("/jobs"))
    reply = _post_readings(app_client, job, headers={"X-CSRF-Token": token})
    assert reply.status_code == 303
    assert _test_state(db, job) == ("draft", 2, 1)


@pytest.mark.parametrize(
    "headers",
    [
        {"Sec-Fetch-Site": "cross-site"},
        {"Origin": "https://evil.example"},
        {"Origin": "null"},  # a sandboxed frame, a data: URL or a file:// page (RFC 6454 section 7.3)
    ],
    ids=["sec-fetch-site-cross-site", "origin-of-another-site", "origin-null"],
)
def test_a_cross_site_post_is_refused_even_with_a_valid_token(
    app_client: TestClient, db: Database, tech: User, job: Job, headers: dict[str, str]
) -> None:
    _signed_in(app_client, tech)
    token = csrf_of(app_client.get(f"/tests/{job.test_id}"))
    reply = _post_readings(app_client, job, token, headers)
    assert reply.status_code == 403
    assert _test_state(db, job) == ("requested", 1, 0)


def test_a_same_origin_post_with_a_valid_token_passes_the_cross_site_checks(
    app_client: TestClient, db: Database, tech: User, job: Job
) -> None:
    _signed_in(app_client, tech)
    token = csrf_of(app_client.get(f"/tests/{job.test_id}"))
    reply = _post_readings(
        app_client, job, token, {"Sec-Fetch-Site": "same-origin", "Origin": "http://testserver"}
    )
    assert reply.status_code == 303
    assert _test_state(db, job) == ("draft", 2, 1)
