"""Keep jobs in Redis and put them on RQ queues: the one module of the API that talks to either.

``JobStore`` writes a submitted job's state hash and enqueues it in one
transaction, reads a job back (a running job whose heartbeat is gone goes to
``worker.reaper``: reported lost, and queued again while its retries allow),
waits for a newer revision with a blocking stream read, follows the event
stream, cancels, and answers the readiness check. Key names and statuses come from ``worker.keys``, which
the worker side shares.
"""

from __future__ import annotations

import hashlib
import json
import logging
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from datetime import datetime, timezone
from typing import Any

from rq import Queue, Retry, Worker

from service.config import Config
from service.errors import IdempotencyConflict, PlanNotFound
from worker import metrics
from worker.keys import (
    FINAL, JOB_FUNCTION, QUEUES, EventType, JobStatus, dumps, idempotency_key, job_keys, new_job_id, text,
    valid_job_id,
)
from worker.reaper import Reaper
from worker.request import JobRequest

logger = logging.getLogger(__name__)

__all__ = ["JobStore", "JobRecord", "Event", "body_digest"]

# KEYS: state, cancel, events.  ARGV: now, cancel-key TTL s, final event JSON.
_CANCEL = """
local s = redis.call('HGET', KEYS[1], 'status')
if not s then return false end
if s == 'queued' then
  redis.call('HSET', KEYS[1], 'status', 'cancelled', 'finished_at', ARGV[1], 'stop_reason', 'cancelled')
  redis.call('XADD', KEYS[3], '*', 'type', 'finished', 'data', ARGV[3])
  return 'cancelled'
end
if s == 'running' then
  redis.call('SET', KEYS[2], '1', 'EX', ARGV[2])
  return 'cancelling'
end
return s
"""

# The longest a single blocking read may take, so a stale heartbeat is noticed while waiting.
_BLOCK_SLICE_S = 2.0


def _now_iso() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds").replace("+00:00", "Z")


def _seconds_between(start: str | None, end: str | None) -> float | None:
    if not start:
        return None
    t0 = datetime.fromisoformat(start.replace("Z", "+00:00"))
    t1 = datetime.fromisoformat(end.replace("Z", "+00:00")) if end else datetime.now(timezone.utc)
    return round(max(0.0, (t1 - t0).total_seconds()), 3)


def body_digest(document: Any) -> str:
    """Return a digest of a request document that ignores key order and spacing."""
    return hashlib.sha256(json.dumps(document, sort_keys=True, separators=(",", ":")).encode()).hexdigest()


@dataclass(frozen=True, slots=True)
class JobRecord:
    """A job as stored: its status, owner, budgets, best plan summary and progress."""

    id: str
    status: JobStatus
    owner: str | None
    domain: str
    queue: str
    created_at: str
    started_at: str | None
    finished_at: str | None
    revision: int
    best: dict[str, Any] | None
    progress: dict[str, Any]
    budget_requested: dict[str, Any]
    budget: dict[str, Any]
    stop_reason: str | None
    proven_optimal: bool
    proven_infeasible: bool
    attempts: int
    retries: int
    error: dict[str, Any] | None = None
    backend: str | None = None
    attempt_log: tuple[dict[str, Any], ...] = ()

    @property
    def final(self) -> bool:
        return self.status.value in FINAL

    @property
    def queued_s(self) -> float | None:
        """Seconds the job waited for a worker (so far, if it still waits)."""
        end = self.started_at or self.finished_at
        return _seconds_between(self.created_at, end)

    @classmethod
    def parse(cls, job_id: str, raw: dict[str, str]) -> "JobRecord":
        def loads(name: str, default: Any) -> Any:
            value = raw.get(name)
            return json.loads(value) if value else default

        return cls(
            id=job_id,
            status=JobStatus(raw["status"]),
            owner=raw.get("owner"),
            domain=raw.get("domain", ""),
            queue=raw.get("queue", "default"),
            created_at=raw.get("created_at", ""),
            started_at=raw.get("started_at") or None,
            finished_at=raw.get("finished_at") or None,
            revision=int(raw.get("revision") or 0),
            best=loads("best", None),
            progress=loads("progress", {}),
            budget_requested=loads("budget_requested", {}),
            budget=loads("budget", {}),
            stop_reason=raw.get("stop_reason") or None,
            proven_optimal=raw.get("proven_optimal") == "1",
            proven_infeasible=raw.get("proven_infeasible") == "1",
            attempts=int(raw.get("attempts") or 0),
            retries=int(raw.get("retries") or 0),
            error=loads("error", None),
            backend=raw.get("backend") or None,
            attempt_log=tuple(loads("attempt_log", [])),
        )


