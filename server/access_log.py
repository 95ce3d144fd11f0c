"""The access log of ``claybench serve``, with every secret a request line can carry taken out.

A share link's token is the key to a client's reports and sits in the link's path
(``/share/<token>/...``); an API token belongs in the Authorization header, which is never
logged, but a client may put one in the query string. Whoever reads the server's logs (its
operators, a log collector) must not be able to open a client's link or call the API as
someone, so both are replaced by "…" before the line is written, as the laboratory's own log
of link use does (``server/web/client.py``).
"""

from __future__ import annotations

import copy
import logging
import re
from typing import Any

from uvicorn.config import LOGGING_CONFIG

REDACTED = "…"

_SHARE_PATH = re.compile(r"(/share/)[^/?#\s]+")
_SECRET_QUERY = re.compile(r"([?&](?:access_token|api_key|apikey|key|token)=)[^&#\s]*", re.IGNORECASE)


def redact(line: str) -> str:
    """A request path (or request line) with share-link tokens and token query values taken out."""
    return _SECRET_QUERY.sub(rf"\g<1>{REDACTED}", _SHARE_PATH.sub(rf"\g<1>{REDACTED}", line))


class RedactTokens(logging.Filter):
    """Rewrites the path argument of uvicorn's access records (client, method, path, version,
    status) and, for any other record, its message, so that no token reaches a handler."""

    def filter(self, record: logging.LogRecord) -> bool:
        args = record.args
        if isinstance(args, tuple) and len(args) == 5 and isinstance(args[2], str):
            record.args = (args[0], args[1], redact(args[2]), args[3], args[4])
        elif isinstance(record.msg, str) and not args:
            record.msg = redact(record.msg)
        return True


def log_config() -> dict[str, Any]:
    """uvicorn's own logging set-up with ``RedactTokens`` on the access handler."""
    config = copy.deepcopy(LOGGING_CONFIG)
    config["filters"] = {"redact_tokens": {"()": RedactTokens}}
    config["handlers"]["access"]["filters"] = ["redact_tokens"]
    return config
