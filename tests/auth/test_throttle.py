"""Throttling of guesses, on a clock the test moves: growing waits per account and per address
at sign-in, the same answer for unknown and known names, every refusal in the audit trail and
on the admins' access page, and the same throttle on share links and API tokens."""

from __future__ import annotations

from collections.abc import Iterator

import limits.storage.memory
import pytest
from fastapi.testclient import TestClient
from sqlmodel import col, select

from server.auth.throttle import Throttle, Throttles
from server.config import Settings
from server.db.session import Database
from server.db.tables import AuditEvent
from server.services import links, tokens
from tests.conftest import PASSWORDS, People
from tests.support.http import csrf_of, sign_in
from tests.support.scenario import small_job


class Clock:
    """Seconds since 1970 that only the test moves; stands in for the ``time`` module the
    ``limits`` memory storage reads (a library's clock, not our code)."""

    def __init__(self) -> None:
        self.now = 1_900_000_000.0

    def time(self) -> float:
        return self.now

    def advance(self, seconds: float) -> None:
        self.now += seconds


@pytest.fixture
def clock(monkeypatch: pytest.MonkeyPatch) -> Clock:
    found = Clock()
    monkeypatch.setattr(limits.storage.memory, "time", found)
    return found


@pytest.fixture
def client(app_client: TestClient, settings: Settings, clock: Clock) -> Iterator[TestClient]:
    """The app with its throttles counting on the test's clock."""
    app_client.app.state.throttles = Throttles.from_settings(settings, clock=clock.time)  # type: ignore[attr-defined]
    yield app_client


def _try(client: TestClient, username: str, password: str) -> tuple[int, str, str | None]:
    token = csrf_of(client.get("/signin"))
    reply = client.post(
        "/signin",
        data={"username": username, "password": password, "csrf_token": token, "next": "/jobs"},
        follow_redirects=False,
    )
    return reply.status_code, reply.text, reply.headers.get("retry-after")


def _refusals(db: Database) -> list[dict[str, str]]:
    with db.session() as s:
        query = select(AuditEvent).where(AuditEvent.entity == "sign-in").order_by(col(AuditEvent.id))
        events = s.exec(query).all()
    return [dict(e.after or {}) for e in events]


def test_the_waits_grow_with_each_tier_and_end(clock: Clock) -> None:
    throttle = Throttle("t", "3/minute;5/hour", clock=clock.time)
    for _ in range(3):
        throttle.fail("k")
    assert 59 <= throttle.wait("k") <= 60  # the minute tier, counted from the first failure
    clock.advance(61)
    assert throttle.wait("k") == 0
    throttle.fail("k")
    throttle.fail("k")
    assert 3400 < throttle.wait("k") <= 3600  # five in the hour: the lock lasts until they age out
    assert throttle.wait("other") == 0


def test_repeated_wrong_passwords_lock_the_account_even_for_the_right_one(
    client: TestClient, clock: Clock, db: Database, people: People
) -> None:
    for _ in range(5):  # Settings.signin_throttle_account: 5 a minute
        assert _try(client, "tech", "wrong-guess")[0] == 400
    status, text, retry = _try(client, "tech", PASSWORDS["tech"])
    assert status == 429 and "Too many failed sign-ins" in text and retry is not None and int(retry) <= 60
    assert "sid" not in client.cookies.get("claybench_session", "")
    clock.advance(61)
    sign_in(client, "tech", PASSWORDS["tech"])
    assert [r["why"] for r in _refusals(db)] == ["refused"] * 5 + ["throttled"]


def test_an_unknown_name_gets_the_same_answers_as_a_known_one(client: TestClient, db: Database) -> None:
    known = [_try(client, "tech", "wrong-guess") for _ in range(6)]
    unknown = [_try(client, "nobody-here", "wrong-guess") for _ in range(6)]
    assert [(s, r) for s, _, r in known] == [(s, r) for s, _, r in unknown]
    for (_, known_page, _), (_, unknown_page, _) in zip(known, unknown, strict=True):
        assert known_page.replace("tech", "?") == unknown_page.replace("nobody-here", "?")
    assert [r["username"] for r in _refusals(db)] == ["tech"] * 6 + ["nobody-here"] * 6


def test_many_names_tried_from_one_address_are_held_back(client: TestClient) -> None:
    for n in range(20):  # Settings.signin_throttle_address: 20 a minute
        assert _try(client, f"guess-{n}", "wrong-guess")[0] == 400
    assert _try(client, "admin", PASSWORDS["admin"])[0] == 429


def test_admins_see_refused_and_held_back_sign_ins(client: TestClient, clock: Clock) -> None:
    for _ in range(6):
        _try(client, "review", "wrong-guess")
    clock.advance(61)
    sign_in(client, "admin", PASSWORDS["admin"])
    page = client.get("/admin/access")
    assert page.status_code == 200
    assert page.text.count("held back") >= 2 and page.text.count("wrong name or password") == 5


def test_guessed_share_links_are_held_back_by_address(
    client: TestClient, clock: Clock, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    real = links.create_link(db, people.review, job.job_id, 7)
    assert client.get(f"/share/{real.token}").status_code == 200
    for n in range(20):  # Settings.token_throttle_address: 20 a minute
        assert client.get(f"/share/guess{n:040d}").status_code == 404
    held = client.get(f"/share/{real.token}")
    assert (
        held.status_code == 429 and "Too many unrecognised links" in held.text and held.headers["retry-after"]
    )
    clock.advance(61)
    assert client.get(f"/share/{real.token}").status_code == 200


def test_guessed_api_tokens_are_held_back_by_address(
    client: TestClient, clock: Clock, db: Database, people: People
) -> None:
    real = tokens.create_token(db, people.tech, people.tech, "bench script", "read", 7).plaintext
    for n in range(20):
        assert client.get("/api/v1/jobs", headers={"Authorization": f"Bearer guess{n}"}).status_code == 401
    held = client.get("/api/v1/jobs", headers={"Authorization": f"Bearer {real}"})
    assert held.status_code == 429 and held.headers["content-type"].startswith("application/problem+json")
    clock.advance(61)
    assert client.get("/api/v1/jobs", headers={"Authorization": f"Bearer {real}"}).status_code == 200
