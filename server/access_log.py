"""The access log of ``claybench serve``, with every secret a request line can carry taken out.

A share link's token is the key to a client's reports and sits in the link's path
(``/share/<token>/...``); an API token belongs in the Authorization header, which is never
logged, but a client may put one in the query string. Whoever reads the server's logs (its
operators, a log collector) must not be able to open a client's link or call the API as
someone, so both are replaced by "…" before the line is written, as the laboratory's own log
of link use does (``server/web/client.py``).

``claybench serve`` logs one JSON object per line (``server/observability/logs.py``); the access
line of each request is the app's own (``server/observability/middleware.py``, which redacts its
path before logging it), and this filter sits on the one handler as well, so that a token reaches
no output whichever logger carries it.
"""

from __future__ import annotations

import logging
import re
from typing import Any

REDACTED = "…"

_SHARE_PATH = re.compile(r"(/share/)[^/?#\s]+")
_SECRET_QUERY = re.compile(r"([?&](?:access_token|api_key|apikey|key|token)=)[^&#\s]*", re.IGNORECASE)


def redact(line: str) -> str:
    """A request path (or request line) with share-link tokens and token query values taken out."""
    return _SECRET_QUERY.sub(rf"\g<1>{REDACTED}", _SHARE_PATH.sub(rf"\g<1>{REDACTED}", line))


class RedactTokens(logging.Filter):
    """Rewrites a record's text arguments (the path of uvicorn's access records: client, method,
    path, version, status), its ``path`` field and, when a token is still in the message made of
    them (an argument that is not text, such as a URL object), the message itself, so that no
    token reaches a handler."""

    def filter(self, record: logging.LogRecord) -> bool:
        if isinstance(record.args, tuple):
            record.args = tuple(redact(a) if isinstance(a, str) else a for a in record.args)
        message = record.getMessage()
        if redact(message) != message:
            record.msg, record.args = redact(message), None
        path = getattr(record, "path", None)
        if isinstance(path, str):
            record.path = redact(path)
        return True


def log_config() -> dict[str, Any]:
    """The logging set-up of ``claybench serve``: every logger (the app's, uvicorn's) through one
    handler on standard output, one JSON object per line, with ``RedactTokens`` on it."""
    return {
        "version": 1,
        "disable_existing_loggers": False,
        "filters": {"redact_tokens": {"()": RedactTokens}},
        "formatters": {"json": {"()": "server.observability.logs.JsonFormatter"}},
        "handlers": {
            "stdout": {
                "class": "logging.StreamHandler",
                "stream": "ext://sys.stdout",
                "formatter": "json",
                "filters": ["redact_tokens"],
            }
        },
        "loggers": {
            # uvicorn's loggers come with handlers of their own by default: here they pass theirs up.
            "uvicorn": {"handlers": [], "level": "INFO", "propagate": True},
            "uvicorn.error": {"handlers": [], "level": "INFO", "propagate": True},
            "uvicorn.access": {"handlers": [], "level": "INFO", "propagate": True},
        },
        "root": {"handlers": ["stdout"], "level": "INFO"},
    }
