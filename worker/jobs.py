"""Run one planning job under RQ: read its request back, search it, publish every event at once.

``run_job(job_id)`` is what the API enqueues (by name, ``worker.keys.JOB_FUNCTION``).
The request document is read from the job's state hash, not from RQ's
arguments, and validated again here (``parse_request``): the worker trusts
nothing it did not check itself. The budgets it applies are the *effective*
ones the API stored at submit (the caller's, capped and defaulted by the
server), with a deadline counted again from now, since the job may have waited.

RQ's own job timeout is only a backstop set above the time budget; the search
stops on its budget inside the engine. Cancellation is cooperative: the engine
asks ``Publisher.cancelled`` between slices of work.
"""

from __future__ import annotations

import dataclasses
import json
import logging
import time
from collections.abc import Callable
from datetime import datetime, timezone
from typing import Any

from worker import metrics
from worker.engine import Budget
from worker.exceptions import PlanValidationError, RequestError
from worker.keys import JobStatus
from worker.publish import Publisher
from worker.request import JobRequest, parse_request
from worker.runner import run

logger = logging.getLogger(__name__)

__all__ = ["run_job", "effective_budget"]


def _least(a: float | None, b: float | None) -> float | None:
    if a is None:
        return b
    if b is None:
        return a
    return min(a, b)


def effective_budget(request: JobRequest, stored: dict[str, Any]) -> Budget:
    """Combine the request's own budget (deadline counted from now) with the stored effective one."""
    own = request.budget
    return Budget(
        time_s=_least(own.time_s, stored.get("time_s")),
        expansions=_least(own.expansions, stored.get("expansions")),
        max_states=_least(own.max_states, stored.get("max_states")),
        target_bound=own.target_bound,
    )


def _error(err: BaseException) -> dict[str, str]:
    code = "plan_rejected" if isinstance(err, PlanValidationError) else "internal_error"
    return {"code": code, "message": f"{type(err).__name__}: {err}"[:500]}


def run_job(job_id: str, *, connection: Any = None, clock: Callable[[], float] = time.monotonic) -> str:
    """Search the job ``job_id`` and publish its events; return the final status (or why it did not run).

    ``connection`` is the (bytes) Redis client; under RQ it is the current job's.
    """
    rq_job = None
    if connection is None:
        from rq import get_current_job

        rq_job = get_current_job()
        if rq_job is None:
            raise RuntimeError("run_job needs a Redis connection outside an RQ worker")
        connection = rq_job.connection
    pub = Publisher(connection, job_id, clock=clock)
    if not pub.load():
        logger.warning("job %s has no state (expired or never made); nothing to do", job_id)
        return "missing"
    status = pub.start()
    if status is not JobStatus.RUNNING:
        logger.info("job %s is %s; not searching it", job_id, status)
        return str(status.value if isinstance(status, JobStatus) else status)
    try:
        return _search(pub, clock)
    except Exception as err:
        error = _error(err)
        retries_left = getattr(rq_job, "retries_left", None) or 0
        if retries_left > 0:
            logger.exception("job %s failed; RQ will retry it (%d left)", job_id, retries_left)
            pub.requeued(error)
        else:
            logger.exception("job %s failed", job_id)
            if pub.stopped_early(JobStatus.FAILED, None, error):
                metrics.record_finished(JobStatus.FAILED.value, 0.0, 0, None)
        raise
    finally:
        pub.stop_heartbeat()


def _search(pub: Publisher, clock: Callable[[], float]) -> str:
    record = pub.record
    try:
        request = parse_request(json.loads(record["request"]), now=datetime.now(timezone.utc))
    except RequestError as err:
        if err.field == "budget.deadline":  # it passed while the job waited in the queue
            pub.stopped_early(JobStatus.BOUNDED, "time")
            return JobStatus.BOUNDED.value
        raise
    budget = effective_budget(request, json.loads(record.get("budget") or "{}"))
    request = dataclasses.replace(request, budget=budget)
    first_plan = True
    events = run(request, cancelled=pub.cancelled, clock=clock,
                 progress_every_s=pub.setting("progress_s", 0.5))
    try:
        for event in events:
            kind = event["type"]
            if kind == "improvement":
                if first_plan:
                    metrics.record_first_plan(event.get("elapsed_s") or 0.0)
                    first_plan = False
                written = pub.improvement(event)
            elif kind == "progress":
                written = pub.progress(event)
            else:
                status = pub.finished(event)
                if status is None:
                    return "gone"
                metrics.record_finished(status.value, event.get("elapsed_s") or 0.0,
                                        event.get("expansions") or 0, event.get("bound"))
                return status.value
            if not written:
                # Marked lost or otherwise taken over while we searched: stop, write nothing more.
                logger.warning("job %s is no longer running here; abandoning the search", pub.job_id)
                return "gone"
    finally:
        events.close()
    raise RuntimeError("the search ended without a finished event")
