"""Managing people in the app: the admin adds users, changes roles, deactivates and resets
passwords; a deactivated user is signed out and cannot sign in, and their signatures stand."""

from __future__ import annotations

from fastapi.testclient import TestClient
from sqlmodel import select

from server.db.session import Database
from server.db.tables import User
from tests.conftest import PASSWORDS, People
from tests.support.http import csrf_of, post_form, sign_in
from tests.workflow.flows import Lab


def _user(db: Database, username: str) -> User | None:
    with db.session() as s:
        return s.exec(select(User).where(User.username == username)).first()


def test_the_admin_adds_a_user_and_a_bad_field_is_named_with_nothing_stored(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "admin", PASSWORDS["admin"])
    listing = app_client.get("/admin/users")
    assert [u.username for u in listing.context["people"]] == ["admin", "review", "review2", "tech"]  # type: ignore[attr-defined]
    fields = {"username": "soil.tech", "full_name": "Soil Tech", "role": "technician"}
    short = post_form(app_client, "/admin/users", "/admin/users", {**fields, "password": "short"})
    assert short.status_code == 422 and short.context["errors"]["password"].startswith(
        "password must be at least"
    )  # type: ignore[attr-defined]
    assert 'value="soil.tech"' in short.text and _user(db, "soil.tech") is None
    made = post_form(
        app_client,
        "/admin/users",
        "/admin/users",
        {**fields, "password": "a-long-password-1"},
        follow_redirects=False,
    )
    assert made.status_code == 303
    created = _user(db, "soil.tech")
    assert created is not None and made.headers["location"] == f"/admin/users/{created.id}"
    page = app_client.get(made.headers["location"])
    assert [e.action for e in page.context["events"]] == ["create"]  # type: ignore[attr-defined]


def test_deactivating_signs_the_person_out_keeps_them_out_and_keeps_their_signatures(
    app_client: TestClient, second_client: TestClient, db: Database, people: People
) -> None:
    signed = Lab(db, people.admin, "AD-1").approved(people.tech, people.review)
    sign_in(second_client, "review", PASSWORDS["review"])
    assert second_client.get("/review").status_code == 200
    sign_in(app_client, "admin", PASSWORDS["admin"])
    path = f"/admin/users/{people.review.id}"
    no_reason = post_form(app_client, path, f"{path}/active", {"active": "no", "reason": ""})
    assert no_reason.status_code == 422 and "say why" in no_reason.text
    done = post_form(
        app_client,
        path,
        f"{path}/active",
        {"active": "no", "reason": "left the laboratory"},
        follow_redirects=False,
    )
    assert done.status_code == 303 and done.headers["location"] == f"{path}?done=deactivated"
    # The open session ends at once, and signing in again is refused.
    assert second_client.get("/review", follow_redirects=False).status_code == 303
    page = second_client.get("/signin")
    refused = second_client.post(
        "/signin", data={"username": "review", "password": PASSWORDS["review"], "csrf_token": csrf_of(page)}
    )
    assert refused.status_code == 400 and "not active" in refused.text
    # The signature stands, and says the account has since been deactivated.
    review_page = app_client.get(f"/review/{signed}")
    assert (
        "Signed by Review Person (reviewer), account since deactivated; the signature stands"
        in review_page.text
    )


def test_a_password_reset_ends_the_persons_sessions(
    app_client: TestClient, second_client: TestClient, db: Database, people: People
) -> None:
    sign_in(second_client, "tech", PASSWORDS["tech"])
    sign_in(app_client, "admin", PASSWORDS["admin"])
    path = f"/admin/users/{people.tech.id}"
    done = post_form(
        app_client,
        path,
        f"{path}/password",
        {"password": "a-fresh-password-9", "reason": "forgotten"},
        follow_redirects=False,
    )
    assert done.status_code == 303
    assert second_client.get("/jobs", follow_redirects=False).status_code == 303  # signed out
    sign_in(second_client, "tech", "a-fresh-password-9")


def test_a_role_change_takes_effect_on_the_next_page(
    app_client: TestClient, second_client: TestClient, db: Database, people: People
) -> None:
    sign_in(second_client, "tech", PASSWORDS["tech"])
    assert second_client.get("/review").status_code == 403
    sign_in(app_client, "admin", PASSWORDS["admin"])
    path = f"/admin/users/{people.tech.id}"
    post_form(app_client, path, path, {"full_name": "Tech Person", "role": "reviewer", "reason": "promoted"})
    assert second_client.get("/review").status_code == 200
    last = app_client.get(path).context["events"][-1]  # type: ignore[attr-defined]
    assert (last.action, last.after["role"], last.reason) == ("role", "reviewer", "promoted")


def test_only_an_admin_sees_or_uses_the_users_pages(
    app_client: TestClient, db: Database, people: People
) -> None:
    sign_in(app_client, "review", PASSWORDS["review"])
    assert "/admin/users" not in app_client.get("/review").text
    assert app_client.get("/admin/users").status_code == 403
    token = csrf_of(app_client.get("/review"))
    reply = app_client.post(
        f"/admin/users/{people.tech.id}/active", data={"active": "no", "reason": "x", "csrf_token": token}
    )
    assert reply.status_code == 403 and _user(db, "tech").active  # type: ignore[union-attr]
    app_client.cookies.clear()
    sign_in(app_client, "admin", PASSWORDS["admin"])
    assert 'href="/admin/users"' in app_client.get("/jobs").text
