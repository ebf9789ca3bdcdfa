"""Domain errors of the stored project, each with the HTTP status it maps to."""

from __future__ import annotations

from collections.abc import Iterable

from scheduling.engine import Problem


class ServiceError(Exception):
    status = 400
    code = "invalid"

    def __init__(self, message: str, problems: Iterable[Problem] = ()):
        super().__init__(message)
        self.message = message
        self.problems = tuple(problems)


class Invalid(ServiceError):
    """The input, or the network it would make, is wrong; nothing was stored."""


class NotFound(ServiceError):
    status = 404
    code = "not_found"


class Forbidden(ServiceError):
    status = 403
    code = "forbidden"


class Conflict(ServiceError):
    status = 409
    code = "conflict"


class PreconditionFailed(ServiceError):
    """The client's version (If-Match) is not the stored one."""

    status = 412
    code = "version_mismatch"


class PreconditionRequired(ServiceError):
    """A change to an existing resource must say which version it changes."""

    status = 428
    code = "if_match_required"


class QueueUnavailable(ServiceError):
    """The work queue (the broker) cannot be reached; nothing was queued."""

    status = 503
    code = "queue_unavailable"

    def __init__(self, message: str, retry_after: int = 30):
        super().__init__(message)
        self.retry_after = retry_after
        self.run_id: int | None = None
