"""What a use-case can refuse, in terms every front door (page, API, CLI) can show."""

from __future__ import annotations

from server.engine import FieldError


class ServiceError(Exception):
    """Base of refusals; the message is fit to show to the person who asked."""


class NotFound(ServiceError):
    pass


class Forbidden(ServiceError):
    """The person may not do this (role, segregation of duties, wrong password)."""


class Conflict(ServiceError):
    """Somebody else changed the record first; nothing was overwritten."""


class Invalid(ServiceError):
    """Field-level refusals; nothing was stored."""

    def __init__(self, errors: list[FieldError]):
        self.errors = errors
        super().__init__("; ".join(e.message for e in errors))


def invalid(field: str, message: str) -> Invalid:
    """A one-field refusal of a form or request value (not of readings)."""
    return Invalid([FieldError((field,), message)])


def http_status(exc: ServiceError) -> int:
    """The HTTP status a front door answers a refusal with."""
    for kind, status in ((NotFound, 404), (Forbidden, 403), (Conflict, 409)):
        if isinstance(exc, kind):
            return status
    return 422
