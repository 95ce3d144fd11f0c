"""A real render worker process (`claybench worker`: polling on SQLite, procrastinate on
PostgreSQL) renders what the app queues while the page follows it; a worker killed in the
middle of a render leaves a failed render that a retry and the next worker finish."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import timedelta
from pathlib import Path

from fastapi.testclient import TestClient
from sqlmodel import select

from server.db.session import Database
from server.db.tables import Report, ReportRender, utcnow
from server.services import renders, workers
from server.tasks.queue import enqueue
from tests.conftest import PASSWORDS, People
from tests.reports.issued import two_approved_samples
from tests.support.http import post_form, sign_in

ROOT = Path(__file__).resolve().parents[2]
BASE = "http://testserver"
WAIT_S = 90.0  # a loaded CI machine renders two samples in a few seconds; generous on purpose


@contextmanager
def worker_process(database_url: str, tmp_path: Path) -> Iterator[subprocess.Popen[bytes]]:
    env = os.environ | {
        "DATABASE_URL": database_url,
        "CLAYBENCH_DATA_DIR": str(tmp_path / "worker-data"),
        "CLAYBENCH_SECRET_KEY": "w" * 48,
    }
    proc = subprocess.Popen([sys.executable, "-m", "server.cli", "worker"], cwd=ROOT, env=env)
    try:
        yield proc
    finally:
        if proc.poll() is None:
            proc.terminate()
            try:
                proc.wait(30)
            except subprocess.TimeoutExpired:
                proc.kill()


def _status(db: Database) -> str:
    with db.session() as s:
        return s.exec(select(ReportRender.status)).one()


def _until(check: object, what: str) -> None:
    deadline = time.monotonic() + WAIT_S
    while time.monotonic() < deadline:
        if check():  # type: ignore[operator]
            return
        time.sleep(0.02)
    raise AssertionError(f"not within {WAIT_S} s: {what}")


def test_the_worker_process_renders_what_the_app_queued_and_the_page_follows(
    app_client: TestClient, db: Database, people: People, database_url: str, tmp_path: Path
) -> None:
    two = two_approved_samples(db, people)
    sign_in(app_client, "review", PASSWORDS["review"])
    job_path = f"/jobs/{two.job_id}"
    assert app_client.get("/readyz").status_code == 503  # no worker: issued reports would wait
    with worker_process(database_url, tmp_path):
        _until(lambda: workers.any_alive(db), "the worker's first heartbeat")
        ready = app_client.get("/readyz")
        assert ready.status_code == 200 and ready.json()["checks"]["worker"]["status"] == "ok"
        issued = post_form(app_client, job_path, f"{job_path}/reports", {"password": PASSWORDS["review"]})
        assert issued.status_code == 200 and "Report signed. It is being rendered" in issued.text
        seen: set[str] = set()

        def refreshed() -> bool:
            reply = app_client.get(f"{job_path}/renders", headers={"HX-Request": "true"})
            seen.add(reply.text)
            return reply.headers.get("HX-Refresh") == "true"

        _until(refreshed, "the render done, as the page polls it")
    with db.session() as s:
        (report,) = s.exec(select(Report)).all()
    assert _status(db) == "done"
    assert any("was issued" in text for text in seen)
    pdf = app_client.get(f"/reports/{report.id}.pdf")
    assert pdf.status_code == 200 and pdf.content.startswith(b"%PDF")


def test_a_worker_killed_during_a_render_leaves_it_failed_and_the_next_worker_renders_the_retry(
    db: Database, people: People, database_url: str, tmp_path: Path
) -> None:
    two = two_approved_samples(db, people)
    queued = renders.request_issue(
        db, people.review, two.job_id, "http://testserver", password=PASSWORDS["review"]
    )
    with worker_process(database_url, tmp_path) as proc:
        enqueue(db, queued.id or 0)
        _until(lambda: _status(db) == "rendering", "the worker taking the render")
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(10)
    assert _status(db) == "rendering"  # nobody will finish it
    # A minute later the next worker's heartbeat finds its worker gone and gives it up.
    later = utcnow() + timedelta(seconds=workers.ALIVE_S + 1)
    assert renders.reap_stale(db, later) == [queued.id]
    assert _status(db) == "failed"
    with db.session() as s:
        assert s.exec(select(Report)).all() == []
    renders.retry(db, people.review, queued.id or 0)
    enqueue(db, queued.id or 0)
    with worker_process(database_url, tmp_path):
        _until(lambda: _status(db) == "done", "the retried render done by the next worker")
    with db.session() as s:
        (report,) = s.exec(select(Report)).all()
        render = s.get(ReportRender, queued.id)
    assert render is not None and (render.attempts, render.report_id) == (2, report.id)
