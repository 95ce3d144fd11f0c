"""People: created, renamed, given a role, deactivated, their password reset, all by an admin,
all audited, and a deactivated person's past signatures left standing."""

from __future__ import annotations

import pytest
from sqlmodel import select

from server.db.session import Database
from server.db.tables import AuditEvent, User, UserSession
from server.services import sessions, users
from server.services.errors import Conflict, Forbidden, Invalid
from tests.conftest import PASSWORDS, People
from tests.workflow.flows import Lab, load


def _ended(db: Database, session_id: int | None) -> str | None:
    """Why the session ended, or None while it is live."""
    with db.session() as s:
        row = s.get(UserSession, session_id)
    assert row is not None
    return row.end_reason if row.ended_at is not None else None


def _user(db: Database, user_id: int | None) -> User:
    with db.session() as s:
        found = s.get(User, user_id)
    assert found is not None
    return found


def _events(db: Database, user_id: int | None) -> list[AuditEvent]:
    with db.session() as s:
        return list(
            s.exec(select(AuditEvent).where(AuditEvent.entity == "user", AuditEvent.entity_id == user_id))
        )


def test_an_admin_adds_a_user_who_can_then_sign_in(db: Database, people: People) -> None:
    made = users.create_user(db, people.admin, " New.Tech ", "New Tech", "technician", "a-long-password-1")
    assert made.username == "new.tech"
    assert users.authenticate(db, "new.tech", "a-long-password-1") is not None
    (event,) = _events(db, made.id)
    assert (event.action, event.actor_id) == ("create", people.admin.id)
    assert "password" not in str(event.after) and "hash" not in str(event.after)


def test_only_an_admin_adds_or_changes_users(db: Database, people: People) -> None:
    with pytest.raises(Forbidden):
        users.create_user(db, people.review, "sneaky", "Sneaky", "admin", "a-long-password-1")
    with pytest.raises(Forbidden):
        users.update_user(db, people.review, people.tech.id or 0, full_name="X", role="admin")
    with pytest.raises(Forbidden):
        users.set_active(db, people.tech, people.review.id or 0, False, "no reason")
    with pytest.raises(Forbidden):
        users.reset_password(db, people.review2, people.review.id or 0, "a-long-password-2")


def test_a_username_is_taken_once(db: Database, people: People) -> None:
    with pytest.raises(Conflict):
        users.create_user(db, people.admin, "TECH", "Another", "technician", "a-long-password-1")


def test_changing_a_role_is_audited_with_before_after_and_why(db: Database, people: People) -> None:
    users.update_user(
        db, people.admin, people.tech.id or 0, full_name="Tech Person", role="reviewer", reason="promoted"
    )
    assert _user(db, people.tech.id).role == "reviewer"
    event = _events(db, people.tech.id)[-1]
    assert (event.action, event.before, event.after, event.reason) == (
        "role",
        {"full_name": "Tech Person", "role": "technician"},
        {"full_name": "Tech Person", "role": "reviewer"},
        "promoted",
    )


def test_a_bad_name_or_role_is_refused_at_its_field(db: Database, people: People) -> None:
    for fields, loc in (
        (dict(full_name="  ", role="reviewer"), "full_name"),
        (dict(full_name="A", role="boss"), "role"),
    ):
        with pytest.raises(Invalid) as refused:
            users.update_user(db, people.admin, people.tech.id or 0, **fields)  # type: ignore[arg-type]
        assert refused.value.errors[0].loc == (loc,)
    assert _user(db, people.tech.id).role == "technician"


def test_deactivating_stops_sign_in_ends_sessions_and_keeps_past_signatures(
    db: Database, people: People
) -> None:
    lab = Lab(db, people.admin, "US-1")
    signed = lab.approved(people.tech, people.review)
    _, open_session = sessions.start(db, people.review, "192.0.2.7", "bench tablet")
    users.set_active(db, people.admin, people.review.id or 0, False, "left the laboratory")
    after = _user(db, people.review.id)
    assert not after.active and _ended(db, open_session.id) == "deactivated"
    assert users.authenticate(db, "review", PASSWORDS["review"]) is None
    test = load(db, signed)
    assert (test.status, test.approved_by_id, test.approver_role) == (
        "approved",
        people.review.id,
        "reviewer",
    )
    assert _events(db, people.review.id)[-1].reason == "left the laboratory"
    users.set_active(db, people.admin, people.review.id or 0, True)
    assert users.authenticate(db, "review", PASSWORDS["review"]) is not None


def test_deactivation_needs_a_reason_and_never_locks_the_laboratory_out(db: Database, people: People) -> None:
    with pytest.raises(Invalid) as refused:
        users.set_active(db, people.admin, people.tech.id or 0, False, "")
    assert refused.value.errors[0].loc == ("reason",)
    with pytest.raises(Invalid, match="your own account"):
        users.set_active(db, people.admin, people.admin.id or 0, False, "leaving")
    with pytest.raises(Invalid, match="last active admin"):
        users.update_user(db, people.admin, people.admin.id or 0, full_name="Admin Person", role="reviewer")
    second = users.create_user(db, people.admin, "admin2", "Second Admin", "admin", "a-long-password-1")
    users.update_user(db, second, people.admin.id or 0, full_name="Admin Person", role="reviewer")
    assert _user(db, people.admin.id).role == "reviewer"


def test_a_password_reset_changes_the_password_ends_sessions_and_records_no_secret(
    db: Database, people: People
) -> None:
    _, open_session = sessions.start(db, people.tech, "192.0.2.7", "bench tablet")
    with pytest.raises(Invalid):
        users.reset_password(db, people.admin, people.tech.id or 0, "short")
    users.reset_password(db, people.admin, people.tech.id or 0, "a-new-long-password", "forgotten")
    after = _user(db, people.tech.id)
    assert _ended(db, open_session.id) == "password reset"
    assert users.authenticate(db, "tech", PASSWORDS["tech"]) is None
    assert users.authenticate(db, "tech", "a-new-long-password") is not None
    event = _events(db, people.tech.id)[-1]
    assert (event.action, event.after, event.reason) == (
        "password",
        {"password": "reset", "sessions_ended": 1},
        "forgotten",
    )
    assert after.password_hash not in str(event.before) + str(event.after)