@dataclass(frozen=True, slots=True)
class Event:
    """One entry of a job's event stream: its stream id, type and data."""

    id: str
    type: str
    data: dict[str, Any] = field(default_factory=dict)

    @property
    def final(self) -> bool:
        return self.type == EventType.FINISHED.value


class JobStore:
    """Jobs in Redis and RQ, as the API sees them."""

    def __init__(self, redis: Any, config: Config, *, clock: Callable[[], float] = time.monotonic) -> None:
        self.redis = redis
        self.config = config
        self.clock = clock
        self.queues = {name: Queue(name, connection=redis) for name in QUEUES}
        self._cancel = redis.register_script(_CANCEL)
        self.reaper = Reaper(redis)

    # -- submit -------------------------------------------------------------------------------

    def submit(self, request: JobRequest, *, owner: str, digest: str, idempotency: str | None = None,
               request_id: str | None = None, admit: Callable[[str], None] | None = None,
               release: Callable[[str], None] | None = None) -> tuple[JobRecord, bool]:
        """Store and enqueue ``request``; return the job and whether it is an idempotent replay.

        ``admit(job_id)`` may raise to refuse the job (a tenant's running-jobs
        cap) before anything is written; ``release(job_id)`` undoes it when the
        write fails.
        """
        job_id = new_job_id()
        idem = idempotency_key(owner, idempotency) if idempotency is not None else None
        if idem is not None:
            if not self.redis.set(idem, f"{job_id} {digest}", nx=True, ex=self.config.idempotency_ttl_s):
                return self._replay(idem, digest), True
        try:
            if admit is not None:
                admit(job_id)
            try:
                state = self._write(job_id, request, owner, request_id)
            except BaseException:
                if release is not None:
                    release(job_id)
                raise
        except BaseException:
            if idem is not None:
                self.redis.delete(idem)
            raise
        metrics.record_submitted(request.queue)
        return JobRecord.parse(job_id, state), False

    def replay(self, owner: str, idempotency: str, digest: str) -> JobRecord | None:
        """Return the job an earlier request with this key made, or None if the key is new."""
        idem = idempotency_key(owner, idempotency)
        if self.redis.exists(idem):
            return self._replay(idem, digest)
        return None

    def _replay(self, idem: str, digest: str) -> JobRecord:
        deadline = self.clock() + 2.0
        while True:
            stored = text(self.redis.get(idem))
            if stored is None:
                raise IdempotencyConflict("the first request with this Idempotency-Key failed; send it again",
                                          "Idempotency-Key")
            job_id, _, first_digest = stored.partition(" ")
            if first_digest != digest:
                raise IdempotencyConflict("this Idempotency-Key was already used with a different request",
                                          "Idempotency-Key")
            record = self.get(job_id)
            if record is not None:
                return record
            if self.clock() > deadline:  # the first request is still being written
                raise IdempotencyConflict("the first request with this Idempotency-Key is still being "
                                          "processed; retry shortly", "Idempotency-Key")
            time.sleep(0.02)

    def _write(self, job_id: str, request: JobRequest, owner: str, request_id: str | None) -> dict[str, str]:
        keys = job_keys(job_id)
        cfg = self.config
        budget = request.budget
        requested = request.document.get("budget") or {}
        effective = {"time_s": budget.time_s, "expansions": budget.expansions, "max_states": budget.max_states,
                     "target_bound": budget.target_bound,
                     "deadline": request.deadline.isoformat().replace("+00:00", "Z") if request.deadline else None}
        created = _now_iso()
        state = {
            "status": JobStatus.QUEUED.value,
            "owner": owner,
            "domain": request.kind.name,
            "queue": request.queue,
            "created_at": created,
            "request": dumps(request.document),
            "budget_requested": dumps(requested),
            "budget": dumps(effective),
            "retries": str(request.retries),
            "attempts": "0",
            "revision": "0",
            "settings": dumps(cfg.worker_settings()),
            "request_id": request_id or "",
        }
        pipe = self.redis.pipeline(transaction=True)
        # RQ opens the transaction (MULTI) itself, so its commands go first; all run atomically.
        # RQ's timeout is a backstop only: the engine stops on the time budget itself.
        timeout = int((budget.time_s or cfg.limits.caps.max_time_s) + cfg.job_timeout_margin_s)
        self.queues[request.queue].enqueue_call(
            JOB_FUNCTION, args=(job_id,), job_id=job_id, timeout=timeout,
            result_ttl=600, failure_ttl=cfg.result_ttl_s, ttl=cfg.result_ttl_s,
            retry=Retry(max=request.retries) if request.retries > 0 else None,
            description=f"boundwise {request.kind.name} job {job_id}",
            meta={"request_id": request_id} if request_id else None,
            pipeline=pipe,
        )
        pipe.hset(keys.state, mapping=state)
        pipe.xadd(keys.events, {"type": EventType.STATUS.value,
                                "data": dumps({"status": JobStatus.QUEUED.value, "created_at": created})})
        pipe.expire(keys.state, cfg.result_ttl_s)
        pipe.expire(keys.events, cfg.result_ttl_s)
        pipe.execute()
        return state

    # -- read ---------------------------------------------------------------------------------

    def _read(self, job_id: str) -> tuple[dict[str, str], bool, str]:
        keys = job_keys(job_id)
        pipe = self.redis.pipeline(transaction=True)
        pipe.hgetall(keys.state)
        pipe.exists(keys.alive)
        pipe.xrevrange(keys.events, count=1)
        raw, alive, last = pipe.execute()
        record = {text(k): text(v) for k, v in raw.items()}
        cursor = text(last[0][0]) if last else "0-0"
        return record, bool(alive), cursor

    def get(self, job_id: str) -> JobRecord | None:
        """Return the job ``job_id`` (or None); a running job without a heartbeat becomes ``lost`` here."""
        return self._get(job_id)[0]

    def _get(self, job_id: str) -> tuple[JobRecord | None, str]:
        if not valid_job_id(job_id):
            return None, "0-0"
        raw, alive, cursor = self._read(job_id)
        if not raw or "status" not in raw:
            return None, cursor
        if raw["status"] == JobStatus.RUNNING.value and not alive:
            # The worker died: the reaper reports the attempt lost and, while the
            # request's retries allow, queues the job again (one transaction).
            self.reaper.reap(job_id)
            raw, alive, cursor = self._read(job_id)
        return JobRecord.parse(job_id, raw), cursor

    def is_active(self, job_id: str) -> bool:
        """Tell whether the job is queued or running (used to count a tenant's running jobs).

        One read of the status alone: this runs once per counted job on every
        submit. A running job whose worker died still counts until the reaper
        (every worker sweeps) or a read of the job turns it around.
        """
        if not valid_job_id(job_id):
            return False
        status = text(self.redis.hget(job_keys(job_id).state, "status"))
        return status in (JobStatus.QUEUED.value, JobStatus.RUNNING.value)

    def wait(self, job_id: str, after: int | None, wait_s: float) -> JobRecord | None:
        """Return the job once its revision is above ``after`` or it is final, or after ``wait_s``."""
        record, cursor = self._get(job_id)
        if record is None:
            return None
        after = record.revision if after is None else after
        deadline = self.clock() + wait_s
        events = job_keys(job_id).events
        while not (record.final or record.revision > after):
            remaining = deadline - self.clock()
            if remaining <= 0:
                break
            block_ms = max(1, int(min(remaining, _BLOCK_SLICE_S) * 1000))
            reply = self.redis.xread({events: cursor}, count=100, block=block_ms)
            if reply:
                cursor = text(reply[0][1][-1][0])
            record, _ = self._get(job_id)
            if record is None:
                return None
        return record

    def plan(self, record: JobRecord, revision: int | None) -> dict[str, Any]:
        """Return the plan document of ``revision`` (default: the best); raise PlanNotFound."""
        rev = record.revision if revision is None else revision
        if rev < 1 or rev > record.revision:
            if record.revision == 0:
                raise PlanNotFound("the job has no plan yet", "revision" if revision is not None else None)
            raise PlanNotFound(f"no plan of revision {rev}; revisions are 1..{record.revision}", "revision")
        raw = self.redis.hget(job_keys(record.id).plans, str(rev))
        if raw is None:
            raise PlanNotFound(f"the plan of revision {rev} is no longer kept", "revision")
        plan = json.loads(raw)
        if rev == record.revision and record.best is not None:
            # The lower bound may have risen since the plan was found: report the proven one.
            plan["lower_bound"] = record.best.get("lower_bound")
            plan["bound"] = record.best.get("bound")
        return plan

    def improvements(self, record: JobRecord) -> list[dict[str, Any]]:
        """Return one summary per published plan, oldest first."""
        return [json.loads(x) for x in self.redis.lrange(job_keys(record.id).history, 0, -1)]

    def follow(self, record: JobRecord, after: str, max_s: float, keepalive_s: float,
               with_plans: bool = True) -> Iterator[Event | None]:
        """Yield the job's events after stream id ``after`` as they come (None when idle for a keepalive).

        Ends after the final event, or after ``max_s`` (the caller resumes from
        the last id it got). Improvements carry their plan when ``with_plans``.
        """
        keys = job_keys(record.id)
        deadline = self.clock() + max_s
        idle_since = self.clock()
        cursor = after
        # A final job's events are all written (the final status and the final
        # event go in together): read what is left without waiting, then stop.
        drain = record.final
        while True:
            remaining = deadline - self.clock()
            if remaining <= 0:
                return
            block_ms = max(1, int(min(remaining, _BLOCK_SLICE_S, keepalive_s) * 1000))
            reply = self.redis.xread({keys.events: cursor}, count=100, block=None if drain else block_ms)
            if not reply:
                if drain:
                    return
                current = self.get(record.id)
                if current is None:  # expired under us: nothing more will come
                    return
                if current.final:
                    drain = True
                    continue
                if self.clock() - idle_since >= keepalive_s:
                    idle_since = self.clock()
                    yield None
                continue
            for entry_id, fields in reply[0][1]:
                cursor = text(entry_id)
                fields = {text(k): text(v) for k, v in fields.items()}
                data = json.loads(fields.get("data") or "{}")
                event = Event(id=cursor, type=fields.get("type", ""), data=data)
                if with_plans and event.type == EventType.IMPROVEMENT.value:
                    plan = self.redis.hget(keys.plans, str(data.get("revision")))
                    data["plan"] = json.loads(plan)["steps"] if plan is not None else None
                idle_since = self.clock()
                yield event
                if event.final:
                    return

    # -- cancel -------------------------------------------------------------------------------

    def cancel(self, record: JobRecord) -> JobRecord:
        """Cancel the job: a queued one at once, a running one by asking it to stop; return it after."""
        keys = job_keys(record.id)
        event = {"status": JobStatus.CANCELLED.value, "stop_reason": "cancelled", "revision": record.revision,
                 "cost": (record.best or {}).get("cost"), "proven_optimal": False, "proven_infeasible": False}
        outcome = text(self._cancel(keys=[keys.state, keys.cancel, keys.events],
                                    args=[_now_iso(), self.config.result_ttl_s, dumps(event)]))
        if outcome == JobStatus.CANCELLED.value:
            self.queues.get(record.queue, self.queues["default"]).remove(record.id)
            metrics.record_finished(JobStatus.CANCELLED.value, 0.0, 0, None)
            logger.info("job %s cancelled while queued", record.id)
        elif outcome == "cancelling":
            logger.info("job %s asked to stop", record.id)
        updated = self.get(record.id)
        return updated if updated is not None else record

    # -- health -------------------------------------------------------------------------------

    def readiness(self) -> dict[str, Any]:
        """Return whether Redis answers and how many RQ workers are registered."""
        try:
            self.redis.ping()
        except Exception as err:  # any failure to reach Redis means not ready, whatever its class
            logger.warning("readiness: Redis unreachable: %s", err)
            return {"redis": False, "workers": 0}
        return {"redis": True, "workers": Worker.count(connection=self.redis)}
