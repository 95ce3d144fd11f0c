"""The admins' access page: every live session and API token, each ended from there, audited."""

from __future__ import annotations

from fastapi.testclient import TestClient
from sqlmodel import select

from server.db.session import Database
from server.db.tables import AuditEvent, UserSession
from server.services import tokens
from tests.conftest import PASSWORDS, People
from tests.support.http import post_form, sign_in


def _signed_out(client: TestClient) -> bool:
    reply = client.get("/jobs", follow_redirects=False)
    return reply.status_code == 303 and reply.headers["location"].startswith("/signin")


def test_an_admin_sees_and_ends_someone_elses_session(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "admin", PASSWORDS["admin"])
    with TestClient(
        app_client.app, base_url="http://testserver", headers={"User-Agent": "bench tablet 3"}
    ) as tablet:
        sign_in(tablet, "tech", PASSWORDS["tech"])
        with db.session() as s:
            (row,) = s.exec(select(UserSession).where(UserSession.user_id == people.tech.id))
        page = app_client.get("/admin/access")
        assert (
            page.status_code == 200
            and f'id="session-{row.id}"' in page.text
            and "bench tablet 3" in page.text
        )
        done = post_form(
            app_client, "/admin/access", f"/admin/sessions/{row.id}/end", {}, follow_redirects=False
        )
        assert (done.status_code, done.headers["location"]) == (303, "/admin/access?done=ended")
        assert _signed_out(tablet)
    assert f'id="session-{row.id}"' not in app_client.get("/admin/access").text
    with db.session() as s:
        event = s.exec(
            select(AuditEvent).where(AuditEvent.entity == "session", AuditEvent.action == "end")
        ).one()
    assert (event.actor, event.entity_id) == ("admin", row.id)


def test_an_admin_revokes_someone_elses_api_token(
    app_client: TestClient, db: Database, people: People
) -> None:
    made = tokens.create_token(db, people.tech, people.tech, "nightly export", "read", 30)
    sign_in(app_client, "admin", PASSWORDS["admin"])
    assert "nightly export" in app_client.get("/admin/access").text
    post_form(app_client, "/admin/access", f"/admin/tokens/{made.token.id}/revoke", {})
    assert "nightly export" not in app_client.get("/admin/access").text
    refused = app_client.get("/api/v1/jobs", headers={"Authorization": f"Bearer {made.plaintext}"})
    assert refused.status_code == 401


def test_the_access_page_is_for_admins_only(app_client: TestClient, db: Database, people: People) -> None:
    sign_in(app_client, "review", PASSWORDS["review"])
    assert app_client.get("/admin/access").status_code == 403
    with db.session() as s:
        mine = s.exec(select(UserSession).where(UserSession.user_id == people.review.id)).one()
    reply = post_form(app_client, "/jobs", f"/admin/sessions/{mine.id}/end", {})
    assert reply.status_code == 403 and not _signed_out(app_client)
