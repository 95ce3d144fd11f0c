"""``claybench serve`` writes its access log without share-link or API tokens in it.

Run as a laboratory runs it: the real command on a free loopback port, the real uvicorn access
log on its standard output, a real share link opened through it.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request

import pytest

from server.access_log import redact
from server.db.session import Database
from server.services import links
from tests.conftest import People
from tests.reports.issued import two_approved_samples


@pytest.mark.parametrize(
    ("line", "kept"),
    [
        ("/share/AbC-123_x/reports/7.pdf", "/share/…/reports/7.pdf"),
        ("/share/AbC-123_x", "/share/…"),
        ("/share/AbC?x=1", "/share/…?x=1"),
        (
            "/api/v1/jobs?limit=5&access_token=s3cr3t&status=open",
            "/api/v1/jobs?limit=5&access_token=…&status=open",
        ),
        ("/api/v1/jobs?TOKEN=s3cr3t", "/api/v1/jobs?TOKEN=…"),
        ("/verify?sha256=ab12", "/verify?sha256=ab12"),  # a report's hash is public: kept
        ("/jobs/3", "/jobs/3"),
    ],
)
def test_redact_takes_out_tokens_and_nothing_else(line: str, kept: str) -> None:
    assert redact(line) == kept


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _get(url: str) -> int:
    try:
        with urllib.request.urlopen(url, timeout=10) as answer:
            return int(answer.status)
    except urllib.error.HTTPError as refused:
        return int(refused.code)


@pytest.mark.parametrize("backend", ["sqlite"], indirect=True)
def test_the_served_access_log_never_holds_a_share_token(db: Database, people: People) -> None:
    two = two_approved_samples(db, people)
    made = links.create_link(db, people.review, two.job_id, 7)
    port = _free_port()
    env = {**os.environ, "DATABASE_URL": db.url, "PYTHONUNBUFFERED": "1"}
    server = subprocess.Popen(
        [sys.executable, "-m", "server.cli", "serve", "--host", "127.0.0.1", "--port", str(port)],
        env=env,
        stdout=subprocess.PIPE,
        stderr=subprocess.STDOUT,
        text=True,
    )
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 30
        while True:
            try:
                _get(f"{base}/signin")
                break
            except (urllib.error.URLError, ConnectionError):
                assert time.monotonic() < deadline and server.poll() is None, "the server did not start"
                time.sleep(0.2)
        assert _get(f"{base}/share/{made.token}") == 200
        assert _get(f"{base}/share/{made.token}/reports/999.pdf") == 404
        assert _get(f"{base}/api/v1/jobs?access_token=not-a-header-{made.token}") == 401
    finally:
        server.send_signal(signal.SIGINT)
        log, _ = server.communicate(timeout=30)
    assert made.token not in log
    assert '"GET /share/… HTTP/1.1" 200' in log and '"GET /share/…/reports/999.pdf HTTP/1.1" 404' in log
    assert "access_token=…" in log
