"""Name the Redis keys of a job and the words both sides use for it: statuses and event types.

The API (``service.queue``) and the RQ job (``worker.jobs`` with
``worker.publish``) share a job only through Redis, so the names live here, on
the worker side that both may import. Per job, all under one hash tag so a
clustered Redis keeps them on one node::

    bw:job:{<id>}:state     hash: status, owner, request, budgets, best, progress, ...
    bw:job:{<id>}:events    stream: status, improvement, progress and one final event
    bw:job:{<id>}:plans     hash: revision -> the plan document of that revision
    bw:job:{<id>}:history   list: one summary per improvement, in revision order
    bw:job:{<id>}:alive     string with a TTL, refreshed by the running job
    bw:job:{<id>}:cancel    string: present once a cancel was asked for
    bw:idem:<sha256>        string: the job an idempotency key (scoped per tenant) made

Job ids are made by ``new_job_id`` and checked by ``valid_job_id`` before they
go into a key, so caller text never reaches a key name unescaped.
"""

from __future__ import annotations

import hashlib
import json
import logging
import re
import secrets
from dataclasses import dataclass
from enum import Enum
from typing import Any

logger = logging.getLogger(__name__)

__all__ = [
    "JobStatus", "EventType", "FINAL", "JobKeys", "job_keys", "idempotency_key", "new_job_id",
    "valid_job_id", "dumps", "text", "QUEUES", "JOB_FUNCTION", "PREFIX",
]

PREFIX = "bw"
# Workers serve these in this order: every waiting "high" job goes first.
QUEUES = ("high", "default")
# The RQ job entry, named by path so the API never imports the search code to enqueue.
JOB_FUNCTION = "worker.jobs.run_job"
_JOB_ID = re.compile(r"^[A-Za-z0-9_-]{16,64}$")


class JobStatus(str, Enum):
    """Where a job is: waiting, searching, or one of the final outcomes."""

    QUEUED = "queued"
    RUNNING = "running"
    OPTIMAL = "optimal"  # the plan is proven cheapest
    BOUNDED = "bounded"  # stopped by a budget or the target bound; the plan is within its bound
    INFEASIBLE = "infeasible"  # proven: no plan exists
    CANCELLED = "cancelled"
    FAILED = "failed"  # an error in the service; the message says which
    LOST = "lost"  # the worker stopped answering mid-search; the best published plan is kept

    @property
    def final(self) -> bool:
        """Tell whether nothing more will happen to a job in this status."""
        return self not in (JobStatus.QUEUED, JobStatus.RUNNING)


FINAL = frozenset(s.value for s in JobStatus if s.final)


class EventType(str, Enum):
    """The kinds of entry in a job's event stream."""

    STATUS = "status"  # queued or running (a new attempt)
    IMPROVEMENT = "improvement"
    PROGRESS = "progress"
    FINISHED = "finished"  # always the last entry


@dataclass(frozen=True, slots=True)
class JobKeys:
    """The Redis key names of one job."""

    state: str
    events: str
    plans: str
    history: str
    alive: str
    cancel: str

    def all(self) -> tuple[str, ...]:
        """Return every key of the job (for expiry and deletion)."""
        return (self.state, self.events, self.plans, self.history, self.alive, self.cancel)


def job_keys(job_id: str) -> JobKeys:
    """Return the key names of ``job_id``; raise ValueError if it is not a well-formed id."""
    if not valid_job_id(job_id):
        raise ValueError(f"not a job id: {job_id!r}")
    base = f"{PREFIX}:job:{{{job_id}}}"
    return JobKeys(
        state=f"{base}:state",
        events=f"{base}:events",
        plans=f"{base}:plans",
        history=f"{base}:history",
        alive=f"{base}:alive",
        cancel=f"{base}:cancel",
    )


def new_job_id() -> str:
    """Return a fresh random job id (128 bits, URL-safe): ids are unguessable."""
    return secrets.token_urlsafe(16)


def valid_job_id(job_id: Any) -> bool:
    """Tell whether ``job_id`` has the shape of an id ``new_job_id`` makes."""
    return isinstance(job_id, str) and bool(_JOB_ID.match(job_id))


def idempotency_key(scope: str, key: str) -> str:
    """Return the Redis key of an idempotency key within ``scope`` (a tenant); hashed, never raw."""
    digest = hashlib.sha256(f"{len(scope)}:{scope}:{key}".encode("utf-8")).hexdigest()
    return f"{PREFIX}:idem:{digest}"


def dumps(value: Any) -> str:
    """Encode ``value`` as compact JSON; NaN and infinity are refused (JSON has no such numbers)."""
    return json.dumps(value, separators=(",", ":"), allow_nan=False)


def text(value: Any) -> str | None:
    """Return a Redis reply as ``str`` (None stays None)."""
    if value is None:
        return None
    return value.decode("utf-8") if isinstance(value, bytes) else str(value)
