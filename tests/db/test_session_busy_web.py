"""Concurrent bench saves through the real app: twenty at once all answer and are all stored; a
write lock held past the budget is answered 503 with Retry-After, in the form each caller
expects, with nothing stored, and the same save goes through once the lock is gone."""

from __future__ import annotations

import sqlite3
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlalchemy.engine import make_url

from server.config import Settings
from server.db.session import Database
from server.db.tables import LabTest, User
from server.main import create_app
from server.services import jobs, samples, tokens
from tests.conftest import PASSWORDS, People
from tests.support.http import csrf_of, sign_in
from tests.support.records import audit_events

FIELD = "water_content.determinations.0.tare_g"
SAVERS = 20  # the outside probe's count of concurrent bench saves (issue S10 point 5)
ROUNDS = 5
PROBLEM = "application/problem+json"  # RFC 9457 section 3
BUDGET_S = 0.5  # a short write budget keeps the test quick; the app's is WRITE_BUDGET_S

sqlite_only = pytest.mark.parametrize("backend", ["sqlite"])


def _sheets(db: Database, admin: User, n: int) -> list[int]:
    """One job, one borehole, ``n`` samples with an Atterberg test each: the tests' ids."""
    client = jobs.create_client(db, admin, "Busy Bench Ltd")
    job = jobs.create_job(db, admin, client.id or 0, "T-200", "Concurrent saves", "Test site")
    location = samples.add_location(db, admin, job.id or 0, "BH1")
    ids = [
        samples.add_sample(db, admin, location.id or 0, f"BH1-S{i + 1}", i + 1.0, i + 1.45, "U100").id or 0
        for i in range(n)
    ]
    return [t.id or 0 for t in jobs.request_tests(db, admin, ids, ["atterberg"])]


def _stored(db: Database, test_id: int) -> tuple[int, Any]:
    """The test's version and the saved field's value."""
    with db.session() as s:
        test = s.get(LabTest, test_id)
    assert test is not None
    readings = test.readings or {}
    return test.version, readings.get("water_content", {}).get("determinations", [{}])[0].get("tare_g")


def _save(client: TestClient, csrf: str, test_id: int, value: str, base: str) -> Any:
    """One field saved as static/bench.js sends it."""
    return client.post(
        f"/tests/{test_id}/fields",
        json={"changes": [{"path": FIELD, "value": value, "base": base}]},
        headers={"X-CSRF-Token": csrf, "HX-Request": "true"},
    )


def test_twenty_bench_saves_at_once_all_answer_200_and_every_one_is_stored(
    app_client: TestClient, db: Database, people: People
) -> None:
    ids = _sheets(db, people.admin, SAVERS)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    csrf = csrf_of(app_client.get(f"/tests/{ids[0]}"))
    start = threading.Barrier(SAVERS)
    answers: dict[int, list[int]] = {i: [] for i in ids}
    last: dict[int, str] = {}
    errors: list[BaseException] = []

    def saver(test_id: int) -> None:
        # Its own client (the same person on several tablets: the session's cookie, its own calls).
        with TestClient(app_client.app, base_url="http://testserver", cookies=app_client.cookies) as tablet:
            try:
                start.wait(timeout=20)
                base = ""
                for n in range(ROUNDS):
                    value = f"10.{n:02d}"
                    reply = _save(tablet, csrf, test_id, value, base)
                    answers[test_id].append(reply.status_code)
                    if reply.status_code == 200:
                        base = last[test_id] = reply.json()["values"][FIELD]
            except BaseException as exc:  # noqa: B036 - collected and asserted on below
                errors.append(exc)

    threads = [threading.Thread(target=saver, args=(i,)) for i in ids]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join(timeout=120)
    assert not any(t.is_alive() for t in threads), "a saver never finished"
    assert errors == []
    assert {i: set(a) for i, a in answers.items()} == {i: {200} for i in ids}  # no 5xx, no 503
    for test_id in ids:
        # every acknowledged save stored: one version step and one audit event each, the last value kept
        assert _stored(db, test_id) == (1 + ROUNDS, last[test_id])
        assert last[test_id] == f"10.{ROUNDS - 1:02d}"  # kept as typed (S7 point 1)
        assert len(audit_events(db, "lab_test", test_id, "readings")) == ROUNDS


