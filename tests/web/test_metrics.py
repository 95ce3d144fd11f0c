"""Prometheus metrics: requests by route template and status with their latency, bench saves,
report renders counted in the database at scrape time, the process; served on a loopback port of
their own and never by the public app.

The exposition text is read back with prometheus-client's own parser, scraped over real HTTP
from the exporter that ``claybench serve`` starts (``start_exporter``), on SQLite and PostgreSQL.
"""

from __future__ import annotations

import socket
import urllib.request
from collections.abc import Iterator
from contextlib import contextmanager

import pytest
from fastapi.routing import iter_route_contexts
from fastapi.testclient import TestClient
from prometheus_client import CollectorRegistry
from prometheus_client.parser import text_string_to_metric_families

from server.config import Settings
from server.db.session import Database
from server.db.tables import ReportRender, utcnow
from server.observability.metrics import BENCH_SAVES, start_exporter
from tests.conftest import PASSWORDS, People
from tests.support.http import csrf_of, sign_in
from tests.support.scenario import small_job

REQUESTS = "claybench_http_requests_total"
W1 = "water_content.determinations.0.wet_tare_g"  # a field of the Atterberg sheet


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@contextmanager
def _exporter(registry: CollectorRegistry, host: str) -> Iterator[int]:
    port = _free_port()
    server = start_exporter(registry, host, port)
    assert server is not None
    try:
        yield port
    finally:
        server.shutdown()
        server.server_close()


def _registry(app_client: TestClient) -> CollectorRegistry:
    """The registry of the app under test (server/main.py puts its metrics on the app's state)."""
    return app_client.app.state.metrics.registry  # type: ignore[attr-defined]


def _scrape(app_client: TestClient) -> dict[tuple[str, tuple[tuple[str, str], ...]], float]:
    """Every sample the exporter serves, by name and labels, read over HTTP on loopback."""
    with _exporter(_registry(app_client), "127.0.0.1") as port:
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/metrics", timeout=10) as answer:
            text = answer.read().decode()
    return {
        (s.name, tuple(sorted(s.labels.items()))): s.value
        for family in text_string_to_metric_families(text)
        for s in family.samples
    }


def _value(samples: dict[tuple[str, tuple[tuple[str, str], ...]], float], name: str, **labels: str) -> float:
    return samples[(name, tuple(sorted(labels.items())))]


