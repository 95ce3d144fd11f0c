"""A bench save reads the typist's session in the statement that locks the test (one round trip
less on the hottest path), and every case but the usual one goes the ordinary way: a session due
its touch is touched, an ended or deactivated one refused with nothing stored, a missing test 404."""

from __future__ import annotations

from datetime import timedelta

from fastapi.testclient import TestClient
from httpx import Response
from sqlmodel import select

from server.db.session import Database
from server.db.tables import LabTest, User, UserSession, utcnow
from tests.conftest import PASSWORDS, People
from tests.support.http import csrf_of, sign_in
from tests.support.scenario import small_job
from tests.support.statements import statements_sent

W1 = "water_content.determinations.0.wet_tare_g"


def _version(db: Database, test_id: int) -> int:
    with db.session() as s:
        test = s.get(LabTest, test_id)
        assert test is not None
        return test.version


def _open(client: TestClient, test_id: int) -> str:
    sign_in(client, "tech", PASSWORDS["tech"])
    return csrf_of(client.get(f"/tests/{test_id}"))


def _save(client: TestClient, test_id: int, token: str, value: str) -> Response:
    changes = [{"path": W1, "value": value}]
    return client.post(
        f"/tests/{test_id}/fields",
        json={"changes": changes},
        headers={"X-CSRF-Token": token},
        follow_redirects=False,
    )


def _tech_session(db: Database) -> UserSession:
    with db.session() as s:
        row = s.exec(
            select(UserSession).join(User).where(User.username == "tech", UserSession.ended_at == None)  # noqa: E711
        ).one()
    return row


def _set(db: Database, model: type[UserSession] | type[User], row_id: int, **values: object) -> None:
    with db.transaction() as s:
        row = s.get(model, row_id)
        assert row is not None
        for key, value in values.items():
            setattr(row, key, value)
        s.add(row)


def test_the_session_is_read_in_the_statement_that_locks_the_test(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    token = _open(app_client, job.test_id)
    with statements_sent(db) as sent:
        answer = _save(app_client, job.test_id, token, "31.5")
    assert answer.status_code == 200, answer.text
    reading_session = [s for s in sent if "user_session" in s]
    assert len(reading_session) == 1, sent
    assert "lab_test" in reading_session[0]


def test_a_session_due_its_touch_is_touched_and_the_save_stored(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    token = _open(app_client, job.test_id)
    row = _tech_session(db)
    stale = utcnow() - timedelta(minutes=5)
    _set(db, UserSession, row.id or 0, last_seen_at=stale)
    before = _version(db, job.test_id)
    answer = _save(app_client, job.test_id, token, "31.6")
    assert answer.status_code == 200, answer.text
    assert _version(db, job.test_id) == before + 1
    assert _tech_session(db).last_seen_at > stale + timedelta(minutes=4)


def test_an_ended_session_saves_nothing(app_client: TestClient, db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    token = _open(app_client, job.test_id)
    _set(db, UserSession, _tech_session(db).id or 0, ended_at=utcnow(), end_reason="signed-out")
    before = _version(db, job.test_id)
    answer = _save(app_client, job.test_id, token, "31.7")
    assert answer.status_code == 303  # to the sign-in page (server/main.py), answer.text
    assert _version(db, job.test_id) == before


def test_a_deactivated_person_saves_nothing(app_client: TestClient, db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    token = _open(app_client, job.test_id)
    _set(db, User, people.tech.id or 0, active=False)
    before = _version(db, job.test_id)
    answer = _save(app_client, job.test_id, token, "31.8")
    assert answer.status_code == 303  # to the sign-in page (server/main.py), answer.text
    assert _version(db, job.test_id) == before


def test_a_missing_test_is_404_for_a_signed_in_person_and_a_sign_in_for_nobody(
    app_client: TestClient, second_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    token = _open(app_client, job.test_id)
    assert _save(app_client, job.test_id + 1000, token, "31.9").status_code == 404
    _set(db, UserSession, _tech_session(db).id or 0, ended_at=utcnow(), end_reason="signed-out")
    assert (
        _save(app_client, job.test_id + 1000, token, "31.9").status_code == 303
    )  # to the sign-in page (server/main.py)
