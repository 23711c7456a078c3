"""`boundwise worker`: run one search worker (an RQ worker) against the Redis in REDIS_URL.

The worker takes jobs from the ``high`` queue before ``default`` and forks a
work-horse per job (``--no-fork`` searches in the worker process itself).
Start as many as there are cores to search on, on any machine that reaches
the same Redis: that is how the service scales out. SIGTERM lets the running
job finish; a second SIGTERM stops it at once (the job is then reported lost).
"""

from __future__ import annotations

import argparse
import logging
import sys
from typing import Any

from worker.keys import QUEUES

logger = logging.getLogger(__name__)


def register(sub: Any) -> None:
    """Add the ``worker`` subcommand."""
    p = sub.add_parser("worker", help="run a search worker against REDIS_URL",
                       description="Run one search worker (an RQ worker) on the queues in REDIS_URL.")
    p.add_argument("--queues", default=",".join(QUEUES),
                   help=f"comma-separated queues, highest priority first (default {','.join(QUEUES)})")
    p.add_argument("--burst", action="store_true", help="stop once the queues are empty")
    p.add_argument("--name", default=None, help="worker name (default: random)")
    p.add_argument("--no-fork", action="store_true",
                   help="search in this process instead of a forked work-horse per job")
    p.set_defaults(func=run)


def _queues(text: str) -> list[str]:
    names = [q.strip() for q in text.split(",") if q.strip()]
    unknown = [q for q in names if q not in QUEUES]
    if not names or unknown:
        raise ValueError(f"--queues: give some of {', '.join(QUEUES)} (got {text!r})")
    return names


def run(args: argparse.Namespace) -> int:
    """Serve the queues until stopped (or, with ``--burst``, until they are empty)."""
    import redis
    from rq import Queue, SimpleWorker, Worker

    from service import logs, metrics
    from service.config import ConfigError, load

    try:
        cfg = load()
        queues = _queues(args.queues)
    except (ConfigError, ValueError) as err:
        sys.stderr.write(f"error: {err}\n")
        return 2
    logs.configure(cfg.log_level, fmt=cfg.log_format)
    # Import the search code once here, so each forked work-horse starts with it loaded.
    import worker.jobs  # noqa: F401
    from worker.domains import kinds

    kinds()
    if cfg.worker_metrics_port is not None:
        metrics.serve_worker_metrics(cfg.worker_metrics_port)
    connection = redis.Redis.from_url(cfg.redis_url, socket_connect_timeout=5, health_check_interval=30)
    try:
        connection.ping()
    except redis.RedisError as err:
        sys.stderr.write(f"error: cannot reach Redis at REDIS_URL: {err}\n")
        return 1
    cls = logs.bind_jobs(SimpleWorker if args.no_fork else Worker)  # job and request ids on every job line
    worker = cls([Queue(q, connection=connection) for q in queues], connection=connection, name=args.name)
    logger.info("worker %s serving %s", worker.name, ", ".join(queues))
    # Every worker watches for jobs whose worker died (one sweep at a time across
    # all of them): each is reported lost and queued again while retries remain.
    from worker.reaper import Reaper

    Reaper(redis.Redis.from_url(cfg.redis_url, socket_connect_timeout=5, socket_timeout=5)).start(
        period_s=cfg.heartbeat_s, owner=worker.name)
    worker.work(burst=args.burst, logging_level=cfg.log_level)
    return 0


if __name__ == "__main__":  # pragma: no cover
    from service.cli import main

    sys.exit(main(["worker", *sys.argv[1:]]))
