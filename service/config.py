"""Read every setting of the service from the environment, check it, and hold it in one value.

One table (``SETTINGS``) lists each variable with its default and meaning; ``load``
reads them all, refuses a bad value with a message naming the variable, and adds
the limit settings read by ``service.limits`` (``LimitSettings.from_env``), so a
process has one ``Config`` and fails at start rather than on its first request.

Every variable (``service.limits`` checks the ones marked *limits*; ``LIMIT_SETTINGS``):

==================================  ===========================  ==========================================================
variable                            default                      meaning
==================================  ===========================  ==========================================================
REDIS_URL                           redis://127.0.0.1:6379/0     Redis holding queues, jobs, plans, keys and rate counters
BOUNDWISE_AUTH                      on                           ``off``: no API key needed; every caller is tenant "local"
BOUNDWISE_DEFAULT_TIME_S            30                           time budget of a job that gives none (at most the cap)
BOUNDWISE_MAX_WAIT_S                30                           longest long-poll ``wait`` a caller may ask for
BOUNDWISE_IDEMPOTENCY_TTL_S         86400                        how long an ``Idempotency-Key`` returns the same job
BOUNDWISE_RESULT_TTL_S              604800                       how long a job, its events and plans are kept
BOUNDWISE_HEARTBEAT_S               1                            how often a running job proves it is alive
BOUNDWISE_LOST_AFTER_S              5                            a running job silent this long is reported ``lost``
BOUNDWISE_CANCEL_POLL_S             0.05                         how often a running job looks for a cancel request
BOUNDWISE_PROGRESS_S                0.5                          how often a running job publishes progress
BOUNDWISE_JOB_TIMEOUT_MARGIN_S      60                           RQ's hard timeout is the time budget plus this
BOUNDWISE_SSE_MAX_S                 600                          an event stream closes after this (clients resume)
BOUNDWISE_SSE_KEEPALIVE_S           15                           a comment line is sent when a stream is idle this long
BOUNDWISE_BIND                      0.0.0.0:8000                 gunicorn's listen address (deploy/gunicorn.conf.py)
BOUNDWISE_WEB_WORKERS               2                            gunicorn worker processes
BOUNDWISE_WEB_THREADS               16                           threads per gunicorn worker (streams hold one each)
BOUNDWISE_LOG_LEVEL                 INFO                         log level of the API and worker processes
BOUNDWISE_LOG_FORMAT                json                         ``json`` lines or ``text``
BOUNDWISE_WORKER_METRICS_PORT       (unset)                      a worker serves its own /metrics on this port
METRICS_ENABLED                     true                         ``false`` removes ``/metrics``
METRICS_ALLOW                       (empty: any)                 networks allowed to read ``/metrics``
METRICS_TOKEN                       (empty)                      bearer token ``/metrics`` requires when set
BOUNDWISE_RATE_LIMITS               on                           *limits*: ``off`` disables rate limiting
BOUNDWISE_RATE_LIMIT_SUBMIT         60/minute                    *limits*: submits and cancels per key
BOUNDWISE_RATE_LIMIT_READ           1200/minute                  *limits*: reads per key
BOUNDWISE_MAX_BODY_BYTES            2097152                      *limits*: largest request body (413 over it)
BOUNDWISE_MAX_RUNNING_JOBS          20                           *limits*: jobs a tenant may have queued or running
BOUNDWISE_MAX_TIME_S                300                          *limits*: largest time budget
BOUNDWISE_MAX_EXPANSIONS            200000000                    *limits*: largest expansions budget (and the default)
BOUNDWISE_MAX_STATES                20000000                     *limits*: largest stored-states budget (and the default)
BOUNDWISE_MAX_SIZES                 (built-in)                   *limits*: JSON object of problem size caps by name
BOUNDWISE_TENANT_CAPS               {}                           *limits*: JSON per-tenant cap overrides
==================================  ===========================  ==========================================================
"""

from __future__ import annotations

import logging
import os
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any
from urllib.parse import urlsplit

from service.limits import LimitSettings

logger = logging.getLogger(__name__)

__all__ = ["Config", "ConfigError", "Setting", "SETTINGS", "LIMIT_SETTINGS", "load"]


class ConfigError(ValueError):
    """Raised by ``load`` when a variable has a value the service cannot use; names the variable."""

    def __init__(self, name: str, message: str) -> None:
        super().__init__(f"{name}: {message}")
        self.name = name


def _text(raw: str) -> str:
    return raw


