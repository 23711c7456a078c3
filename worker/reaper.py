"""Find jobs whose worker died, report each attempt lost, and queue the job again while retries remain.

A running job refreshes its ``alive`` key every ``heartbeat_s`` (see
``worker.publish``); a killed work-horse (or a lost machine) stops doing so,
and the key expires after ``lost_after_s``. ``Reaper.reap(job_id)`` turns such
a job around in one Redis transaction (WATCHed, so two reapers, or a reaper
and a late heartbeat, can never both act):

- the attempt is appended to the job's ``attempt_log`` (a JSON list in the
  state hash) with status ``lost``, when it started and ended, and the best
  plan it had published (plans and revisions are kept: a later attempt only
  publishes a plan that beats them);
- if the job has attempts left (``attempts <= retries``, with ``retries`` from
  the request, default 1), it goes back to ``queued`` on its RQ queue, to be
  searched again from scratch by whichever worker takes it first;
- otherwise it ends ``lost``, with the usual final event.

``sweep`` reaps every stale job on the queues' started-job registries; each
``boundwise worker`` runs it every heartbeat from a background thread (one
worker at a time, under a short lock), and the API reaps a job it reads.
"""

from __future__ import annotations

import json
import logging
import threading
from collections.abc import Callable, Iterable, Mapping
from datetime import datetime, timezone
from typing import Any

from redis.exceptions import RedisError, WatchError

from worker import metrics
from worker.keys import FINAL, JOB_FUNCTION, QUEUES, EventType, JobStatus, dumps, job_keys, text, valid_job_id

logger = logging.getLogger(__name__)

__all__ = ["Reaper", "attempt_history", "LOCK_KEY"]

LOCK_KEY = "bw:reaper:lock"
# RQ's own backstop timeout of a re-queued attempt when the first one's is gone.
_TIMEOUT_MARGIN_S = 60


def _now_iso() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds").replace("+00:00", "Z")


def _loads(raw: str | None, default: Any) -> Any:
    try:
        return json.loads(raw) if raw else default
    except ValueError:
        return default


def attempt_history(log: Iterable[Mapping[str, Any]], attempts: int, status: str, started_at: str | None,
                    finished_at: str | None, revision: int, best: Mapping[str, Any] | None) -> list[dict[str, Any]]:
    """Return every attempt of a job, oldest first: the ended ones from the log, then the current one.

    The current attempt is the one the state hash describes (``attempts``
    counts the starts); it is added when the log does not hold it yet.
    """
    out = [dict(entry) for entry in log]
    if attempts > len(out):
        current = status if status != JobStatus.QUEUED.value else JobStatus.RUNNING.value
        out.append({"attempt": attempts, "status": current, "started_at": started_at,
                    "ended_at": finished_at if status in FINAL else None, "revision": revision,
                    "cost": (best or {}).get("cost")})
    return out


