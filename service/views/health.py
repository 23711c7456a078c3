"""Health of the process (``/healthz``) and readiness to take jobs (``/readyz``)."""

from __future__ import annotations

import logging

from flask import Blueprint, Response, current_app, jsonify

logger = logging.getLogger(__name__)

bp = Blueprint("health", __name__)


@bp.get("/healthz")
def healthz() -> Response:
    """Answer 200 while the process serves requests; it looks at nothing else."""
    return jsonify({"status": "ok"})


@bp.get("/readyz")
def readyz() -> tuple[Response, int]:
    """Answer 200 when Redis answers and at least one RQ worker is registered, else 503."""
    checks = current_app.extensions["boundwise"].store.readiness()
    ready = checks["redis"] and checks["workers"] > 0
    status = 200 if ready else 503
    return jsonify({"status": "ready" if ready else "not_ready", **checks}), status
