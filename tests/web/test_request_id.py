"""Every request has an id: the caller's when it is sane, else one of ours; it comes back in
``X-Request-ID`` and is on every log line written while the request is served, as JSON.

The log is captured by a real ``logging.StreamHandler`` with the formatter and filter that
``claybench serve`` installs (``server/access_log.py`` ``log_config``), on the root logger.
"""

from __future__ import annotations

import io
import json
import logging
import re
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient

from server.access_log import RedactTokens
from server.config import Settings
from server.db.session import Database
from server.main import create_app
from server.observability.logs import JsonFormatter
from server.observability.request_id import MAX_LENGTH
from tests.support.unreachable import unreachable_url

OURS = re.compile(r"[0-9a-f]{32}")  # a UUID4 as hex (server/observability/request_id.py)


class Log:
    """The JSON lines written to the root logger while the test runs."""

    def __init__(self) -> None:
        self.stream = io.StringIO()

    def lines(self) -> list[dict[str, Any]]:
        return [json.loads(line) for line in self.stream.getvalue().splitlines()]

    def of(self, request_id: str) -> list[dict[str, Any]]:
        return [line for line in self.lines() if line["request_id"] == request_id]


@pytest.fixture
def log() -> Iterator[Log]:
    captured = Log()
    handler = logging.StreamHandler(captured.stream)
    handler.setFormatter(JsonFormatter())
    handler.addFilter(RedactTokens())
    root = logging.getLogger()
    level = root.level
    root.addHandler(handler)
    root.setLevel(logging.INFO)
    try:
        yield captured
    finally:
        root.removeHandler(handler)
        root.setLevel(level)


@pytest.mark.parametrize(
    "offered",
    [
        "0f8e2b1c-5d7a-4c3e-9b1a-2d4f6e8a0c1b",  # a UUID, as proxies send (RFC 9562 form)
        "Root=1-67891233-abcdef012345678912345678",  # a load balancer's trace id (from memory)
        "a" * MAX_LENGTH,
    ],
)
def test_a_sane_request_id_is_echoed(app_client: TestClient, offered: str) -> None:
    reply = app_client.get("/healthz", headers={"X-Request-ID": offered})
    assert reply.headers["x-request-id"] == offered


@pytest.mark.parametrize(
    "offered",
    [
        "",
        "a" * (MAX_LENGTH + 1),  # too long
        "two words",  # a space
        'quote"d',
        "semi;colon",
        "tab\there",
        "caf\u00e9",  # not ASCII
        "line\\nbreak",  # an escaped line end, written as its two characters
    ],
)
def test_a_request_id_that_is_not_sane_is_replaced_by_one_of_ours(
    app_client: TestClient, offered: str
) -> None:
    reply = app_client.get("/healthz", headers={"X-Request-ID": offered.encode("utf-8")})
    assert OURS.fullmatch(reply.headers["x-request-id"]), reply.headers["x-request-id"]


def test_without_an_id_each_request_gets_a_new_one(app_client: TestClient) -> None:
    ids = {app_client.get("/healthz").headers["x-request-id"] for _ in range(5)}
    assert len(ids) == 5 and all(OURS.fullmatch(i) for i in ids)


def test_error_answers_carry_the_id_too(app_client: TestClient) -> None:
    for reply in (app_client.get("/no-such-page"), app_client.get("/api/v1/jobs"), app_client.get("/readyz")):
        assert reply.status_code in (404, 401, 503)
        assert OURS.fullmatch(reply.headers["x-request-id"])


def test_the_access_line_is_json_with_the_id_and_the_request(app_client: TestClient, log: Log) -> None:
    reply = app_client.get("/healthz?probe=1", headers={"X-Request-ID": "bench-7"})
    assert reply.status_code == 200
    (line,) = log.of("bench-7")
    assert line["logger"] == "claybench.access" and line["level"] == "INFO"
    assert line["message"] == "GET /healthz?probe=1 200"
    assert (line["method"], line["path"], line["status"], line["client"]) == (
        "GET",
        "/healthz?probe=1",
        200,
        "testclient",  # the TestClient's peer address
    )
    assert isinstance(line["duration_ms"], float) and line["duration_ms"] >= 0
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{3}\+00:00", line["time"])  # ISO 8601, UTC


def test_a_line_logged_in_the_thread_pool_during_a_request_carries_its_id(
    backend: str, settings: Settings, tmp_path: Path, database_url: str, log: Log
) -> None:
    """/readyz is a ``def`` endpoint, run in a worker thread: its warning about a database that
    does not answer must carry the id of the request it was written for."""
    broken = Database(unreachable_url(backend, tmp_path, database_url))
    try:
        with TestClient(create_app(settings, broken)) as client:
            reply = client.get("/readyz", headers={"X-Request-ID": "probe-42"})
    finally:
        broken.dispose()
    assert reply.status_code == 503
    lines = log.of("probe-42")
    warning = next(line for line in lines if line["logger"] == "server.observability.readiness")
    assert warning["level"] == "WARNING" and "did not answer" in warning["message"]
    assert "OperationalError" in warning["exception"]  # the traceback, in the one JSON line
    access = next(line for line in lines if line["logger"] == "claybench.access")
    assert access["status"] == 503 and access["level"] == "WARNING"
    assert all(line["request_id"] is None for line in log.lines() if line not in lines)


def test_no_share_token_reaches_the_log(app_client: TestClient, log: Log) -> None:
    secret = "s3cr3t-share-token-0123456789"
    app_client.get(f"/share/{secret}/reports/1.pdf", headers={"X-Request-ID": "share-1"})
    app_client.get(f"/api/v1/jobs?access_token={secret}", headers={"X-Request-ID": "share-2"})
    assert secret not in log.stream.getvalue()
    (first,) = log.of("share-1")
    (second,) = log.of("share-2")
    assert first["path"] == "/share/…/reports/1.pdf" and second["path"] == "/api/v1/jobs?access_token=…"
