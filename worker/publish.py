"""Write what a running job does to Redis: its state hash, event stream, plans, heartbeat.

One ``Publisher`` per attempt of a job. Every write goes through a small Lua
script that first checks the job is still ``running``, so a job the API has
already called ``lost`` (its heartbeat went stale) or that was cancelled while
queued is never overwritten: final statuses are sticky.

The running job proves it is alive by refreshing ``alive`` (a key with a TTL
of ``lost_after_s``) from a background thread every ``heartbeat_s``; a
killed work-horse takes the thread with it, the key expires, and the API
reports the job lost. ``cancelled()`` is the engine's cheap cancel check: it
reads the job's cancel key at most every ``cancel_poll_s`` seconds.
"""

from __future__ import annotations

import contextvars
import json
import logging
import threading
import time
from collections.abc import Callable, Mapping
from datetime import datetime, timezone
from typing import Any

from redis.exceptions import RedisError

from worker.keys import EventType, JobKeys, JobStatus, dumps, job_keys, text

logger = logging.getLogger(__name__)

__all__ = ["Publisher", "status_of", "utc_now"]

# KEYS: state, events, plans, history, alive.  ARGV: event type, event JSON, TTL s,
# revision ('' for none), plan JSON, history JSON, '1' to drop the heartbeat, this
# attempt's number, then field/value pairs for the state hash. Returns the stream id,
# or nil when the job is no longer running, or runs as a later attempt (a worker
# cut off long enough to be reported lost comes back to find its job re-run):
# nothing is written then.
_PUBLISH = """
if redis.call('HGET', KEYS[1], 'status') ~= 'running' then return false end
if redis.call('HGET', KEYS[1], 'attempts') ~= ARGV[8] then return false end
if #ARGV > 8 then redis.call('HSET', KEYS[1], unpack(ARGV, 9)) end
if ARGV[4] ~= '' then
  redis.call('HSET', KEYS[3], ARGV[4], ARGV[5])
  redis.call('RPUSH', KEYS[4], ARGV[6])
end
local id = redis.call('XADD', KEYS[2], '*', 'type', ARGV[1], 'data', ARGV[2])
local ttl = tonumber(ARGV[3])
for i = 1, 4 do redis.call('EXPIRE', KEYS[i], ttl) end
if ARGV[7] == '1' then redis.call('DEL', KEYS[5]) end
return id
"""

# KEYS: state, alive, events.  ARGV: now (ISO), heartbeat TTL ms, status event JSON, TTL s.
# Moves a queued job to running; returns the status the job had otherwise.
_START = """
local s = redis.call('HGET', KEYS[1], 'status')
if not s then return 'missing' end
if s ~= 'queued' then return s end
redis.call('HSET', KEYS[1], 'status', 'running', 'started_at', ARGV[1])
redis.call('HDEL', KEYS[1], 'error')
redis.call('HINCRBY', KEYS[1], 'attempts', 1)
redis.call('SET', KEYS[2], '1', 'PX', ARGV[2])
redis.call('XADD', KEYS[3], '*', 'type', 'status', 'data', ARGV[3])
local ttl = tonumber(ARGV[4])
redis.call('EXPIRE', KEYS[1], ttl)
redis.call('EXPIRE', KEYS[3], ttl)
return 'running'
"""

# KEYS: state, alive.  ARGV: heartbeat TTL ms, attempt number.  Refreshes the heartbeat
# of a running job while this attempt is the job's current one.
_HEARTBEAT = """
local s = redis.call('HGET', KEYS[1], 'status')
if s == 'running' and redis.call('HGET', KEYS[1], 'attempts') ~= ARGV[2] then return 'superseded' end
if s == 'running' then redis.call('SET', KEYS[2], '1', 'PX', ARGV[1]) end
return s
"""


def utc_now() -> str:
    """Return the current UTC time as ISO 8601 with milliseconds and a Z."""
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds").replace("+00:00", "Z")


def status_of(finished: Mapping[str, Any]) -> JobStatus:
    """Return the job status a runner ``finished`` event ends in."""
    if finished.get("proven_infeasible"):
        return JobStatus.INFEASIBLE
    if finished.get("proven_optimal"):
        return JobStatus.OPTIMAL
    if finished.get("stop_reason") == "cancelled":
        return JobStatus.CANCELLED
    return JobStatus.BOUNDED


_COUNTERS = ("expansions", "generated", "reopened", "stored", "elapsed_s")


def _progress(event: Mapping[str, Any]) -> dict[str, Any]:
    out = {k: event.get(k) for k in _COUNTERS}
    out.update(cost=event.get("cost"), lower_bound=event.get("lower_bound"), bound=event.get("bound"),
               weight=event.get("weight"))
    return out


