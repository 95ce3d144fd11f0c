"""Personal API tokens (DESIGN.md section 7): made, stored as a hash only, checked on every
request, expiring, revocable, every use logged with the token's name, and made from the command
line as well as from the person's own page."""

from __future__ import annotations

import hashlib
from datetime import timedelta
from pathlib import Path

import pytest
from fastapi.testclient import TestClient
from sqlalchemy import update
from sqlmodel import col, select

from server.db.session import Database
from server.db.tables import ApiToken, ApiTokenUse, AuditEvent, utcnow
from server.services import tokens, users
from server.services.errors import Forbidden, Invalid, NotFound
from tests.conftest import People
from tests.support.http import post_form, sign_in
from tests.support.records import audit_events, refused_fields
from tests.test_cli import claybench

PASSWORD = {"tech": "tech-password-1"}  # tests/conftest.py PASSWORDS


def bearer(token: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {token}"}  # RFC 6750 section 2.1


def stored(db: Database, token_id: int) -> ApiToken:
    with db.session() as s:
        found = s.get(ApiToken, token_id)
    assert found is not None
    return found


def uses(db: Database, token_id: int) -> list[ApiTokenUse]:
    with db.session() as s:
        return list(
            s.exec(select(ApiTokenUse).where(ApiTokenUse.token_id == token_id).order_by(col(ApiTokenUse.id)))
        )


# --- made and stored ---------------------------------------------------------------------------


def test_a_new_token_is_stored_as_its_sha256_only(db: Database, people: People) -> None:
    made = tokens.create_token(db, people.tech, people.tech, "bench tablet", "write", 30)
    row = stored(db, made.token.id or 0)
    # DESIGN.md section 7: stored hashed; the SHA-256 as hashlib computes it (FIPS 180-4)
    assert row.token_sha256 == hashlib.sha256(made.plaintext.encode()).hexdigest()
    assert made.plaintext not in {row.token_sha256, row.name, row.prefix, row.scope}
    assert row.prefix == made.plaintext[:8] and len(row.prefix) == 8  # the brief: first 8 characters
    # secrets.token_urlsafe(32): 32 random bytes are 43 base64url characters (RFC 4648 section 5)
    assert len(made.plaintext) == 43
    assert row.scope == "write" and row.revoked_at is None and row.last_used_at is None
    assert row.expires_at - row.created_at == timedelta(days=30)  # --days 30


def test_making_a_token_is_audited_without_the_secret(db: Database, people: People) -> None:
    made = tokens.create_token(db, people.tech, people.tech, "nightly sync", "read", 7)
    (event,) = audit_events(db, "api_token", made.token.id, "create")
    assert event.actor == "tech" and event.after is not None
    assert event.after["name"] == "nightly sync" and event.after["scope"] == "read"
    text = repr(event.after) + repr(event.before)
    assert made.plaintext not in text and made.token.token_sha256 not in text  # common practice


def test_two_tokens_never_share_a_secret(db: Database, people: People) -> None:
    first = tokens.create_token(db, people.tech, people.tech, "one", "read", 7)
    second = tokens.create_token(db, people.tech, people.tech, "two", "read", 7)
    assert first.plaintext != second.plaintext  # 256 random bits each (common practice)


def test_a_token_is_personal(db: Database, people: People) -> None:
    with pytest.raises(Forbidden):
        tokens.create_token(db, people.admin, people.tech, "made for someone else", "write", 7)


@pytest.mark.parametrize(
    ("name", "scope", "days", "fields"),
    [
        ("", "read", 30, {"name"}),
        ("sync", "admin", 30, {"scope"}),
        ("sync", "read", 0, {"days"}),
        ("sync", "read", 367, {"days"}),  # at most a year (tokens.MAX_DAYS, common practice)
        ("", "everything", -1, {"name", "scope", "days"}),
    ],
)
def test_a_token_with_bad_fields_is_refused_field_by_field(
    db: Database, people: People, name: str, scope: str, days: int, fields: set[str]
) -> None:
    with pytest.raises(Invalid) as refused:
        tokens.create_token(db, people.tech, people.tech, name, scope, days)
    assert refused_fields(refused) == fields
    with db.session() as s:
        assert s.exec(select(ApiToken)).first() is None  # nothing stored


def test_two_active_tokens_of_a_person_have_different_names(db: Database, people: People) -> None:
    tokens.create_token(db, people.tech, people.tech, "Sync", "read", 7)
    with pytest.raises(Invalid) as refused:
        tokens.create_token(db, people.tech, people.tech, "sync", "write", 7)
    assert refused_fields(refused) == {"name"}
    tokens.create_token(db, people.review, people.review, "sync", "read", 7)  # another person's: fine


# --- authenticated, expired, revoked -----------------------------------------------------------


def test_a_token_authenticates_as_its_user(db: Database, people: People) -> None:
    made = tokens.create_token(db, people.tech, people.tech, "bench", "write", 7)
    user, token = tokens.authenticate(db, made.plaintext)
    assert (user.username, user.role, token.id) == ("tech", "technician", made.token.id)


@pytest.mark.parametrize("text", ["", "not-a-token", "x" * 500])
def test_an_unknown_token_opens_nothing(db: Database, text: str) -> None:
    with pytest.raises(tokens.TokenRefused) as refused:
        tokens.authenticate(db, text)
    assert refused.value.token is None


def test_an_expired_token_is_refused(db: Database, people: People) -> None:
    made = tokens.create_token(db, people.tech, people.tech, "old", "read", 1)
    with db.transaction() as s:
        s.execute(
            update(ApiToken)
            .where(col(ApiToken.id) == made.token.id)
            .values(expires_at=utcnow() - timedelta(seconds=1))
        )
    with pytest.raises(tokens.TokenRefused, match="expired") as refused:
        tokens.authenticate(db, made.plaintext)
    assert refused.value.token is not None and refused.value.token.id == made.token.id


def test_a_revoked_token_is_refused_and_the_revocation_audited(db: Database, people: People) -> None:
    made = tokens.create_token(db, people.tech, people.tech, "lost tablet", "write", 30)
    tokens.revoke_token(db, people.tech, made.token.id or 0)
    tokens.revoke_token(db, people.tech, made.token.id or 0)  # again: nothing more happens
    with pytest.raises(tokens.TokenRefused, match="revoked"):
        tokens.authenticate(db, made.plaintext)
    assert len(audit_events(db, "api_token", made.token.id, "revoke")) == 1


def test_only_the_owner_or_an_admin_revokes_a_token(db: Database, people: People) -> None:
    made = tokens.create_token(db, people.tech, people.tech, "bench", "write", 30)
    with pytest.raises(NotFound):  # another person's token is not even named
        tokens.revoke_token(db, people.review, made.token.id or 0)
    tokens.revoke_token(db, people.admin, made.token.id or 0)
    assert stored(db, made.token.id or 0).revoked_at is not None


def test_a_deactivated_users_tokens_are_refused(db: Database, people: People) -> None:
    made = tokens.create_token(db, people.tech, people.tech, "bench", "write", 30)
    users.set_active(db, people.admin, people.tech.id or 0, False, "Left the laboratory in November")
    with pytest.raises(tokens.TokenRefused, match="not active"):
        tokens.authenticate(db, made.plaintext)


# --- every use logged ---------------------------------------------------------------------------


def test_every_use_is_logged_with_its_answer(app_client: TestClient, db: Database, people: People) -> None:
    made = tokens.create_token(db, people.tech, people.tech, "bench tablet", "read", 30)
    assert app_client.get("/api/v1/me", headers=bearer(made.plaintext)).status_code == 200
    assert app_client.get("/api/v1/jobs/999", headers=bearer(made.plaintext)).status_code == 404
    logged = uses(db, made.token.id or 0)
    assert [(u.method, u.path, u.status) for u in logged] == [
        ("GET", "/api/v1/me", 200),
        ("GET", "/api/v1/jobs/999", 404),
    ]
    assert stored(db, made.token.id or 0).last_used_at == logged[-1].at
    found = tokens.user_tokens(db, people.tech.id or 0)
    assert [(use.path, name) for use, name in found.uses] == [
        ("/api/v1/jobs/999", "bench tablet"),  # newest first, with the token's name
        ("/api/v1/me", "bench tablet"),
    ]
    assert found.tokens[0].uses == 2


def test_a_refused_use_of_a_revoked_token_is_logged_too(
    app_client: TestClient, db: Database, people: People
) -> None:
    made = tokens.create_token(db, people.tech, people.tech, "lost tablet", "read", 30)
    tokens.revoke_token(db, people.tech, made.token.id or 0)
    reply = app_client.get("/api/v1/me", headers=bearer(made.plaintext))
    assert reply.status_code == 401
    # RFC 6750 section 3.1: an invalid token gets error="invalid_token"
    assert 'error="invalid_token"' in reply.headers["www-authenticate"]
    assert [(u.path, u.status) for u in uses(db, made.token.id or 0)] == [("/api/v1/me", 401)]


def test_a_use_is_not_an_audit_event(app_client: TestClient, db: Database, people: People) -> None:
    made = tokens.create_token(db, people.tech, people.tech, "bench", "read", 30)
    with db.session() as s:
        before = len(list(s.exec(select(AuditEvent))))
    app_client.get("/api/v1/me", headers=bearer(made.plaintext))
    with db.session() as s:
        assert len(list(s.exec(select(AuditEvent)))) == before  # a use changes nothing (the brief)


# --- the command line ---------------------------------------------------------------------------


def test_create_token_prints_a_token_as_its_last_word(
    tmp_path: Path, database_url: str, app_client: TestClient, db: Database
) -> None:
    done = claybench(
        "create-token",
        "review",
        "--name",
        "lims bridge",
        "--scope",
        "write",
        "--days",
        "10",
        env={"DATABASE_URL": database_url, "CLAYBENCH_DATA_DIR": str(tmp_path)},
    )
    assert done.returncode == 0, done.stderr
    token = done.stdout.split()[-1]  # DESIGN.md section 7: the token is the last word
    reply = app_client.get("/api/v1/me", headers=bearer(token))
    assert reply.status_code == 200, reply.text
    me = reply.json()
    assert (me["username"], me["role"]) == ("review", "reviewer")
    assert (me["token"]["name"], me["token"]["scope"]) == ("lims bridge", "write")
    with db.session() as s:
        row = s.exec(select(ApiToken)).one()
    assert row.expires_at - row.created_at == timedelta(days=10)
    assert (audit_events(db, "api_token", row.id, "create")[0].actor) == "system"  # the operator


def test_create_token_refuses_an_unknown_user_and_exits_2(tmp_path: Path, database_url: str) -> None:
    env = {"DATABASE_URL": database_url, "CLAYBENCH_DATA_DIR": str(tmp_path)}
    done = claybench("create-token", "nobody", "--name", "x", env=env)
    assert done.returncode == 2 and done.stdout == ""  # nothing that looks like a token is printed
    assert "nobody" in done.stderr


# --- the person's own page ----------------------------------------------------------------------


def test_the_tokens_page_makes_a_token_shown_once_and_revokes_it(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "tech", PASSWORD["tech"])
    page = app_client.get("/account/tokens")
    assert page.status_code == 200 and page.template.name == "pages/account_tokens.html"  # type: ignore[attr-defined]

    made = post_form(
        app_client,
        "/account/tokens",
        "/account/tokens",
        {"name": "my script", "scope": "write", "days": "30"},
    )
    assert made.status_code == 200, made.text
    new = made.context["new_token"]  # type: ignore[attr-defined]
    assert new.plaintext in made.text
    assert app_client.get("/api/v1/me", headers=bearer(new.plaintext)).json()["token"]["name"] == "my script"

    again = app_client.get("/account/tokens")
    assert new.plaintext not in again.text  # shown once
    row = again.context["found"].tokens[0]  # type: ignore[attr-defined]
    assert (row.token.name, row.state, row.uses) == ("my script", "active", 1)
    assert "GET /api/v1/me" in again.text  # the use, on the person's page

    revoked = post_form(
        app_client, "/account/tokens", f"/account/tokens/{row.token.id}/revoke", {}, follow_redirects=False
    )
    assert revoked.status_code == 303
    assert app_client.get("/api/v1/me", headers=bearer(new.plaintext)).status_code == 401


def test_the_tokens_page_shows_a_refused_field_beside_it(app_client: TestClient) -> None:
    sign_in(app_client, "tech", PASSWORD["tech"])
    reply = post_form(
        app_client, "/account/tokens", "/account/tokens", {"name": "", "scope": "write", "days": "30"}
    )
    assert reply.status_code == 422
    assert set(reply.context["errors"]) == {"name"}  # type: ignore[attr-defined]


def test_a_person_sees_only_their_own_tokens(app_client: TestClient, db: Database, people: People) -> None:
    theirs = tokens.create_token(db, people.review, people.review, "reviewer's", "read", 7)
    sign_in(app_client, "tech", PASSWORD["tech"])
    page = app_client.get("/account/tokens")
    assert page.context["found"].tokens == []  # type: ignore[attr-defined]
    refused = post_form(app_client, "/account/tokens", f"/account/tokens/{theirs.token.id}/revoke", {})
    assert refused.status_code == 404
    assert stored(db, theirs.token.id or 0).revoked_at is None


def test_the_tokens_page_needs_a_sign_in(app_client: TestClient) -> None:
    reply = app_client.get("/account/tokens", follow_redirects=False)
    assert reply.status_code == 303 and reply.headers["location"].startswith("/signin")
