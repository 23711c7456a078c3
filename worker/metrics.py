"""Record what the workers do as Prometheus metrics: outcomes, timings, search rate, bounds.

The metric objects live here, on the worker side, because the RQ work-horses
are what observe a job end; the API imports them too (to count submits) and
serves them at ``/metrics`` (``service.metrics``). With
``PROMETHEUS_MULTIPROC_DIR`` set in the environment *before* this module is
first imported, every process (gunicorn workers, RQ workers and each forked
work-horse) writes its samples to files there and the API adds them up at
scrape time; without it, samples stay in the process that made them.

The recorders check their inputs instead of raising: a metric must never
decide a job's fate, so callers need no try/except around them.
"""

from __future__ import annotations

import logging
import math

from prometheus_client import Counter, Histogram

logger = logging.getLogger(__name__)

__all__ = [
    "JOBS_SUBMITTED", "JOBS_FINISHED", "JOBS_LOST", "JOBS_RETRIED", "FIRST_PLAN_SECONDS", "JOB_SECONDS",
    "EXPANSIONS_PER_SECOND", "FINAL_BOUND", "record_submitted", "record_first_plan", "record_finished",
    "record_lost", "record_retried",
]

_SECONDS = (0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0, 60.0, 120.0, 300.0, 600.0)

JOBS_SUBMITTED = Counter("boundwise_jobs_submitted", "Jobs accepted by the API", ["queue"])
JOBS_FINISHED = Counter("boundwise_jobs_finished", "Jobs that reached a final status", ["status"])
JOBS_LOST = Counter("boundwise_jobs_lost", "Jobs whose worker died mid-search (found by the reaper)")
JOBS_RETRIED = Counter("boundwise_jobs_retried", "Lost jobs put back on their queue for another attempt")
FIRST_PLAN_SECONDS = Histogram("boundwise_first_plan_seconds",
                               "Seconds from the start of a search to its first plan", buckets=_SECONDS)
JOB_SECONDS = Histogram("boundwise_job_seconds", "Seconds from the start of a search to its end",
                        buckets=_SECONDS)
EXPANSIONS_PER_SECOND = Histogram(
    "boundwise_expansions_per_second", "Node expansions per second of each finished search",
    buckets=(100, 300, 1_000, 3_000, 10_000, 30_000, 100_000, 300_000, 1_000_000, 3_000_000, 10_000_000),
)
FINAL_BOUND = Histogram(
    "boundwise_final_bound", "Proven suboptimality bound (cost / lower bound) of each finished plan",
    buckets=(1.0, 1.001, 1.01, 1.02, 1.05, 1.1, 1.2, 1.5, 2.0, 3.0, 5.0, 10.0),
)


def record_submitted(queue: str) -> None:
    """Count one job accepted onto ``queue``."""
    JOBS_SUBMITTED.labels(queue=queue).inc()


def record_first_plan(seconds: float) -> None:
    """Observe the time a search took to publish its first plan."""
    if seconds >= 0 and math.isfinite(seconds):
        FIRST_PLAN_SECONDS.observe(seconds)


def record_finished(status: str, seconds: float, expansions: int, bound: float | None) -> None:
    """Observe a search that ended with ``status`` after ``seconds`` and ``expansions``.

    ``bound`` is cost / L of the final plan (None when there is no plan, or
    the bound is unbounded); it goes to ``boundwise_final_bound`` when known.
    """
    JOBS_FINISHED.labels(status=status).inc()
    if seconds >= 0 and math.isfinite(seconds):
        JOB_SECONDS.observe(seconds)
        if seconds > 0 and expansions > 0:
            EXPANSIONS_PER_SECOND.observe(expansions / seconds)
    if bound is not None and math.isfinite(bound):
        FINAL_BOUND.observe(bound)


def record_lost(count: int = 1, *, final: bool = True) -> None:
    """Count jobs found lost (their worker died); ``final`` ones also count as status ``lost``.

    A lost job that is retried is not final: its next attempt ends with its
    own status, so it is counted once in ``boundwise_jobs_finished``.
    """
    if count > 0:
        JOBS_LOST.inc(count)
        if final:
            JOBS_FINISHED.labels(status="lost").inc(count)


def record_retried(count: int = 1) -> None:
    """Count lost jobs sent back to their queue for another attempt."""
    if count > 0:
        JOBS_RETRIED.inc(count)