@contextmanager
def _another_process_writing(url: str) -> Iterator[None]:
    """SQLite's write lock held through a connection of its own (the CLI, a worker, a probe)."""
    other = sqlite3.connect(make_url(url).database or "", isolation_level=None)
    other.execute("BEGIN IMMEDIATE")
    try:
        yield
    finally:
        other.rollback()
        other.close()


@pytest.fixture
def busy_client(settings: Settings, database_url: str) -> Iterator[tuple[TestClient, Database]]:
    """The app on a database with a short write budget, signed in as the technician."""
    db = Database(database_url, write_budget_s=BUDGET_S)
    with TestClient(create_app(settings, db), base_url="http://testserver") as client:
        sign_in(client, "tech", PASSWORDS["tech"])
        yield client, db
    db.dispose()


def _caller(kind: str, client: TestClient, db: Database, people: People, test_id: int) -> Any:
    """A function that saves the field the way this kind of caller sends it (what it needs from
    the database, a page's CSRF token or an API token, is fetched now, before any lock is taken)."""
    csrf = csrf_of(client.get(f"/tests/{test_id}"))
    plaintext = tokens.create_token(db, people.tech, people.tech, "busy test", "write", 7).plaintext

    def call(value: str, version: int) -> Any:
        form = {"csrf_token": csrf, "version": str(version), f"r.{FIELD}": value}
        if kind == "autosave":
            return _save(client, csrf, test_id, value, "")
        if kind == "htmx":
            return client.post(f"/tests/{test_id}/readings", data=form, headers={"HX-Request": "true"})
        if kind == "page":
            return client.post(f"/tests/{test_id}/readings", data=form, follow_redirects=False)
        readings = {"water_content": {"determinations": [{"tare_g": value}]}}
        return client.put(
            f"/api/v1/tests/{test_id}/readings",
            json={"version": version, "readings": readings},
            headers={"Authorization": f"Bearer {plaintext}"},  # RFC 6750 section 2.1
        )

    return call


@sqlite_only
@pytest.mark.parametrize("kind", ["autosave", "htmx", "page", "api"])
def test_a_save_while_the_write_lock_is_held_past_the_budget_answers_503_with_retry_after(
    busy_client: tuple[TestClient, Database], database_url: str, people: People, kind: str
) -> None:
    client, db = busy_client
    (test_id,) = _sheets(db, people.admin, 1)
    save = _caller(kind, client, db, people, test_id)
    with _another_process_writing(database_url):
        reply = save("10.50", 1)
    assert reply.status_code == 503  # RFC 9110 section 15.6.4: temporarily unable, try again
    assert reply.headers["retry-after"] == "1"  # RFC 9110 section 10.2.3: delay in seconds
    assert "locked" not in reply.text  # the driver's words never reach the person
    media = reply.headers["content-type"].split(";")[0]
    if kind == "autosave":
        assert media == "application/json"
        assert reply.json()["busy"] is True and reply.json()["retry_after_s"] == 1
    elif kind == "api":
        assert media == PROBLEM
        problem = reply.json()
        assert (problem["status"], problem["title"]) == (503, "Service Unavailable")  # RFC 9110 phrase
        assert problem["instance"] == f"/api/v1/tests/{test_id}/readings"
    else:
        assert media == "text/html"
        assert "nothing was stored" in reply.text or "was not stored" in reply.text
        assert ("<html" in reply.text) == (kind == "page")  # htmx gets a fragment, a page a page
    assert _stored(db, test_id) == (1, None)  # nothing stored ...
    assert audit_events(db, "lab_test", test_id, "readings") == []  # ... and nothing audited

    again = save("10.50", 1)  # the same save once the lock is gone
    assert again.status_code in (200, 303)
    assert _stored(db, test_id) == (2, "10.50")  # stored as typed
    assert len(audit_events(db, "lab_test", test_id, "readings")) == 1
