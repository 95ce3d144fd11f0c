"""The id of the request being served, for every log line written while it is served.

A proxy or a client may already have given the request an id (``X-Request-ID``); keeping it lets
one id follow a request across the proxy's log and ours. It is taken only when it is short and
made of characters that cannot break a log line or a header (no spaces, quotes or line ends):
anything else is replaced by an id of our own, so a caller cannot write into the log through it.
"""

from __future__ import annotations

import re
import uuid
from contextvars import ContextVar

HEADER = "X-Request-ID"

MAX_LENGTH = 128
"""Longer ids are refused (common practice: ids in use are UUIDs of 36 characters, or trace ids
of a proxy of up to ~100; a bound keeps a log line's size ours to decide)."""

_SANE = re.compile(rf"[A-Za-z0-9._:+/=-]{{1,{MAX_LENGTH}}}")

current: ContextVar[str | None] = ContextVar("claybench_request_id", default=None)
"""The id of the request this code runs for, or None outside a request (start-up, the CLI).

A ContextVar, not a thread-local: it follows the request into the thread that runs a ``def``
endpoint (Starlette copies the context into its thread pool) and never leaks into another
request served by the same event loop."""


def accept_or_make(offered: str | None) -> str:
    """The caller's id when it is sane, otherwise a new one (a UUID4 as 32 hex digits)."""
    if offered is not None and _SANE.fullmatch(offered):
        return offered
    return uuid.uuid4().hex