def _redis_url(raw: str) -> str:
    if urlsplit(raw).scheme not in ("redis", "rediss", "unix"):
        raise ValueError("must be a redis://, rediss:// or unix:// URL")
    return raw


def _switch(raw: str) -> bool:
    value = raw.strip().lower()
    if value in ("on", "true", "1", "yes"):
        return True
    if value in ("off", "false", "0", "no"):
        return False
    raise ValueError("must be on or off")


def _positive(kind: type) -> Callable[[str], Any]:
    def parse(raw: str) -> Any:
        try:
            value = kind(raw)
        except ValueError:
            raise ValueError(f"must be {'an integer' if kind is int else 'a number'}") from None
        if not value > 0 or value != value or value == float("inf"):
            raise ValueError("must be a positive, finite number")
        return value

    return parse


def _port(raw: str) -> int | None:
    if raw.strip() == "":
        return None
    value = _positive(int)(raw)
    if value > 65535:
        raise ValueError("must be a TCP port (1-65535)")
    return value


def _log_format(raw: str) -> str:
    if raw not in ("json", "text"):
        raise ValueError("must be json or text")
    return raw


def _log_level(raw: str) -> str:
    level = raw.strip().upper()
    if level not in ("DEBUG", "INFO", "WARNING", "ERROR", "CRITICAL"):
        raise ValueError("must be DEBUG, INFO, WARNING, ERROR or CRITICAL")
    return level


@dataclass(frozen=True, slots=True)
class Setting:
    """One environment variable: its name, default text, parser, meaning and ``Config`` attribute."""

    name: str
    default: str
    parse: Callable[[str], Any]
    meaning: str
    attr: str


SETTINGS: tuple[Setting, ...] = (
    Setting("REDIS_URL", "redis://127.0.0.1:6379/0", _redis_url,
            "Redis holding queues, jobs, plans, keys and rate counters", "redis_url"),
    Setting("BOUNDWISE_AUTH", "on", _switch, "off: no API key needed; every caller is tenant 'local'",
            "auth_required"),
    Setting("BOUNDWISE_DEFAULT_TIME_S", "30", _positive(float),
            "time budget of a job that gives none (at most the cap)", "default_time_s"),
    Setting("BOUNDWISE_MAX_WAIT_S", "30", _positive(float), "longest long-poll wait a caller may ask for",
            "max_wait_s"),
    Setting("BOUNDWISE_IDEMPOTENCY_TTL_S", "86400", _positive(int),
            "how long an Idempotency-Key returns the same job", "idempotency_ttl_s"),
    Setting("BOUNDWISE_RESULT_TTL_S", "604800", _positive(int), "how long a job, its events and plans are kept",
            "result_ttl_s"),
    Setting("BOUNDWISE_HEARTBEAT_S", "1", _positive(float), "how often a running job proves it is alive",
            "heartbeat_s"),
    Setting("BOUNDWISE_LOST_AFTER_S", "5", _positive(float), "a running job silent this long is reported lost",
            "lost_after_s"),
    Setting("BOUNDWISE_CANCEL_POLL_S", "0.05", _positive(float),
            "how often a running job looks for a cancel request", "cancel_poll_s"),
    Setting("BOUNDWISE_PROGRESS_S", "0.5", _positive(float), "how often a running job publishes progress",
            "progress_s"),
    Setting("BOUNDWISE_JOB_TIMEOUT_MARGIN_S", "60", _positive(int),
            "RQ's hard timeout is the time budget plus this", "job_timeout_margin_s"),
    Setting("BOUNDWISE_SSE_MAX_S", "600", _positive(float), "an event stream closes after this (clients resume)",
            "sse_max_s"),
    Setting("BOUNDWISE_SSE_KEEPALIVE_S", "15", _positive(float),
            "a comment line is sent when a stream is idle this long", "sse_keepalive_s"),
    Setting("BOUNDWISE_BIND", "0.0.0.0:8000", _text, "gunicorn's listen address", "bind"),
    Setting("BOUNDWISE_WEB_WORKERS", "2", _positive(int), "gunicorn worker processes", "web_workers"),
    Setting("BOUNDWISE_WEB_THREADS", "16", _positive(int), "threads per gunicorn worker (streams hold one each)",
            "web_threads"),
    Setting("BOUNDWISE_LOG_LEVEL", "INFO", _log_level, "log level of the API and worker processes", "log_level"),
    Setting("BOUNDWISE_LOG_FORMAT", "json", _log_format, "json lines or text", "log_format"),
    Setting("BOUNDWISE_WORKER_METRICS_PORT", "", _port, "a worker serves its own /metrics on this port",
            "worker_metrics_port"),
    Setting("METRICS_ENABLED", "true", _switch, "false removes /metrics", "metrics_enabled"),
    Setting("METRICS_ALLOW", "", _text, "networks allowed to read /metrics (empty: any)", "metrics_allow"),
    Setting("METRICS_TOKEN", "", _text, "bearer token /metrics requires when set", "metrics_token"),
)