class Reaper:
    """Report lost attempts and re-queue their jobs; safe to run in any number of processes."""

    def __init__(self, redis: Any, *, clock_iso: Callable[[], str] = _now_iso) -> None:
        self.redis = redis
        self.clock_iso = clock_iso

    def reap(self, job_id: str) -> str | None:
        """Reap ``job_id`` if it is running without a heartbeat; return "requeued", "lost" or None."""
        if not valid_job_id(job_id):
            return None
        keys = job_keys(job_id)
        with self.redis.pipeline(transaction=True) as pipe:
            try:
                pipe.watch(keys.state, keys.alive)
                raw = {text(k): text(v) for k, v in pipe.hgetall(keys.state).items()}
                if raw.get("status") != JobStatus.RUNNING.value or pipe.exists(keys.alive):
                    return None
                outcome = self._turn_around(pipe, job_id, raw)
                pipe.execute()
            except WatchError:  # someone else moved the job first (another reaper, a heartbeat, a cancel)
                return None
        again = outcome == "requeued"
        metrics.record_lost(final=not again)
        if again:
            metrics.record_retried()
        logger.warning("job %s lost its worker in attempt %s; %s", job_id, raw.get("attempts"),
                       "queued again" if again else "no retries left: reported lost")
        return outcome

    def _turn_around(self, pipe: Any, job_id: str, raw: dict[str, str]) -> str:
        keys = job_keys(job_id)
        now = self.clock_iso()
        attempts = int(raw.get("attempts") or 0)
        retries = int(raw.get("retries") or 0)
        revision = int(raw.get("revision") or 0)
        best = _loads(raw.get("best"), None)
        ttl = int(_loads(raw.get("settings"), {}).get("ttl_s") or 604800)
        log = _loads(raw.get("attempt_log"), [])
        log.append({"attempt": attempts, "status": JobStatus.LOST.value, "started_at": raw.get("started_at"),
                    "ended_at": now, "revision": revision, "cost": (best or {}).get("cost")})
        cost = (best or {}).get("cost")
        if attempts <= retries:
            self._enqueue(pipe, job_id, raw, ttl)  # RQ puts the pipeline in MULTI here
            pipe.hset(keys.state, mapping={"status": JobStatus.QUEUED.value, "attempt_log": dumps(log)})
            pipe.hdel(keys.state, "started_at")
            pipe.xadd(keys.events, {"type": EventType.STATUS.value, "data": dumps(
                {"status": JobStatus.LOST.value, "attempt": attempts, "lost_at": now, "retrying": True,
                 "revision": revision, "cost": cost})})
            pipe.xadd(keys.events, {"type": EventType.STATUS.value, "data": dumps(
                {"status": JobStatus.QUEUED.value, "attempt": attempts + 1, "queued_at": now})})
            return "requeued"
        pipe.multi()
        pipe.hset(keys.state, mapping={"status": JobStatus.LOST.value, "finished_at": now,
                                       "attempt_log": dumps(log)})
        pipe.xadd(keys.events, {"type": EventType.FINISHED.value, "data": dumps(
            {"status": JobStatus.LOST.value, "stop_reason": None, "revision": revision, "cost": cost,
             "proven_optimal": False, "proven_infeasible": False})})
        pipe.delete(keys.alive)
        for key in (keys.state, keys.events):
            pipe.expire(key, ttl)
        return "lost"

    def _enqueue(self, pipe: Any, job_id: str, raw: dict[str, str], ttl: int) -> None:
        from rq import Queue, Retry
        from rq.exceptions import NoSuchJobError
        from rq.job import Job
        from rq.registry import StartedJobRegistry

        name = raw.get("queue") if raw.get("queue") in QUEUES else "default"
        queue = Queue(name, connection=self.redis)
        try:
            old = Job.fetch(job_id, connection=self.redis)
        except NoSuchJobError:
            old = None
        if old is not None:
            # The dead attempt's execution would otherwise sit in the registry until
            # RQ's own (much slower) abandoned-job check fires on the new attempt.
            StartedJobRegistry(name, connection=self.redis).remove_executions(old, pipeline=pipe)
        budget = _loads(raw.get("budget"), {})
        timeout = (old.timeout if old is not None and old.timeout else
                   int((budget.get("time_s") or 300) + _TIMEOUT_MARGIN_S))
        retries_left = old.retries_left if old is not None else None
        request_id = raw.get("request_id") or None
        queue.enqueue_call(
            JOB_FUNCTION, args=(job_id,), job_id=job_id, timeout=timeout, result_ttl=600, failure_ttl=ttl,
            ttl=ttl, retry=Retry(max=retries_left) if retries_left else None,
            description=f"boundwise {raw.get('domain', '')} job {job_id} (retry)",
            meta={"request_id": request_id} if request_id else None, pipeline=pipe,
        )

    def stale(self) -> list[str]:
        """Return the ids of started jobs whose heartbeat is gone (candidates for ``reap``)."""
        from rq.registry import StartedJobRegistry

        ids: list[str] = []
        for name in QUEUES:
            registry = StartedJobRegistry(name, connection=self.redis)
            ids.extend(job_id for job_id, _ in registry.get_job_and_execution_ids(cleanup=False))
        ids = [i for i in dict.fromkeys(ids) if valid_job_id(i)]
        if not ids:
            return []
        pipe = self.redis.pipeline(transaction=False)
        for job_id in ids:
            keys = job_keys(job_id)
            pipe.hget(keys.state, "status")
            pipe.exists(keys.alive)
        replies = pipe.execute()
        return [job_id for job_id, status, alive in zip(ids, replies[::2], replies[1::2])
                if text(status) == JobStatus.RUNNING.value and not alive]

    def sweep(self, owner: str = "", lock_ms: int = 1000) -> int:
        """Reap every stale job, unless another process holds the sweep lock; return how many."""
        if not self.redis.set(LOCK_KEY, owner or "reaper", nx=True, px=max(100, lock_ms)):
            return 0
        return sum(1 for job_id in self.stale() if self.reap(job_id))

    def run(self, stop: threading.Event, period_s: float = 1.0, owner: str = "") -> None:
        """Sweep every ``period_s`` until ``stop`` is set; Redis outages are logged and waited out."""
        while not stop.wait(period_s):
            try:
                self.sweep(owner, lock_ms=int(period_s * 900))
            except RedisError as err:
                logger.warning("lost-job sweep skipped: %s", err)
            except Exception:  # a bug here must not kill the worker that hosts the thread
                logger.exception("lost-job sweep failed")

    def start(self, period_s: float = 1.0, owner: str = "") -> threading.Event:
        """Run ``run`` in a daemon thread; return the event that stops it."""
        stop = threading.Event()
        threading.Thread(target=self.run, args=(stop, period_s, owner), name="lost-job-reaper",
                         daemon=True).start()
        return stop
