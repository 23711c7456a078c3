"""Gunicorn settings of the Boundwise API: threaded workers, sizes from the environment.

Threads (``gthread``) because event streams and long polls each hold a thread
while they wait on Redis; the process count scales CPU, the thread count scales
waiting clients. Every value comes from ``service.config`` (one table of
environment variables); command-line options such as ``--bind`` or
``--workers`` still override these.
"""

from __future__ import annotations

import os

from service import logs, metrics
from service.config import load

_config = load()

bind = [_config.bind]
workers = _config.web_workers
worker_class = "gthread"
threads = _config.web_threads
# A long poll waits at most BOUNDWISE_MAX_WAIT_S and a stream sends a keepalive
# every BOUNDWISE_SSE_KEEPALIVE_S, so a worker silent past this is really stuck.
timeout = int(max(60, 2 * _config.max_wait_s, 2 * _config.sse_keepalive_s))
graceful_timeout = 30
keepalive = 5
# Request line and header caps; the body cap is BOUNDWISE_MAX_BODY_BYTES in the app.
limit_request_line = 8190
limit_request_fields = 100
# Heartbeat files on a RAM disk where there is one, so a slow disk cannot stall workers.
worker_tmp_dir = "/dev/shm" if os.path.isdir("/dev/shm") else None
accesslog = None  # the app writes its own access line (service.logs), with the request id
errorlog = "-"
loglevel = _config.log_level.lower()
if _config.log_format == "json":
    # gunicorn's own lines (start, worker boot and exit, timeouts) as JSON too: its
    # loggers hand them to the root handler that ``on_starting`` sets.
    logconfig_dict = {
        "version": 1,
        "disable_existing_loggers": False,
        "root": {"level": _config.log_level, "handlers": ["json"]},
        "loggers": {
            "gunicorn.error": {"level": _config.log_level, "handlers": [], "propagate": True},
            # the app's own access line already says it, with the request id
            "gunicorn.access": {"level": "WARNING", "handlers": [], "propagate": True},
        },
        "handlers": {"json": {"class": "logging.StreamHandler", "formatter": "json", "stream": "ext://sys.stderr"}},
        "formatters": {"json": {"()": "service.logs.JsonFormatter"}},
    }


def on_starting(server: object) -> None:
    """Set the JSON (or text) log handler once, in the master, before workers fork."""
    logs.configure(_config.log_level, fmt=_config.log_format)


def child_exit(server: object, worker: object) -> None:
    """Drop a dead worker's live metric files (multiprocess mode)."""
    metrics.child_exit(server, worker)
