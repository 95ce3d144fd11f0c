"""Prometheus metrics of one app process, served on a port of their own.

What is counted: every request by route template, method and status
(``claybench_http_requests_total``) with its latency (``claybench_http_request_duration_seconds``),
bench saves (``claybench_bench_saves_total``; saves per second is ``rate()`` of it), report
renders by status, counted in the database at each scrape (``claybench_report_renders``), and the
process itself (``process_*``: CPU, memory, open files). Requests are labelled by the route's
template (``/tests/{test_id}/fields``), never the raw path: ids in paths would make a new series
per test, sample and job, and a caller probing random paths one per path; every request that
matches no route shares the label ``(unmatched)``, and an unknown method is ``OTHER``.

Where they are served, and why a port rather than a path: ``claybench serve`` starts a small
exporter on ``CLAYBENCH_METRICS_HOST:CLAYBENCH_METRICS_PORT`` (127.0.0.1:9464 by default; port 0
turns it off), beside the app, never on the app's own port. A ``/metrics`` path on the public
port allowed by peer address would depend on knowing the peer: behind a reverse proxy every
request comes from the proxy's address, which is inside any private network list, so the public
would reach the metrics through the proxy unless every deployment got its forwarded-address
settings exactly right. A port the proxy is not told about needs no such care: on loopback (the
default) only the machine itself reaches it; in a container it is bound to the container's
network and simply not published (``docker-compose.yml`` lists only 8000 under ``ports``).
When the port is taken the app still starts and the failure is logged: the laboratory's work
does not stop for its monitoring, and Prometheus shows the target down.

Several processes: the counters live in the process that serves the requests, so each
``claybench serve`` (one per host or container replica) exports its own, and Prometheus scrapes
each replica as a target of its own; sum over instances in queries
(``sum by (route) (rate(claybench_http_requests_total[5m]))``). ``claybench_report_renders`` is
read from the shared database, so every replica reports the same figures: take ``max``, not
``sum``, across instances. Started any other way (``uvicorn --workers N`` as the benchmarks do)
there is no exporter: a port cannot be shared by workers, and merging their counters would need
prometheus-client's multiprocess mode, which loses the process and custom collectors.
"""

from __future__ import annotations

import logging
from collections.abc import Iterator, Sequence
from wsgiref.simple_server import WSGIServer

from fastapi.routing import iter_route_contexts
from prometheus_client import CollectorRegistry, Counter, Histogram, ProcessCollector, start_http_server
from prometheus_client.core import GaugeMetricFamily, Metric
from sqlalchemy.exc import SQLAlchemyError
from sqlmodel import col, func, select
from starlette.routing import BaseRoute
from starlette.types import Scope

from server.db.session import Database
from server.db.tables import ReportRender

log = logging.getLogger(__name__)

RENDER_STATUSES = ("queued", "rendering", "done", "failed")
"""Every status of a report render (server/db/tables.py ``ReportRender.status``)."""

METHODS = frozenset({"GET", "HEAD", "POST", "PUT", "PATCH", "DELETE", "OPTIONS"})
"""Methods kept as labels (RFC 9110 section 9 and RFC 5789); any other is counted as ``OTHER``."""

UNMATCHED = "(unmatched)"

BENCH_SAVES: dict[tuple[str, str], str] = {
    ("POST", "/tests/{test_id}/fields"): "sheet",  # server/web/bench.py save_fields: the autosave
    ("POST", "/tests/{test_id}/readings"): "form",  # save_readings: the whole sheet without script
    ("PUT", "/api/v1/tests/{test_id}/readings"): "api",  # server/api/v1/lab_tests.py put_readings
}
"""The routes that save bench readings, and the door each is: a save is one of them answered
below 400 (a refusal, 409 or 422, stored nothing and is not a save)."""


