"""Sessions kept on the server, through the pages as a browser meets them: sign-out ends the
session for every copy of the cookie, sign-out everywhere, the person's own password change,
expiry after inactivity and after the maximum age, and a new id at every sign-in."""

from __future__ import annotations

from datetime import timedelta

import pytest
from fastapi.testclient import TestClient
from sqlmodel import col, select

from server.config import Settings
from server.db.session import Database
from server.db.tables import AuditEvent, User, UserSession, utcnow
from server.main import create_app
from tests.conftest import PASSWORDS, People
from tests.support.http import csrf_of, post_form, sign_in
from tests.support.scenario import ATTERBERG, Job, form_fields, small_job

COOKIE = "claybench_session"


@pytest.fixture
def job(db: Database, people: People) -> Job:
    return small_job(db, people.admin)


def _save_readings(client: TestClient, job: Job, token: str) -> int:
    """The bench form posted with this CSRF token; the status code."""
    fields: dict[str, list[str]] = {"csrf_token": [token]}
    for key, value in [*form_fields(ATTERBERG), ("version", "1")]:
        fields.setdefault(key, []).append(value)
    reply = client.post(f"/tests/{job.test_id}/readings", data=fields, follow_redirects=False)
    return reply.status_code


def _signed_out(client: TestClient) -> bool:
    reply = client.get("/jobs", follow_redirects=False)
    return reply.status_code == 303 and reply.headers["location"].startswith("/signin")


def _rows(db: Database, user: User) -> list[UserSession]:
    with db.session() as s:
        return list(
            s.exec(select(UserSession).where(UserSession.user_id == user.id).order_by(col(UserSession.id)))
        )


def test_a_cookie_copied_before_sign_out_saves_nothing_afterwards(
    app_client: TestClient, db: Database, people: People, job: Job
) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    copied, token = app_client.cookies[COOKIE], csrf_of(app_client.get(f"/tests/{job.test_id}"))
    post_form(app_client, "/jobs", "/signout", {})
    with TestClient(app_client.app, base_url="http://testserver", cookies={COOKIE: copied}) as thief:
        assert _signed_out(thief)
        assert _save_readings(thief, job, token) in {303, 401, 403}
    with db.session() as s:
        events = s.exec(select(AuditEvent).where(AuditEvent.action == "readings")).all()
    assert events == []
    (row,) = _rows(db, people.tech)
    assert (row.ended_at is not None, row.end_reason) == (True, "signed out")


def test_sign_in_gives_a_new_session_id_each_time(
    app_client: TestClient, people: People, db: Database
) -> None:
    app_client.get("/signin")
    before = app_client.cookies[COOKIE]
    sign_in(app_client, "tech", PASSWORDS["tech"])
    first = app_client.cookies[COOKIE]
    sign_in(app_client, "tech", PASSWORDS["tech"])
    second = app_client.cookies[COOKIE]
    assert len({before, first, second}) == 3
    rows = _rows(db, people.tech)
    assert len(rows) == 2 and len({r.token_sha256 for r in rows}) == 2


