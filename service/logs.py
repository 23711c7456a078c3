"""Write structured JSON log lines, each carrying the request id and the job id it belongs to.

The API takes the caller's ``X-Request-ID`` (when it is a plain token of at
most 128 characters) or makes one, answers with it in the same header, and
binds it to every log line written while the request is handled. Views bind
the job id they act on with ``bind_job``. Inside an RQ work-horse both ids are
read from the current job (its id, and ``meta["request_id"]`` saved at submit),
so a job's lines in the API and in the worker can be joined on either id.

Library modules only get loggers; handlers are set once, by the entry points
(``boundwise serve``, ``boundwise worker``, the gunicorn config), through
``configure``.
"""

from __future__ import annotations

import contextvars
import json
import logging
import re
import sys
import time
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import datetime, timezone
from typing import Any, TextIO

from flask import Flask, Response, g, request

logger = logging.getLogger(__name__)

__all__ = ["JsonFormatter", "configure", "init_app", "bind_job", "bind_jobs", "bound", "request_id", "job_id",
           "REQUEST_ID_HEADER"]

REQUEST_ID_HEADER = "X-Request-ID"
_REQUEST_ID_OK = re.compile(r"^[A-Za-z0-9._:-]{1,128}$")
_request_id: contextvars.ContextVar[str | None] = contextvars.ContextVar("boundwise_request_id", default=None)
_job_id: contextvars.ContextVar[str | None] = contextvars.ContextVar("boundwise_job_id", default=None)
# LogRecord attributes that are not user extras.
_STANDARD = set(vars(logging.LogRecord("", 0, "", 0, "", (), None))) | {"message", "asctime", "taskName"}


def _current_job() -> Any:
    try:
        from rq import get_current_job
    except ImportError:  # the API alone can run without RQ importable in odd test setups
        return None
    try:
        return get_current_job()
    except Exception:  # no job context, or its connection gone: lines still get written
        return None


def request_id() -> str | None:
    """Return the request id bound to this context (the API request, or the job's origin)."""
    rid = _request_id.get()
    if rid is None:
        job = _current_job()
        if job is not None:
            rid = (job.meta or {}).get("request_id")
    return rid


def job_id() -> str | None:
    """Return the job id bound to this context (set by a view, or the running RQ job)."""
    jid = _job_id.get()
    if jid is None:
        job = _current_job()
        if job is not None:
            jid = job.id
    return jid


def bind_job(jid: str | None) -> None:
    """Put ``jid`` on every later log line of the current request or task."""
    _job_id.set(jid)


@contextmanager
def bound(*, rid: str | None = None, jid: str | None = None) -> Iterator[None]:
    """Bind a request id and/or job id for the lines written inside the block."""
    tokens = []
    if rid is not None:
        tokens.append((_request_id, _request_id.set(rid)))
    if jid is not None:
        tokens.append((_job_id, _job_id.set(jid)))
    try:
        yield
    finally:
        for var, token in reversed(tokens):
            var.reset(token)


def bind_jobs(worker_class: type) -> type:
    """Return a subclass of an RQ worker class whose lines, while it runs a job, carry the job's ids.

    The ids are bound around ``execute_job``, so both the worker's own lines
    about the job and every line of the work-horse it forks (which inherits the
    binding) carry the job id and the id of the request that submitted it.
    """
    class BoundWorker(worker_class):  # type: ignore[misc, valid-type]
        def execute_job(self, job: Any, queue: Any) -> Any:
            rid = (job.meta or {}).get("request_id") or None
            with bound(rid=rid, jid=job.id):
                return super().execute_job(job, queue)

    BoundWorker.__name__ = BoundWorker.__qualname__ = worker_class.__name__
    return BoundWorker


class JsonFormatter(logging.Formatter):
    """Format each record as one JSON object per line, with request_id and job_id always present."""

    def format(self, record: logging.LogRecord) -> str:
        out: dict[str, Any] = {
            "ts": datetime.fromtimestamp(record.created, timezone.utc).isoformat(timespec="milliseconds"),
            "level": record.levelname.lower(),
            "logger": record.name,
            "message": record.getMessage(),
            "request_id": request_id(),
            "job_id": job_id(),
        }
        for key, value in vars(record).items():
            if key not in _STANDARD and key not in out and not key.startswith("_"):
                out[key] = value
        if record.exc_info:
            out["exception"] = self.formatException(record.exc_info)
        if record.stack_info:
            out["stack"] = self.formatStack(record.stack_info)
        return json.dumps(out, default=str, separators=(",", ":"))


def configure(level: str | int = "INFO", stream: TextIO | None = None, fmt: str = "json") -> None:
    """Set the root handler of an entry point: JSON lines (``fmt="json"``) or plain text."""
    handler = logging.StreamHandler(stream or sys.stderr)
    if fmt == "json":
        handler.setFormatter(JsonFormatter())
    else:
        handler.setFormatter(logging.Formatter("%(asctime)s %(levelname)s %(name)s: %(message)s"))
    root = logging.getLogger()
    for old in list(root.handlers):
        root.removeHandler(old)
    root.addHandler(handler)
    root.setLevel(level.upper() if isinstance(level, str) else level)


def _incoming_request_id() -> str:
    given = request.headers.get(REQUEST_ID_HEADER, "")
    # Anything else (too long, spaces, control characters) could forge log
    # lines or headers downstream, so it is replaced rather than passed on.
    return given if _REQUEST_ID_OK.match(given) else uuid.uuid4().hex


def init_app(app: Flask) -> None:
    """Give every request of ``app`` a request id, echo it back and log one access line."""
    access = logging.getLogger("boundwise.access")

    @app.before_request
    def _bind_request() -> None:
        rid = _incoming_request_id()
        g.request_id = rid
        g.log_started = time.perf_counter()
        _request_id.set(rid)
        _job_id.set((request.view_args or {}).get("job_id"))

    @app.after_request
    def _echo(response: Response) -> Response:
        rid = g.get("request_id")
        if rid:
            response.headers[REQUEST_ID_HEADER] = rid
        started = g.get("log_started")
        principal = g.get("principal")
        access.info(
            "%s %s %s", request.method, request.path, response.status_code,
            extra={"method": request.method, "path": request.path, "status": response.status_code,
                   "duration_ms": round((time.perf_counter() - started) * 1000, 3) if started else None,
                   "tenant": getattr(principal, "tenant", None)},
        )
        return response

    @app.teardown_request
    def _unbind(_exc: BaseException | None) -> None:
        # Threads are reused across requests: clear so no id leaks into the next one.
        _request_id.set(None)
        _job_id.set(None)
