"""Health of the process (``/healthz``) and readiness to take jobs (``/readyz``)."""

from __future__ import annotations

import logging

from flask import Blueprint, Response, current_app, jsonify

from worker.engine import kernels

logger = logging.getLogger(__name__)

bp = Blueprint("health", __name__)


@bp.get("/healthz")
def healthz() -> Response:
    """Answer 200 while the process serves requests; it looks at nothing else."""
    return jsonify({"status": "ok"})


@bp.get("/readyz")
def readyz() -> tuple[Response, int] | tuple[Response, int, dict[str, str]]:
    """Answer 200 when Redis answers and at least one RQ worker is registered, else 503 with Retry-After."""
    checks = current_app.extensions["boundwise"].store.readiness()
    ready = checks["redis"] and checks["workers"] > 0
    # The search backend this installation imports ("compiled" or "python");
    # workers on other machines report theirs on each finished job.
    body = jsonify({"status": "ready" if ready else "not_ready", **checks, "search_backend": kernels.BACKEND})
    if ready:
        return body, 200
    return body, 503, {"Retry-After": "2"}
