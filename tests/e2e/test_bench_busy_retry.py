"""A busy database loses nothing typed at the bench: while another process holds SQLite's write
lock past the write budget the server answers the autosave 503 with Retry-After, the page says
calmly that it will retry and keeps the values, waits as told, and saves them exactly as typed
once the lock is gone."""

from __future__ import annotations

import sqlite3
import time
from typing import Any

from playwright.sync_api import Page, Request, expect
from sqlalchemy.engine import make_url

from server.db.session import Database
from tests.conftest import PASSWORDS, People
from tests.e2e.conftest import sign_in
from tests.e2e.test_bench_entry import expect_values, type_in, wait_until_saved
from tests.e2e.test_bench_nothing_lost import STORED, TYPED, _readings
from tests.support.records import audit_events
from tests.support.scenario import small_job

BUDGET_S = 1.0  # the live server's write budget for this test (the app's is WRITE_BUDGET_S)


def _saves_seen(page: Page) -> list[Request]:
    """Every autosave the page sends, finished (with the browser's own timing), in order."""
    seen: list[Request] = []

    def note(request: Request) -> None:
        if request.method == "POST" and request.url.endswith("/fields"):
            seen.append(request)

    page.on("requestfinished", note)
    return seen


def _status(request: Request) -> tuple[int, dict[str, Any]]:
    response = request.response()
    assert response is not None
    return response.status, response.headers


def _wait_for_busy_answers(page: Page, saves: list[Request], count: int, timeout_s: float = 20.0) -> None:
    deadline = time.monotonic() + timeout_s
    while sum(_status(r)[0] == 503 for r in saves) < count:
        assert time.monotonic() < deadline, f"fewer than {count} busy answers in {timeout_s:g} s"
        page.wait_for_timeout(100)  # events are taken in while the page is waited on


def test_values_typed_while_the_database_is_locked_are_kept_retried_and_saved_as_typed(
    page: Page, live_db: Database, live_people: People
) -> None:
    job = small_job(live_db, live_people.admin)
    live_db.write_budget_s = BUDGET_S
    sign_in(page, "tech", PASSWORDS["tech"])
    page.goto(f"/tests/{job.test_id}")
    saves = _saves_seen(page)

    other = sqlite3.connect(make_url(live_db.url).database or "", isolation_level=None)
    try:
        other.execute("BEGIN IMMEDIATE")  # another process writing, for longer than the budget
        type_in(page, TYPED)
        state = page.locator("#save-state")
        expect(state).to_contain_text("busy — will retry", timeout=15_000)
        expect(state).to_have_attribute("data-state", "busy")
        expect(page.locator("#net")).to_be_hidden()  # busy is not "no connection"
        _wait_for_busy_answers(page, saves, 2)  # retried while still locked, and told again
        expect_values(page, TYPED)  # nothing typed was dropped from the screen ...
        kept = page.evaluate("Object.keys(localStorage).filter(k => k.startsWith('claybench.bench.')).length")
        assert kept == 1  # ... nor from the tablet's storage (static/bench.js keeps it per person)
        assert _readings(live_db, job.test_id) == {}
    finally:
        other.rollback()
        other.close()

    wait_until_saved(page)
    assert _readings(live_db, job.test_id) == STORED  # exactly as typed (S7 point 1)
    events = audit_events(live_db, "lab_test", job.test_id, "readings")
    assert events and {e.actor for e in events} == {"tech"}

    answers = [_status(r) for r in saves]
    busy = [i for i, (status, _) in enumerate(answers) if status == 503]
    assert answers[-1][0] == 200
    assert {status for status, _ in answers} == {200, 503}  # never a 500, never a refusal
    for i in busy:
        assert answers[i][1].get("retry-after") == "1"  # RFC 9110 section 10.2.3
        # The next save waited as told: sent no sooner than Retry-After after the busy answer ended
        # (the browser's own request timing, ms since the epoch; 50 ms for the timer's grain,
        # common practice).
        ended = saves[i].timing["startTime"] + saves[i].timing["responseEnd"]
        assert saves[i + 1].timing["startTime"] >= ended + 1000 - 50