# Read by ``service.limits.LimitSettings.from_env``, which checks them; listed here
# with their defaults so the table is complete and every default is spelled out.
LIMIT_SETTINGS: tuple[Setting, ...] = (
    Setting("BOUNDWISE_RATE_LIMITS", "on", _text, "off disables rate limiting", ""),
    Setting("BOUNDWISE_RATE_LIMIT_SUBMIT", "60/minute", _text, "submits and cancels per key", ""),
    Setting("BOUNDWISE_RATE_LIMIT_READ", "1200/minute", _text, "reads per key", ""),
    Setting("BOUNDWISE_MAX_BODY_BYTES", "2097152", _text, "largest request body (413 over it)", ""),
    Setting("BOUNDWISE_MAX_RUNNING_JOBS", "20", _text, "jobs a tenant may have queued or running", ""),
    Setting("BOUNDWISE_MAX_TIME_S", "300", _text, "largest time budget", ""),
    Setting("BOUNDWISE_MAX_EXPANSIONS", "200000000", _text, "largest expansions budget (and the default)", ""),
    Setting("BOUNDWISE_MAX_STATES", "20000000", _text, "largest stored-states budget (and the default)", ""),
    Setting("BOUNDWISE_MAX_SIZES", "", _text, "JSON object of problem size caps by name", ""),
    Setting("BOUNDWISE_TENANT_CAPS", "", _text, "JSON per-tenant cap overrides", ""),
)


@dataclass(frozen=True, slots=True)
class Config:
    """The checked settings of one process (see the module docstring for each variable)."""

    redis_url: str = "redis://127.0.0.1:6379/0"
    auth_required: bool = True
    default_time_s: float = 30.0
    max_wait_s: float = 30.0
    idempotency_ttl_s: int = 86400
    result_ttl_s: int = 604800
    heartbeat_s: float = 1.0
    lost_after_s: float = 5.0
    cancel_poll_s: float = 0.05
    progress_s: float = 0.5
    job_timeout_margin_s: int = 60
    sse_max_s: float = 600.0
    sse_keepalive_s: float = 15.0
    bind: str = "0.0.0.0:8000"
    web_workers: int = 2
    web_threads: int = 16
    log_level: str = "INFO"
    log_format: str = "json"
    worker_metrics_port: int | None = None
    metrics_enabled: bool = True
    metrics_allow: str = ""
    metrics_token: str = ""
    limits: LimitSettings = field(default_factory=LimitSettings)

    def worker_settings(self) -> dict[str, float]:
        """Return what a running job needs to know of this config (stored with each job)."""
        return {
            "heartbeat_s": self.heartbeat_s,
            "lost_after_s": self.lost_after_s,
            "cancel_poll_s": self.cancel_poll_s,
            "progress_s": self.progress_s,
            "ttl_s": self.result_ttl_s,
        }


def load(env: Mapping[str, str] | None = None) -> Config:
    """Read and check every setting from ``env`` (default ``os.environ``); raise ConfigError on a bad one."""
    env = os.environ if env is None else env
    values: dict[str, Any] = {}
    for s in SETTINGS:
        raw = env.get(s.name)
        if raw is None or (raw == "" and s.default != ""):
            raw = s.default
        try:
            values[s.attr] = s.parse(raw)
        except ValueError as err:
            raise ConfigError(s.name, f"{err} (got {raw!r})") from None
    if values["lost_after_s"] < 2 * values["heartbeat_s"]:
        raise ConfigError("BOUNDWISE_LOST_AFTER_S", "must be at least twice BOUNDWISE_HEARTBEAT_S, "
                          "or a live job could be reported lost between two heartbeats")
    limit_env = {x.name: env.get(x.name) or x.default for x in LIMIT_SETTINGS}
    try:
        values["limits"] = LimitSettings.from_env(limit_env)
    except ValueError as err:
        name = str(err).split(":", 1)[0]
        raise ConfigError(name, str(err).split(":", 1)[-1].strip()) from None
    return Config(**values)
