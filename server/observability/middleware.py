"""One pass over every request: its id, its access line and its metrics.

Plain ASGI, not Starlette's BaseHTTPMiddleware, and one middleware for the three rather than
three: the bench save is the app's hottest path, and each BaseHTTPMiddleware layer spawns a task
and streams the body through a queue for every request, where this only wraps ``send`` to read
the status and add one header. It is the outermost of the app's middleware, so the time it
measures includes sessions and headers, and every line the app logs meanwhile carries the id.

The access line (logger ``claybench.access``) is written when the answer is complete, with the
path's share-link and API tokens taken out (``server/access_log.py``); ``claybench serve`` turns
uvicorn's own access line off, so each request has one: INFO, WARNING for an answered 5xx, ERROR
for a request that raised. Such a request is answered 500 by Starlette's error middleware, outside
this one and so without the X-Request-ID header; its id is in the access line and stays set for the
server's own report of the failure.
"""

from __future__ import annotations

import logging
import time

from starlette.datastructures import MutableHeaders
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from server.access_log import redact
from server.observability import request_id
from server.observability.metrics import Metrics, RouteTemplates

access_log = logging.getLogger("claybench.access")

_HEADER = request_id.HEADER.lower().encode("latin-1")


def _offered_id(scope: Scope) -> str | None:
    for name, value in scope["headers"]:
        if name == _HEADER:
            return str(value.decode("latin-1"))
    return None


class RequestObserver:
    """Gives each HTTP request its id (the caller's when sane, ``request_id.accept_or_make``),
    sends it back in ``X-Request-ID``, then writes the access line and counts the request."""

    def __init__(self, app: ASGIApp, *, metrics: Metrics | None = None) -> None:
        self.app = app
        self.metrics = metrics
        self.templates = RouteTemplates()

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        rid = request_id.accept_or_make(_offered_id(scope))
        token = request_id.current.set(rid)
        root_path = scope.get("root_path", "")
        started = time.perf_counter()
        status = 500

        async def send_with_id(message: Message) -> None:
            nonlocal status
            if message["type"] == "http.response.start":
                status = message["status"]
                MutableHeaders(scope=message)[request_id.HEADER] = rid
            await send(message)

        try:
            await self.app(scope, receive, send_with_id)
        except Exception:
            self._done(scope, root_path, status, time.perf_counter() - started, failed=True)
            raise  # the id stays set: the server logs the failure next, in this same context
        self._done(scope, root_path, status, time.perf_counter() - started, failed=False)
        request_id.current.reset(token)

    def _done(self, scope: Scope, root_path: str, status: int, seconds: float, *, failed: bool) -> None:
        if self.metrics is not None:
            self.metrics.observe(self.templates.of(scope, root_path), scope["method"], status, seconds)
        level = logging.ERROR if failed else logging.WARNING if status >= 500 else logging.INFO
        if not access_log.isEnabledFor(level):
            return
        path = scope["path"]
        if scope["query_string"]:
            path += "?" + scope["query_string"].decode("latin-1")
        path = redact(path)
        client = scope.get("client")
        access_log.log(
            level,
            "%s %s %d",
            scope["method"],
            path,
            status,
            extra={
                "method": scope["method"],
                "path": path,
                "status": status,
                "duration_ms": round(seconds * 1000, 2),
                "client": client[0] if client else None,
            },
        )
