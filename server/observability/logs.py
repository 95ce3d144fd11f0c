"""One JSON object per log line: what a log collector reads without a parser of its own.

Every line has ``time`` (UTC, ISO 8601 with milliseconds), ``level``, ``logger``, ``message`` and
``request_id`` (null outside a request). Fields a caller adds with ``extra=`` are kept as fields
of their own: the access line of each request (``server/observability/middleware.py``) adds
``method``, ``path``, ``status``, ``duration_ms`` and ``client``. A failure adds ``exception``
with its traceback, inside the one line (JSON escapes the line ends), so that a collector never
splits one event into many.

The standard library does this in a few lines, so no logging package is added.
"""

from __future__ import annotations

import json
import logging
from datetime import UTC, datetime
from typing import Any

from server.observability import request_id

_STANDARD = frozenset(vars(logging.LogRecord("", 0, "", 0, "", None, None))) | {
    "message",
    "asctime",
    "color_message",  # uvicorn's coloured copy of its own message
    "taskName",  # Python 3.12 adds it to every record
}
"""Attributes every LogRecord has: anything else on a record came from ``extra=``."""


class JsonFormatter(logging.Formatter):
    """Formats a record as one line of JSON (UTF-8 kept as is; a non-JSON value as its ``str``)."""

    def format(self, record: logging.LogRecord) -> str:
        line: dict[str, Any] = {
            "time": datetime.fromtimestamp(record.created, UTC).isoformat(timespec="milliseconds"),
            "level": record.levelname,
            "logger": record.name,
            "message": record.getMessage(),
            "request_id": getattr(record, "request_id", None) or request_id.current.get(),
        }
        for key, value in vars(record).items():
            if key not in _STANDARD and key not in line:
                line[key] = value
        if record.exc_info:
            line["exception"] = self.formatException(record.exc_info)
        elif record.exc_text:
            line["exception"] = record.exc_text
        if record.stack_info:
            line["stack"] = self.formatStack(record.stack_info)
        return json.dumps(line, ensure_ascii=False, default=str)
