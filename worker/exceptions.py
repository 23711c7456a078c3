"""Exceptions raised by the worker package (engine, domains, validation, jobs).

The tree::

    BoundwiseError
    ├── RequestError            a job request document is not acceptable
    │   ├── ProblemError        the problem is invalid for its domain (names the field)
    │   ├── UnknownDomainError  no domain of that name is registered
    │   └── LimitError          a value is over a configured cap (names the cap)
    ├── PlanValidationError     a plan failed the independent replay (a bug: never published)
    └── SearchError             the engine was misused or hit an internal inconsistency

Every ``RequestError`` carries ``field`` (a dotted path such as
``problem.start``) and ``message``, so an edge (HTTP, CLI) can show the caller
which field is wrong and why without parsing text.

This module is a leaf: it imports nothing from the package.
"""

from __future__ import annotations

from typing import Any


class BoundwiseError(Exception):
    """Base class of every exception this package raises on purpose."""


class RequestError(BoundwiseError):
    """Raised by request parsing when a job request document is not acceptable."""

    code = "invalid_request"

    def __init__(self, field: str, message: str, **extra: Any) -> None:
        super().__init__(f"{field}: {message}" if field else message)
        self.field = field
        self.message = message
        self.extra = extra

    def to_dict(self) -> dict[str, Any]:
        """Return the machine-readable form used by the HTTP and CLI edges."""
        out: dict[str, Any] = {"code": self.code, "message": self.message, "field": self.field}
        out.update(self.extra)
        return out

    def prefixed(self, prefix: str) -> "RequestError":
        """Return a copy whose field path is put under ``prefix``."""
        field = f"{prefix}.{self.field}" if self.field else prefix
        return type(self)(field, self.message, **self.extra)


class ProblemError(RequestError):
    """Raised by a domain when a problem is invalid (blocked start, unsolvable puzzle, ...)."""

    code = "invalid_problem"


class UnknownDomainError(RequestError):
    """Raised by the domain registry when a request names a domain it does not have."""

    code = "unknown_domain"


class LimitError(RequestError):
    """Raised when a request is over a configured cap; ``extra`` names the cap and its value."""

    code = "over_limit"


class PlanValidationError(BoundwiseError):
    """Raised by the plan validator when a plan does not replay; the plan is never published."""


class SearchError(BoundwiseError):
    """Raised by the engine on misuse or on an internal inconsistency."""