class RendersByStatus:
    """``claybench_report_renders{status=...}``: rows of ``report_render`` by status, counted by
    one query at each scrape, so the figure is the queue's own (shared by every app server and
    worker) and costs nothing between scrapes."""

    def __init__(self, db: Database) -> None:
        self.db = db

    @staticmethod
    def _family() -> GaugeMetricFamily:
        return GaugeMetricFamily(
            "claybench_report_renders",
            "Report renders by status (queued, rendering, done, failed), counted at scrape time.",
            labels=["status"],
        )

    def describe(self) -> Iterator[Metric]:
        """The metric's name for the registry, without a query."""
        yield self._family()

    def collect(self) -> Iterator[Metric]:
        try:
            with self.db.session() as s:
                rows = s.exec(
                    select(ReportRender.status, func.count(col(ReportRender.id))).group_by(
                        col(ReportRender.status)
                    )
                ).all()
        except SQLAlchemyError:
            # No sample rather than a wrong zero: absent() in an alert finds it, /readyz says why.
            log.warning("report renders not counted: the database did not answer", exc_info=True)
            return
        counts = {status: n for status, n in rows}
        family = self._family()
        for status in RENDER_STATUSES:
            family.add_metric([status], counts.get(status, 0))
        yield family


class RouteTemplates:
    """The full path template of the route that served a request (``/api/v1/tests/{test_id}``).

    FastAPI keeps an included router's routes as they were declared, so the route object in the
    request's scope knows only its own part of the path (``/tests/{test_id}``); the app's route
    table (``iter_route_contexts``) knows the whole. It is read once, at the first request (the
    table is complete by then), and again only for a route it did not list."""

    def __init__(self) -> None:
        self._by_route: dict[int, str] = {}

    def of(self, scope: Scope, root_path: str) -> str:
        """The template for a served ``scope``; ``root_path`` is the scope's before routing."""
        route = scope.get("route")
        if route is None:
            mounted = scope.get("root_path", "")
            if mounted != root_path:  # a Mount (/static) served it: one label for all its files
                return mounted[len(root_path) :] + "/{path}"
            return UNMATCHED
        found = self._by_route.get(id(route))
        if found is None:
            self._by_route = _templates(scope["app"].routes)
            found = self._by_route.get(id(route)) or str(getattr(route, "path_format", UNMATCHED))
            self._by_route[id(route)] = found
        return found


def _templates(routes: Sequence[BaseRoute]) -> dict[int, str]:
    found: dict[int, str] = {}
    for context in iter_route_contexts(routes):
        template = context.path_format or context.path
        if template:
            found.setdefault(id(context.original_route), template)
    return found


class Metrics:
    """The metrics of one app (its own registry, so that tests may build many apps)."""

    def __init__(self, db: Database) -> None:
        self.registry = CollectorRegistry()
        self.requests = Counter(
            "claybench_http_requests",
            "Requests answered, by route template, method and status.",
            ("route", "method", "status"),
            registry=self.registry,
        )
        self.latency = Histogram(
            "claybench_http_request_duration_seconds",
            "Time from a request's arrival to the end of its answer, by route template and method.",
            ("route", "method"),
            registry=self.registry,
        )
        self.bench_saves = Counter(
            "claybench_bench_saves",
            "Bench readings saved: sheet (autosave of typed fields), form (whole sheet), api.",
            ("door",),
            registry=self.registry,
        )
        for door in BENCH_SAVES.values():
            self.bench_saves.labels(door)  # every door's series from 0, so rate() has a start
        self.registry.register(RendersByStatus(db))
        ProcessCollector(registry=self.registry)

    def observe(self, route: str, method: str, status: int, seconds: float) -> None:
        """Count one answered request."""
        method = method if method in METHODS else "OTHER"
        self.requests.labels(route, method, str(status)).inc()
        self.latency.labels(route, method).observe(seconds)
        door = BENCH_SAVES.get((method, route))
        if door is not None and status < 400:
            self.bench_saves.labels(door).inc()


def start_exporter(registry: CollectorRegistry, host: str, port: int) -> WSGIServer | None:
    """Serve ``registry`` at ``http://host:port/metrics`` in a daemon thread; None when off
    (port 0) or when the address cannot be bound (logged: the app serves on regardless)."""
    if port == 0:
        return None
    try:
        server, _thread = start_http_server(port, addr=host, registry=registry)
    except OSError as exc:
        log.error("metrics not served: cannot listen on %s:%d (%s)", host, port, exc)
        return None
    log.info("metrics served at http://%s:%d/metrics", host, server.server_port)
    return server