def test_requests_are_counted_by_route_template_and_status_with_their_latency(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    assert app_client.get(f"/jobs/{job.job_id}").status_code == 200
    assert app_client.get(f"/jobs/{job.job_id}").status_code == 200
    assert app_client.get("/jobs/999999").status_code == 404
    samples = _scrape(app_client)
    route = {"route": "/jobs/{job_id}", "method": "GET"}
    assert _value(samples, REQUESTS, status="200", **route) == 2
    assert _value(samples, REQUESTS, status="404", **route) == 1
    assert _value(samples, "claybench_http_request_duration_seconds_count", **route) == 3
    assert _value(samples, "claybench_http_request_duration_seconds_sum", **route) > 0
    assert _value(samples, "claybench_http_request_duration_seconds_bucket", le="+Inf", **route) == 3
    assert not [key for key in samples if any(v.startswith(f"/jobs/{job.job_id}") for _, v in key[1])]
    assert _value(samples, "process_resident_memory_bytes") > 0  # the process collector


def test_paths_and_methods_outside_the_route_table_share_one_label(app_client: TestClient) -> None:
    for n in range(3):
        app_client.get(f"/probe-{n}/wp-admin")
    app_client.request("PROPFIND", "/healthz")
    samples = _scrape(app_client)
    assert _value(samples, REQUESTS, route="(unmatched)", method="GET", status="404") == 3
    assert _value(samples, REQUESTS, route="/healthz", method="OTHER", status="405") == 1
    assert not [key for key in samples if any("probe-" in v for _, v in key[1])]


def test_bench_saves_count_stored_saves_only(app_client: TestClient, db: Database, people: People) -> None:
    job = small_job(db, people.admin)
    sign_in(app_client, "tech", PASSWORDS["tech"])
    token = csrf_of(app_client.get(f"/tests/{job.test_id}"))

    def save(value: str, base: str) -> int:
        changes = [{"path": W1, "value": value, "base": base}]
        reply = app_client.post(
            f"/tests/{job.test_id}/fields", json={"changes": changes}, headers={"X-CSRF-Token": token}
        )
        return reply.status_code

    assert save("36.00", "") == 200
    assert save("36.50", "36.00") == 200
    assert save("-3", "36.50") == 422  # refused: a negative mass, nothing stored
    samples = _scrape(app_client)
    assert _value(samples, "claybench_bench_saves_total", door="sheet") == 2
    assert _value(samples, "claybench_bench_saves_total", door="api") == 0  # every door from 0: rate() starts


def test_every_bench_save_route_is_in_the_app(app_client: TestClient) -> None:
    served = {
        (method, context.path_format)
        for context in iter_route_contexts(app_client.app.routes)  # type: ignore[attr-defined]
        for method in (context.methods or ())
    }
    assert set(BENCH_SAVES) <= served, set(BENCH_SAVES) - served


def test_report_renders_are_counted_by_status_at_scrape_time(
    app_client: TestClient, db: Database, people: People
) -> None:
    job = small_job(db, people.admin)
    samples = _scrape(app_client)
    for status in ("queued", "rendering", "done", "failed"):
        assert _value(samples, "claybench_report_renders", status=status) == 0
    with db.transaction() as s:
        for n, status in enumerate(("queued", "queued", "rendering", "failed")):
            s.add(
                ReportRender(
                    job_id=job.job_id,
                    kind="issue",
                    number=f"R-{n}",
                    requested_by_id=people.review.id or 0,
                    requested_at=utcnow(),
                    base_url="http://testserver",
                    tests=[[job.test_id, 1]],
                    signature_meaning="approved",
                    signer_check="0" * 64,
                    status=status,
                )
            )
    samples = _scrape(app_client)
    assert _value(samples, "claybench_report_renders", status="queued") == 2
    assert _value(samples, "claybench_report_renders", status="rendering") == 1
    assert _value(samples, "claybench_report_renders", status="done") == 0
    assert _value(samples, "claybench_report_renders", status="failed") == 1


def _outside_address() -> str | None:
    """This machine's address on its network (what another machine would connect to)."""
    with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as s:
        try:
            s.connect(("192.0.2.1", 9))  # TEST-NET-1 (RFC 5737): picks the route, sends nothing
        except OSError:
            return None
        address = str(s.getsockname()[0])
    return None if address.startswith("127.") else address


def test_the_public_app_has_no_metrics_and_the_exporter_listens_on_loopback_only(
    app_client: TestClient, settings: Settings
) -> None:
    assert app_client.get("/metrics").status_code == 404
    assert settings.metrics_host == "127.0.0.1"  # the default: nobody else reaches it
    outside = _outside_address()
    if outside is None:
        pytest.skip("this machine has no address but loopback: no outside caller to play")
    with _exporter(_registry(app_client), settings.metrics_host) as port:
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/metrics", timeout=10) as answer:
            assert answer.status == 200
        with pytest.raises(ConnectionRefusedError):
            socket.create_connection((outside, port), timeout=5).close()


def test_a_taken_metrics_port_leaves_the_app_serving(app_client: TestClient) -> None:
    with socket.socket() as holder:
        holder.bind(("127.0.0.1", 0))
        holder.listen()
        port = holder.getsockname()[1]
        assert start_exporter(_registry(app_client), "127.0.0.1", port) is None
    assert start_exporter(_registry(app_client), "127.0.0.1", 0) is None
    assert app_client.get("/healthz").status_code == 200