def test_signing_out_everywhere_ends_every_browser(
    app_client: TestClient, second_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    sign_in(second_client, "tech", PASSWORDS["tech"])
    reply = post_form(
        app_client, "/account/sessions", "/account/sign-out-everywhere", {}, follow_redirects=False
    )
    assert (reply.status_code, reply.headers["location"]) == (303, "/signin")
    assert _signed_out(app_client) and _signed_out(second_client)
    assert {r.end_reason for r in _rows(db, people.tech)} == {"signed out everywhere"}


def test_changing_ones_password_needs_the_current_one_and_ends_the_other_sessions(
    app_client: TestClient, second_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    sign_in(second_client, "tech", PASSWORDS["tech"])
    wrong = post_form(
        app_client,
        "/account/sessions",
        "/account/password",
        {
            "current_password": "not-it",
            "new_password": "a-new-bench-pass-7",
            "repeat_password": "a-new-bench-pass-7",
        },
    )
    assert wrong.status_code == 422 and "the current password is not right" in wrong.text
    assert not _signed_out(second_client)
    done = post_form(
        app_client,
        "/account/sessions",
        "/account/password",
        {
            "current_password": PASSWORDS["tech"],
            "new_password": "a-new-bench-pass-7",
            "repeat_password": "a-new-bench-pass-7",
        },
        follow_redirects=False,
    )
    assert (done.status_code, done.headers["location"]) == (303, "/account/sessions?done=password")
    assert not _signed_out(app_client)  # this browser stays signed in
    assert _signed_out(second_client)
    ended = [r.end_reason for r in _rows(db, people.tech) if r.ended_at is not None]
    assert ended == ["password changed"]
    with TestClient(app_client.app, base_url="http://testserver") as fresh:
        sign_in(fresh, "tech", "a-new-bench-pass-7")


def test_the_new_passwords_must_match_and_be_acceptable(app_client: TestClient) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    differ = post_form(
        app_client,
        "/account/sessions",
        "/account/password",
        {
            "current_password": PASSWORDS["tech"],
            "new_password": "a-new-bench-pass-7",
            "repeat_password": "other",
        },
    )
    assert differ.status_code == 422 and "the two new passwords differ" in differ.text
    short = post_form(
        app_client,
        "/account/sessions",
        "/account/password",
        {"current_password": PASSWORDS["tech"], "new_password": "short", "repeat_password": "short"},
    )
    assert short.status_code == 422 and 'id="err-new_password"' in short.text


def test_a_session_ends_after_the_idle_time(app_client: TestClient, db: Database, people: People) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    assert not _signed_out(app_client)
    idle = app_client.app.state.settings.session_idle_s  # type: ignore[attr-defined]
    with db.transaction() as s:
        (row,) = s.exec(select(UserSession).where(UserSession.user_id == people.tech.id))
        row.last_seen_at = utcnow() - timedelta(seconds=idle + 1)
        s.add(row)
    assert _signed_out(app_client)
    assert _rows(db, people.tech)[0].end_reason == "expired"


def test_a_session_in_use_still_ends_at_the_maximum_age(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    longest = app_client.app.state.settings.session_max_age_s  # type: ignore[attr-defined]
    with db.transaction() as s:
        (row,) = s.exec(select(UserSession).where(UserSession.user_id == people.tech.id))
        row.created_at = utcnow() - timedelta(seconds=longest + 1)
        row.last_seen_at = utcnow()
        s.add(row)
    assert _signed_out(app_client)


def test_use_keeps_a_session_alive_by_moving_last_seen(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    earlier = utcnow() - timedelta(minutes=5)
    with db.transaction() as s:
        (row,) = s.exec(select(UserSession).where(UserSession.user_id == people.tech.id))
        row.last_seen_at = earlier
        s.add(row)
    assert not _signed_out(app_client)
    assert _rows(db, people.tech)[0].last_seen_at > earlier


def test_the_idle_time_defaults_to_eight_hours(settings: Settings) -> None:
    # The default (S10 point 1); the maximum age is ours: a week.
    assert (settings.session_idle_s, settings.session_max_age_s) == (8 * 3600, 7 * 86400)


def test_a_person_signs_out_another_browser_of_theirs_and_sees_only_their_own(
    app_client: TestClient, second_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "tech", PASSWORDS["tech"])
    sign_in(second_client, "tech", PASSWORDS["tech"])
    with TestClient(app_client.app, base_url="http://testserver") as reviewer:
        sign_in(reviewer, "review", PASSWORDS["review"])
        other = _rows(db, people.review)[0]
        page = app_client.get("/account/sessions")
        assert f'id="session-{other.id}"' not in page.text
        mine = [r for r in _rows(db, people.tech)]
        assert all(f'id="session-{r.id}"' in page.text for r in mine)
        # Ending another person's session from one's own page does nothing.
        post_form(app_client, "/account/sessions", f"/account/sessions/{other.id}/end", {})
        assert not _signed_out(reviewer)
    post_form(app_client, "/account/sessions", f"/account/sessions/{mine[1].id}/end", {})
    assert _signed_out(second_client) and not _signed_out(app_client)


def test_production_cookies_are_https_only_by_default(tmp_path: object, database_url: str) -> None:
    production = Settings(
        environment="production",
        DATABASE_URL=database_url,
        secret_key="p" * 48,
        data_dir=tmp_path,  # type: ignore[arg-type]
    )
    development = Settings(DATABASE_URL=database_url, secret_key="d" * 48, data_dir=tmp_path)  # type: ignore[arg-type]
    assert (production.https_only_cookies, development.https_only_cookies) == (True, False)
    db = Database(database_url)
    try:
        with TestClient(create_app(production, db), base_url="https://testserver") as client:
            reply = client.get("/signin")
            assert "secure" in reply.headers["set-cookie"].lower()
    finally:
        db.dispose()