class Publisher:
    """Publish one attempt of one job: start it, beat, check for cancel, write events, finish."""

    def __init__(self, redis: Any, job_id: str, *, clock: Callable[[], float] = time.monotonic) -> None:
        self.redis = redis
        self.job_id = job_id
        self.keys: JobKeys = job_keys(job_id)
        self.clock = clock
        self.record: dict[str, str] = {}
        self.settings: dict[str, float] = {}
        self.best: dict[str, Any] | None = None
        self.revision = 0
        self.attempt = 0
        self.started_at: str | None = None
        self._publish = redis.register_script(_PUBLISH)
        self._start = redis.register_script(_START)
        self._heartbeat = redis.register_script(_HEARTBEAT)
        self._beat_stop = threading.Event()
        self._beat_thread: threading.Thread | None = None
        self._gone = threading.Event()  # the job stopped being ours (lost, cancelled while queued)
        self._cancel_seen = False
        self._last_cancel_check = -float("inf")

    # -- reading the job ---------------------------------------------------------------------

    def load(self) -> dict[str, str]:
        """Read the job's state hash (request, budgets, settings); empty if the job is unknown."""
        raw = self.redis.hgetall(self.keys.state)
        self.record = {text(k): text(v) for k, v in raw.items()}
        self.settings = json.loads(self.record.get("settings") or "{}")
        # A retried attempt goes on from what earlier attempts published: revisions
        # keep counting up and a plan is only published if it beats the best so far.
        self.revision = int(self.record.get("revision") or 0)
        self.best = json.loads(self.record["best"]) if self.record.get("best") else None
        return self.record

    def setting(self, name: str, default: float) -> float:
        """Return a per-job setting written by the API at submit, or ``default``."""
        value = self.settings.get(name)
        return float(value) if isinstance(value, (int, float)) else default

    @property
    def ttl(self) -> int:
        return int(self.setting("ttl_s", 604800))

    @property
    def _alive_ms(self) -> int:
        return int(self.setting("lost_after_s", 5.0) * 1000)

    # -- lifecycle -----------------------------------------------------------------------------

    def start(self) -> JobStatus | str:
        """Move the job from queued to running and start the heartbeat; return the resulting status.

        Anything but ``running`` means this attempt must not search (cancelled
        while queued, already final, or unknown).
        """
        attempt = self.attempt = int(self.record.get("attempts") or 0) + 1
        self.started_at = utc_now()
        event = dumps({"status": JobStatus.RUNNING.value, "attempt": attempt, "started_at": self.started_at})
        status = text(self._start(keys=[self.keys.state, self.keys.alive, self.keys.events],
                                  args=[utc_now(), self._alive_ms, event, self.ttl]))
        if status != JobStatus.RUNNING.value:
            return status
        # Run in a copy of this context, so the beat's log lines still know their job (RQ keeps
        # the current job in a context variable).
        self._beat_thread = threading.Thread(target=contextvars.copy_context().run, args=(self._beat,),
                                             name=f"heartbeat-{self.job_id[:8]}", daemon=True)
        self._beat_thread.start()
        return JobStatus.RUNNING

    def _beat(self) -> None:
        period = self.setting("heartbeat_s", 1.0)
        while not self._beat_stop.wait(period):
            try:
                status = text(self._heartbeat(keys=[self.keys.state, self.keys.alive],
                                              args=[self._alive_ms, str(self.attempt)]))
            except RedisError as err:  # a blip: the next beat may get through before the TTL runs out
                logger.warning("heartbeat of job %s failed: %s", self.job_id, err)
                continue
            if status != JobStatus.RUNNING.value:
                logger.warning("job %s is %s elsewhere; stopping this attempt", self.job_id, status)
                self._gone.set()
                return

    def stop_heartbeat(self) -> None:
        """Stop the heartbeat thread (the alive key is dropped by the final write or expires)."""
        self._beat_stop.set()
        if self._beat_thread is not None:
            self._beat_thread.join(timeout=5)

    def cancelled(self) -> bool:
        """Tell the engine to stop: a cancel was asked for, or the job is no longer this attempt's."""
        if self._gone.is_set() or self._cancel_seen:
            return True
        now = self.clock()
        if now - self._last_cancel_check < self.setting("cancel_poll_s", 0.05):
            return False
        self._last_cancel_check = now
        try:
            self._cancel_seen = bool(self.redis.exists(self.keys.cancel))
        except RedisError as err:  # keep searching; the publish that follows will surface a real outage
            logger.warning("cancel check of job %s failed: %s", self.job_id, err)
        return self._cancel_seen

    # -- writing events -------------------------------------------------------------------------

    def _write(self, kind: EventType, data: Mapping[str, Any], fields: Mapping[str, Any], *,
               revision: int | None = None, plan: Any = None, history: Any = None, final: bool = False) -> bool:
        data = {k: v for k, v in data.items() if k != "type"}  # the stream entry carries the type
        args: list[Any] = [kind.value, dumps(data), self.ttl,
                           "" if revision is None else str(revision),
                           "" if plan is None else dumps(plan),
                           "" if history is None else dumps(history),
                           "1" if final else "0", str(self.attempt)]
        for name, value in fields.items():
            args += [name, value if isinstance(value, str) else dumps(value)]
        keys = [self.keys.state, self.keys.events, self.keys.plans, self.keys.history, self.keys.alive]
        written = self._publish(keys=keys, args=args) is not None
        if not written:
            self._gone.set()
        return written

    def improvement(self, event: Mapping[str, Any]) -> bool:
        """Publish a cheaper plan: its document, its history line, the new best and the stream entry."""
        if self.best is not None and not event["cost"] < self.best["cost"]:
            return self.progress(event)  # an earlier attempt already published a plan this good
        self.revision += 1
        summary = {k: event.get(k) for k in ("cost", "lower_bound", "bound", "weight", *_COUNTERS)}
        summary["revision"] = self.revision
        self.best = {"revision": self.revision, "cost": event["cost"], "lower_bound": event.get("lower_bound"),
                     "bound": event.get("bound"), "found_at_s": event.get("elapsed_s")}
        plan = {**summary, "steps": event["plan"]}
        return self._write(EventType.IMPROVEMENT, summary,
                           {"best": self.best, "revision": str(self.revision), "progress": _progress(event)},
                           revision=self.revision, plan=plan, history=summary)

    def _raise_bound(self, event: Mapping[str, Any]) -> dict[str, Any]:
        fields: dict[str, Any] = {"progress": _progress(event)}
        lower = event.get("lower_bound")
        if self.best is not None and lower is not None and lower > (self.best.get("lower_bound") or 0.0):
            self.best = {**self.best, "lower_bound": lower, "bound": event.get("bound")}
            fields["best"] = self.best
        return fields

    def progress(self, event: Mapping[str, Any]) -> bool:
        """Publish a progress report (the lower bound may have risen without a new plan)."""
        return self._write(EventType.PROGRESS, _progress(event), self._raise_bound(event))

    def finished(self, event: Mapping[str, Any]) -> JobStatus | None:
        """Publish the end of the search; return the final status, or None if the job was not ours."""
        status = status_of(event)
        data = {**event, "status": status.value, "revision": self.revision}
        if self.best is not None and (event.get("cost") is None or self.best["cost"] < event["cost"]):
            data.update(cost=self.best["cost"], bound=self.best.get("bound"))
        fields = self._raise_bound(event)
        if self.best is not None and status is JobStatus.OPTIMAL:
            self.best = {**self.best, "lower_bound": event.get("cost"), "bound": 1.0}
            fields["best"] = self.best
        fields.update(status=status.value, finished_at=utc_now(), stop_reason=str(event.get("stop_reason")),
                      proven_optimal="1" if event.get("proven_optimal") else "0",
                      proven_infeasible="1" if event.get("proven_infeasible") else "0",
                      backend=str(event.get("backend") or ""))
        return status if self._write(EventType.FINISHED, data, fields, final=True) else None

    def stopped_early(self, status: JobStatus, stop_reason: str | None, error: Mapping[str, str] | None = None,
                      ) -> bool:
        """Publish a final status reached without a search (deadline passed in the queue, an error)."""
        data: dict[str, Any] = {"status": status.value, "stop_reason": stop_reason, "revision": self.revision,
                                "cost": None if self.best is None else self.best["cost"],
                                "proven_optimal": False, "proven_infeasible": False}
        fields: dict[str, Any] = {"status": status.value, "finished_at": utc_now(),
                                  "stop_reason": stop_reason or "", "proven_optimal": "0",
                                  "proven_infeasible": "0"}
        if error is not None:
            data["error"] = dict(error)
            fields["error"] = dict(error)
        return self._write(EventType.FINISHED, data, fields, final=True)

    def requeued(self, error: Mapping[str, str]) -> bool:
        """Put the job back to ``queued`` after a failed attempt that RQ will retry."""
        data = {"status": JobStatus.QUEUED.value, "retry_after_error": dict(error)}
        # The ended attempt joins the job's attempt log (only this attempt writes while it runs).
        log = json.loads(self.record.get("attempt_log") or "[]")
        log.append({"attempt": self.attempt, "status": JobStatus.FAILED.value, "started_at": self.started_at,
                    "ended_at": utc_now(), "revision": self.revision,
                    "cost": None if self.best is None else self.best["cost"], "error": dict(error)})
        return self._write(EventType.STATUS, data, {"status": JobStatus.QUEUED.value, "error": dict(error),
                                                    "attempt_log": log}, final=True)
