"""Turn every exception a request can meet into one JSON error response, from one table.

Views raise; they never build an error response. ``ERRORS`` maps exception
classes to an HTTP status and a default code, and ``register`` installs one
handler per row. The body is always ``{"error": {"code", "message", "field"?,
...}}``; a ``RequestError`` adds its dotted field path and extras (a
``LimitError`` names its cap and value). Anything not in the table is a bug:
it is logged with its traceback and answered 500 with no internals.
"""

from __future__ import annotations

import logging
from collections.abc import Mapping
from typing import Any

from flask import Flask, Response, jsonify
from redis.exceptions import BusyLoadingError, ConnectionError as RedisConnectionError
from redis.exceptions import ReadOnlyError, ResponseError, TimeoutError as RedisTimeoutError
from werkzeug.exceptions import HTTPException

from worker.exceptions import LimitError, ProblemError, RequestError, UnknownDomainError

logger = logging.getLogger(__name__)

__all__ = [
    "ApiError", "MalformedJson", "UnsupportedContentType", "QueryError", "JobNotFound", "PlanNotFound",
    "IdempotencyConflict", "DomainNotFound", "ERRORS", "register", "error_body",
]


class ApiError(Exception):
    """An error of the HTTP edge itself; ``code`` and ``status`` come from the table."""

    code = "bad_request"

    def __init__(self, message: str, field: str | None = None, **extra: Any) -> None:
        super().__init__(message)
        self.message = message
        self.field = field
        self.extra = extra


class MalformedJson(ApiError):
    """The body is not valid JSON (or not UTF-8)."""

    code = "malformed_json"


class UnsupportedContentType(ApiError):
    """The body is not declared as JSON."""

    code = "unsupported_media_type"


class QueryError(RequestError):
    """A query parameter or header has a value the route cannot use; names it."""

    code = "invalid_parameter"


class JobNotFound(ApiError):
    """No job with this id is visible to the caller (never made, expired, or another tenant's)."""

    code = "job_not_found"


class PlanNotFound(ApiError):
    """The job has no plan (yet), or no plan of the asked revision."""

    code = "plan_not_found"


class DomainNotFound(ApiError):
    """No domain of this name is registered."""

    code = "domain_not_found"


class IdempotencyConflict(ApiError):
    """An Idempotency-Key came back with a different request, or while its first use is in flight."""

    code = "idempotency_conflict"


# (exception class, HTTP status, retry-after seconds or None). Flask picks the most
# specific class of a raised exception, so order here is for the reader only.
ERRORS: tuple[tuple[type[BaseException], int, int | None], ...] = (
    (MalformedJson, 400, None),
    (QueryError, 400, None),
    (JobNotFound, 404, None),
    (PlanNotFound, 404, None),
    (DomainNotFound, 404, None),
    (IdempotencyConflict, 409, None),
    (UnsupportedContentType, 415, None),
    (RequestError, 422, None),
    (ProblemError, 422, None),
    (UnknownDomainError, 422, None),
    (LimitError, 422, None),
    (RedisConnectionError, 503, 1),
    (RedisTimeoutError, 503, 1),
    (BusyLoadingError, 503, 2),
    (ReadOnlyError, 503, 2),
)

# Redis refusals that mean "full" or "not now", not a bug of ours (noeviction at maxmemory).
_UNAVAILABLE_REPLIES = ("OOM", "LOADING", "MASTERDOWN", "READONLY", "TRYAGAIN", "CLUSTERDOWN")

_HTTP_CODES = {400: "bad_request", 404: "not_found", 405: "method_not_allowed", 406: "not_acceptable",
               408: "request_timeout", 411: "length_required", 413: "over_limit",
               415: "unsupported_media_type", 429: "rate_limited", 431: "headers_too_large"}


def error_body(code: str, message: str, field: str | None = None, **extra: Any) -> dict[str, Any]:
    """Return the JSON error envelope."""
    error: dict[str, Any] = {"code": code, "message": message}
    if field is not None:
        error["field"] = field
    error.update(extra)
    return {"error": error}


def _respond(status: int, body: Mapping[str, Any], retry_after: int | None = None,
             headers: Mapping[str, str] | None = None) -> Response:
    response = jsonify(body)
    response.status_code = status
    if retry_after is not None:
        response.headers["Retry-After"] = str(retry_after)
    for name, value in (headers or {}).items():
        response.headers[name] = value
    return response


def _handler(status: int, retry_after: int | None):
    def handle(err: BaseException) -> Response:
        if isinstance(err, RequestError):
            return _respond(status, {"error": err.to_dict()})
        if isinstance(err, ApiError):
            return _respond(status, error_body(err.code, err.message, err.field, **err.extra))
        logger.warning("Redis unavailable: %s", err)
        return _respond(status, error_body("unavailable", "the job store is unavailable; retry shortly"),
                        retry_after)

    return handle


def _http(err: HTTPException) -> Response:
    status = err.code or 500
    code = _HTTP_CODES.get(status, "http_error")
    headers = {}
    if status == 405 and err.valid_methods:
        headers["Allow"] = ", ".join(sorted(err.valid_methods))
    message = err.description or err.name
    if status == 413:
        from flask import current_app

        settings = current_app.extensions.get("boundwise.limits")
        cap = getattr(settings, "max_body_bytes", None)
        if cap is not None:
            return _respond(413, error_body(code, f"the request body is over the cap max_body_bytes={cap}", "",
                                            cap="max_body_bytes", limit=cap))
    return _respond(status, error_body(code, message), headers=headers)


def _redis_reply(err: ResponseError) -> Response:
    if str(err).split(" ", 1)[0] in _UNAVAILABLE_REPLIES:
        logger.warning("Redis refused a write: %s", err)
        return _respond(503, error_body("unavailable", "the job store cannot take this now; retry shortly"), 2)
    return _bug(err)


def _bug(err: Exception) -> Response:
    logger.exception("unhandled error while answering a request", exc_info=err)
    return _respond(500, error_body("internal_error", "an internal error occurred; it has been logged"))


def register(app: Flask) -> None:
    """Install one handler per row of ``ERRORS``, the HTTP errors and the catch-all on ``app``."""
    for cls, status, retry_after in ERRORS:
        app.register_error_handler(cls, _handler(status, retry_after))
    app.register_error_handler(HTTPException, _http)
    app.register_error_handler(ResponseError, _redis_reply)
    app.register_error_handler(Exception, _bug)
