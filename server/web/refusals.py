"""A use-case's refusal, raised from a page route, as the HTTP error the pages show."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

from fastapi import HTTPException

from server.services.errors import ServiceError, http_status


@contextmanager
def refusals_as_http() -> Iterator[None]:
    """Turn a ``ServiceError`` in the block into an ``HTTPException`` with its status and message,
    so that a route which has no form to show the refusal on answers 404/403/409/422, not 500."""
    try:
        yield
    except ServiceError as exc:
        raise HTTPException(http_status(exc), str(exc)) from exc
