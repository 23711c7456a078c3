"""Jobs: submit, read (with long-poll), plans, improvement history, event stream, cancel."""

from __future__ import annotations

import dataclasses
import logging
import math
import re
from collections.abc import Iterator

from flask import Blueprint, Response, current_app, g, jsonify, request
from redis.exceptions import RedisError

from service import auth, limits
from service.body import read_json
from service.errors import JobNotFound, QueryError
from service.queue import JobRecord, body_digest
from service.schemas import (
    improvements_document, job_document, links, plan_document, submitted_document,
)
from worker.keys import dumps
from worker.request import JobRequest, parse_request

logger = logging.getLogger(__name__)

bp = Blueprint("jobs", __name__, url_prefix="/v1/jobs")

_IDEMPOTENCY_KEY = re.compile(r"^[\x21-\x7e]{1,255}$")
_STREAM_ID = re.compile(r"^\d{1,20}-\d{1,20}$")


def _service():
    return current_app.extensions["boundwise"]


def _visible(job_id: str) -> JobRecord:
    record = _service().store.get(job_id)
    if record is None or not auth.can_see(record.owner):
        raise JobNotFound("no such job (never made, expired, or not yours)", "id")
    return record


def _int_arg(name: str, minimum: int) -> int | None:
    raw = request.args.get(name)
    if raw is None:
        return None
    if not re.fullmatch(r"\d{1,18}", raw) or int(raw) < minimum:
        raise QueryError(name, f"must be an integer of at least {minimum}")
    return int(raw)


def _float_arg(name: str, maximum: float) -> float | None:
    raw = request.args.get(name)
    if raw is None:
        return None
    try:
        value = float(raw)
    except ValueError:
        raise QueryError(name, "must be a number of seconds") from None
    if not math.isfinite(value) or not 0 <= value <= maximum:
        raise QueryError(name, f"must be between 0 and {maximum:g} seconds")
    return value


def _with_default_time(job: JobRequest, default_s: float, cap_s: float) -> JobRequest:
    if job.budget.time_s is not None:
        return job
    return dataclasses.replace(job, budget=dataclasses.replace(job.budget, time_s=min(default_s, cap_s)))


@bp.post("")
def submit() -> tuple[Response, int, dict[str, str]]:
    """Validate a job request fully, store it and queue it; 202 with the job id and links."""
    svc = _service()
    cfg = svc.config
    document = read_json(cfg.limits.max_body_bytes)
    tenant = auth.current_tenant()
    key = request.headers.get("Idempotency-Key")
    if key is not None and not _IDEMPOTENCY_KEY.match(key):
        raise QueryError("Idempotency-Key", "must be 1 to 255 printable ASCII characters without spaces")
    digest = body_digest(document)
    record = svc.store.replay(tenant, key, digest) if key is not None else None
    replayed = record is not None
    if record is None:
        caps = cfg.limits.caps_for(tenant)
        job = limits.apply_caps(_with_default_time(parse_request(document), cfg.default_time_s, caps.max_time_s),
                                caps)
        horizon = job.budget.time_s or caps.max_time_s
        record, replayed = svc.store.submit(
            job, owner=tenant, digest=digest, idempotency=key, request_id=g.get("request_id"),
            admit=lambda jid: svc.slots.admit(tenant, jid, caps.max_running_jobs, svc.store.is_active, horizon),
            release=lambda jid: svc.slots.release(tenant, jid))
    headers = {"Location": links(record.id)["self"]}
    if replayed:
        headers["Idempotent-Replayed"] = "true"
    return jsonify(submitted_document(record)), 202, headers


@bp.get("/<job_id>")
def status(job_id: str) -> Response:
    """Return the job; with ``wait``, hold the answer until a revision above ``after`` or a final status."""
    after = _int_arg("after", 0)
    wait = _float_arg("wait", _service().config.max_wait_s)
    record = _visible(job_id)
    if wait:
        record = _service().store.wait(job_id, after, wait) or record
    return jsonify(job_document(record))


@bp.get("/<job_id>/plan")
def plan(job_id: str) -> Response:
    """Return the best plan, or the plan of ``?revision=N``."""
    revision = _int_arg("revision", 1)
    record = _visible(job_id)
    return jsonify(plan_document(record, _service().store.plan(record, revision)))


@bp.get("/<job_id>/improvements")
def improvements(job_id: str) -> Response:
    """Return every published plan's cost, lower bound, bound, expansions and seconds."""
    record = _visible(job_id)
    return jsonify(improvements_document(record, _service().store.improvements(record)))


@bp.get("/<job_id>/events")
def events(job_id: str) -> Response:
    """Stream the job's events as Server-Sent Events, resumable with ``Last-Event-ID``."""
    last = request.headers.get("Last-Event-ID") or request.args.get("last_event_id") or "0-0"
    if not _STREAM_ID.match(last):
        raise QueryError("Last-Event-ID", "must be an event id this stream sent (digits-digits)")
    with_plans = request.args.get("plans", "1") not in ("0", "false", "no")
    record = _visible(job_id)
    cfg = _service().config
    follow = _service().store.follow(record, last, cfg.sse_max_s, cfg.sse_keepalive_s, with_plans)

    def stream() -> Iterator[str]:
        yield "retry: 2000\n\n"
        try:
            for event in follow:
                if event is None:
                    yield ": keepalive\n\n"
                    continue
                yield f"id: {event.id}\nevent: {event.type}\ndata: {dumps(event.data)}\n\n"
        except RedisError as err:  # the client reconnects with its Last-Event-ID
            logger.warning("event stream of job %s cut: %s", job_id, err)

    return Response(stream(), mimetype="text/event-stream",
                    headers={"Cache-Control": "no-cache", "X-Accel-Buffering": "no"})


@bp.delete("/<job_id>")
def cancel(job_id: str) -> tuple[Response, int]:
    """Cancel the job: 200 once it is final (a queued job is cancelled at once), 202 while it stops."""
    record = _service().store.cancel(_visible(job_id))
    return jsonify(job_document(record)), 200 if record.final else 202
