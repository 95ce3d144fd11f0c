"""``claybench serve`` writes its access log without share-link or API tokens in it.

Run as a laboratory runs it: the real command on a free loopback port, its JSON log lines on
standard output, its metrics on a loopback port of their own, a real share link opened through it.
"""

from __future__ import annotations

import json
import os
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request

import pytest
from prometheus_client.parser import text_string_to_metric_families

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


def _get(url: str, request_id: str = "") -> int:
    headers = {"X-Request-ID": request_id} if request_id else {}
    try:
        with urllib.request.urlopen(urllib.request.Request(url, headers=headers), timeout=10) as answer:
            return int(answer.status)
    except urllib.error.HTTPError as refused:
        return int(refused.code)


@pytest.mark.parametrize("backend", ["sqlite"], indirect=True)
def test_the_served_access_log_never_holds_a_share_token(db: Database, people: People) -> None:
    two = two_approved_samples(db, people)
    made = links.create_link(db, people.review, two.job_id, 7)
    port = _free_port()
    metrics_port = _free_port()
    env = {
        **os.environ,
        "DATABASE_URL": db.url,
        "PYTHONUNBUFFERED": "1",
        "CLAYBENCH_METRICS_PORT": str(metrics_port),
    }
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
        assert _get(f"{base}/share/{made.token}", "client-1") == 200
        assert _get(f"{base}/share/{made.token}/reports/999.pdf", "client-2") == 404
        assert _get(f"{base}/api/v1/jobs?access_token=not-a-header-{made.token}", "client-3") == 401
        with urllib.request.urlopen(f"http://127.0.0.1:{metrics_port}/metrics", timeout=10) as answer:
            metrics = answer.read().decode()
    finally:
        server.send_signal(signal.SIGINT)
        log, _ = server.communicate(timeout=30)
    assert made.token not in log and made.token not in metrics
    lines = [json.loads(line) for line in log.splitlines() if line.startswith("{")]
    access = {line["request_id"]: line for line in lines if line["logger"] == "claybench.access"}
    assert (access["client-1"]["path"], access["client-1"]["status"]) == ("/share/…", 200)
    assert (access["client-2"]["path"], access["client-2"]["status"]) == ("/share/…/reports/999.pdf", 404)
    assert (
        access["client-3"]["path"] == "/api/v1/jobs?access_token=…" and access["client-3"]["method"] == "GET"
    )
    assert any(
        line["logger"] == "uvicorn.error" and "startup complete" in line["message"] for line in lines
    )
    assert "INFO:     " not in log  # uvicorn's own text format is not used
    share_200 = [
        s.value
        for family in text_string_to_metric_families(metrics)
        for s in family.samples
        if s.name == "claybench_http_requests_total" and s.labels["route"] == "/share/{token}"
        if s.labels["status"] == "200"
    ]
    assert share_200 == [1.0]
