"""Refuse what is too much: rate limits per key, per-tenant caps, and per-request size caps.

Three kinds of limit, each refusal naming the cap and its value:

- **rates**, per API key (per client address when auth is off), kept in Redis
  so every gunicorn worker on every machine counts together: one bucket for
  submits and cancels (``POST``/``DELETE``), one for reads. Over it: 429 with
  ``Retry-After``.
- **tenant caps** (``Caps``): jobs queued or running at once, and the largest
  budgets (time, expansions, stored states). A missing budget gets the cap, so
  no job runs unbounded.
- **size caps**: the request body in bytes (413), and each size a domain
  reports through ``DomainKind.sizes(problem)`` (grid cells, graph nodes and
  edges, tasks, tiles...), checked before anything is queued.

Defaults suit one modest machine; every value is an environment setting (see
``LimitSettings.from_env``) and a tenant can get its own caps.
"""

from __future__ import annotations

import dataclasses
import json
import logging
import math
import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

from flask import Flask, Response, g, jsonify, request
from werkzeug.exceptions import RequestEntityTooLarge

from service.errors import error_body
from worker.engine import Budget
from worker.exceptions import LimitError
from worker.request import JobRequest

logger = logging.getLogger(__name__)

__all__ = ["Caps", "LimitSettings", "RunningSlots", "apply_caps", "check_sizes", "init_app", "rate_key"]

# Size names reported by the built-in domains, and a cap for each that keeps a
# single job within a few hundred MB of worker memory.
DEFAULT_SIZE_CAPS: dict[str, int] = {
    "cells": 4_000_000,  # grid
    "nodes": 1_000_000,  # graph
    "edges": 5_000_000,  # graph
    "tasks": 100,  # sequencing
    "tiles": 49,  # sliding-tile: up to 7 x 7
    "facts": 20_000,  # strips
    "actions": 200_000,  # strips
    "characters": 1_000_000,  # pddl: domain and problem text together
}
# A job may wait in the queue; its slot is only a safety net past this long.
SLOT_SLACK_S = 3600.0
WRITE_METHODS = ("POST", "PUT", "PATCH", "DELETE")
READ_METHODS = ("GET", "HEAD")


def _default(cls: type, name: str) -> Any:
    """Return the declared default of a dataclass field (a slotted class has no class attribute for it)."""
    return next(f.default for f in dataclasses.fields(cls) if f.name == name)


@dataclass(frozen=True, slots=True)
class Caps:
    """The limits of one tenant: jobs at once, the largest budgets, and problem sizes."""

    max_running_jobs: int = 20
    max_time_s: float = 300.0
    max_expansions: int = 200_000_000
    max_states: int = 20_000_000
    sizes: Mapping[str, int] = field(default_factory=lambda: dict(DEFAULT_SIZE_CAPS))

    def merged(self, overrides: Mapping[str, Any]) -> "Caps":
        """Return a copy with ``overrides`` applied (``sizes`` merges name by name)."""
        known = {f.name for f in dataclasses.fields(self)}
        unknown = set(overrides) - known
        if unknown:
            raise ValueError(f"unknown cap names: {', '.join(sorted(unknown))}")
        values = {k: v for k, v in overrides.items() if k != "sizes"}
        sizes = dict(self.sizes)
        sizes.update(overrides.get("sizes", {}))
        return dataclasses.replace(self, sizes=sizes, **values)


@dataclass(frozen=True, slots=True)
class LimitSettings:
    """Every limit setting of the service; ``from_env`` reads them from the environment."""

    rate_limits_enabled: bool = True
    submit_rate: str = "60/minute"
    read_rate: str = "1200/minute"
    max_body_bytes: int = 2 * 1024 * 1024
    caps: Caps = field(default_factory=Caps)
    tenant_caps: Mapping[str, Caps] = field(default_factory=dict)

    def caps_for(self, tenant: str) -> Caps:
        """Return the caps of ``tenant`` (its own if configured, else the defaults)."""
        return self.tenant_caps.get(tenant, self.caps)

    @classmethod
    def from_env(cls, env: Mapping[str, str]) -> "LimitSettings":
        """Read the ``BOUNDWISE_*`` limit settings; raise ValueError naming a bad one."""
        def number(name: str, default: float, kind: type = int) -> Any:
            raw = env.get(name)
            if raw is None or raw == "":
                return default
            try:
                value = kind(raw)
            except ValueError:
                raise ValueError(f"{name}: must be {'an integer' if kind is int else 'a number'}, "
                                 f"got {raw!r}") from None
            if not value > 0:
                raise ValueError(f"{name}: must be positive, got {raw!r}")
            return value

        def json_object(name: str) -> dict[str, Any]:
            raw = env.get(name)
            if not raw:
                return {}
            try:
                value = json.loads(raw)
            except json.JSONDecodeError as err:
                raise ValueError(f"{name}: not JSON ({err.msg})") from None
            if not isinstance(value, dict):
                raise ValueError(f"{name}: must be a JSON object")
            return value

        base = Caps(
            max_running_jobs=number("BOUNDWISE_MAX_RUNNING_JOBS", _default(Caps, "max_running_jobs")),
            max_time_s=number("BOUNDWISE_MAX_TIME_S", _default(Caps, "max_time_s"), float),
            max_expansions=number("BOUNDWISE_MAX_EXPANSIONS", _default(Caps, "max_expansions")),
            max_states=number("BOUNDWISE_MAX_STATES", _default(Caps, "max_states")),
        )
        base = base.merged({"sizes": json_object("BOUNDWISE_MAX_SIZES")})
        tenants: dict[str, Caps] = {}
        for tenant, overrides in json_object("BOUNDWISE_TENANT_CAPS").items():
            if not isinstance(overrides, dict):
                raise ValueError(f"BOUNDWISE_TENANT_CAPS.{tenant}: must be a JSON object")
            try:
                tenants[tenant] = base.merged(overrides)
            except ValueError as err:
                raise ValueError(f"BOUNDWISE_TENANT_CAPS.{tenant}: {err}") from None
        enabled = env.get("BOUNDWISE_RATE_LIMITS", "on").strip().lower() not in {"off", "0", "false", "no"}
        return cls(
            rate_limits_enabled=enabled,
            submit_rate=env.get("BOUNDWISE_RATE_LIMIT_SUBMIT") or _default(cls, "submit_rate"),
            read_rate=env.get("BOUNDWISE_RATE_LIMIT_READ") or _default(cls, "read_rate"),
            max_body_bytes=number("BOUNDWISE_MAX_BODY_BYTES", _default(cls, "max_body_bytes")),
            caps=base,
            tenant_caps=tenants,
        )


def _over(field_path: str, what: str, cap: str, limit: Any) -> LimitError:
    return LimitError(field_path, f"{what} is over the cap {cap}={limit}", cap=cap, limit=limit)


def check_sizes(job: JobRequest, caps: Caps) -> None:
    """Raise LimitError if any size the domain reports is over its cap."""
    sizes = job.kind.sizes(job.problem) or {}
    for name in sorted(sizes):
        cap = caps.sizes.get(name)
        value = sizes[name]
        if cap is not None and value > cap:
            raise _over("problem", f"{name} {value}", f"max_{name}", cap)


def apply_caps(job: JobRequest, caps: Caps) -> JobRequest:
    """Check ``job`` against ``caps``; return it with every missing budget set to its cap."""
    check_sizes(job, caps)
    b = job.budget
    if b.time_s is not None and b.time_s > caps.max_time_s:
        budget = job.document.get("budget") if isinstance(job.document, Mapping) else None
        where = "budget.time_s" if isinstance(budget, Mapping) and "time_s" in budget else "budget.deadline"
        raise _over(where, f"a time budget of {b.time_s:.6g} s", "max_time_s", caps.max_time_s)
    if b.expansions is not None and b.expansions > caps.max_expansions:
        raise _over("budget.expansions", f"{b.expansions} expansions", "max_expansions", caps.max_expansions)
    if b.max_states is not None and b.max_states > caps.max_states:
        raise _over("budget.max_states", f"{b.max_states} stored states", "max_states", caps.max_states)
    capped = Budget(
        time_s=caps.max_time_s if b.time_s is None else b.time_s,
        expansions=caps.max_expansions if b.expansions is None else b.expansions,
        max_states=caps.max_states if b.max_states is None else b.max_states,
        target_bound=b.target_bound,
    )
    return job if capped == b else dataclasses.replace(job, budget=capped)


class RunningSlots:
    """Count each tenant's queued-or-running jobs in Redis, to cap how many it has at once.

    A slot is taken at submit and found free again lazily: at the next admit,
    any job the ``is_active`` callback no longer reports as queued or running
    is dropped, so a crashed worker can never leak a slot for good.
    """

    def __init__(self, redis: Any, prefix: str = "boundwise:tenant:") -> None:
        self.redis = redis
        self.prefix = prefix

    def _key(self, tenant: str) -> str:
        # Tenant names are checked against service.auth.TENANT_PATTERN when a
        # key is made, so they are safe inside a Redis key name.
        return f"{self.prefix}{tenant}:active"

    def active(self, tenant: str, is_active: Callable[[str], bool]) -> list[str]:
        """Return the tenant's job ids still queued or running, dropping the others."""
        key = self._key(tenant)
        self.redis.zremrangebyscore(key, 0, time.time())
        ids = [i.decode() if isinstance(i, bytes) else i for i in self.redis.zrange(key, 0, -1)]
        stale = [i for i in ids if not is_active(i)]
        if stale:
            self.redis.zrem(key, *stale)
        return [i for i in ids if i not in stale]

    def admit(self, tenant: str, job_id: str, cap: int, is_active: Callable[[str], bool],
              horizon_s: float) -> None:
        """Take a slot for ``job_id`` or raise LimitError naming ``max_running_jobs``.

        Below the cap this is two Redis calls; only a tenant at its cap pays for
        asking ``is_active`` about each of its (at most ``cap``) jobs.
        """
        key = self._key(tenant)
        self.redis.zremrangebyscore(key, 0, time.time())
        if self.redis.zcard(key) >= cap:
            running = self.active(tenant, is_active)
            if len(running) >= cap:
                raise LimitError("", f"{len(running)} jobs are already queued or running for this tenant, "
                                 f"which is the cap max_running_jobs={cap}", cap="max_running_jobs", limit=cap)
        self.redis.zadd(key, {job_id: time.time() + horizon_s + SLOT_SLACK_S})
        self.redis.expire(key, int(horizon_s + 2 * SLOT_SLACK_S))

    def release(self, tenant: str, job_id: str) -> None:
        """Give the slot of ``job_id`` back (when a submit fails after admit)."""
        self.redis.zrem(self._key(tenant), job_id)


def rate_key() -> str:
    """Return the rate-limit bucket owner: the API key id, else the client address."""
    principal = g.get("principal")
    if principal is not None and principal.key_id:
        return "key:" + principal.key_id
    return "addr:" + (request.remote_addr or "unknown")


def _error(status: int, code: str, message: str, **extra: Any) -> Response:
    response = jsonify(error_body(code, message, **extra))
    response.status_code = status
    return response


def init_app(app: Flask, settings: LimitSettings, storage_uri: str,
             open_paths: tuple[str, ...] = ("/healthz", "/readyz", "/metrics")) -> Any:
    """Install the body-size cap and the per-key rate limits on ``app``; return the Limiter.

    Call after ``service.auth.init_app`` so the key id is known when the rate
    bucket is chosen. ``storage_uri`` is the Redis URL (``memory://`` in tests).
    """
    from flask_limiter import Limit, Limiter, RateLimitExceeded

    app.config["MAX_CONTENT_LENGTH"] = settings.max_body_bytes

    def exempt() -> bool:
        return request.path in open_paths

    @app.before_request
    def _body_cap() -> None:
        # Refuse on the declared length before reading anything; a body sent
        # without one is cut at MAX_CONTENT_LENGTH by Werkzeug as it is read.
        if request.content_length is not None and request.content_length > settings.max_body_bytes:
            raise RequestEntityTooLarge()

    limiter = Limiter(
        rate_key,
        app=app,
        storage_uri=storage_uri,
        # A Redis outage must not turn into a 500 here: the request goes on and
        # meets the outage where the service answers 503 for it.
        storage_options={"socket_connect_timeout": 1, "socket_timeout": 1},
        swallow_errors=True,
        key_prefix="boundwise:rate",
        # Two counters per key (this window and the last, weighted): smooth like a moving
        # window, but O(1) in Redis however high the limit.
        strategy="sliding-window-counter",
        enabled=settings.rate_limits_enabled,
        default_limits=[
            Limit(settings.submit_rate, scope="submit", shared=True, methods=list(WRITE_METHODS),
                  exempt_when=exempt, error_message="rate_limit_submit"),
            Limit(settings.read_rate, scope="read", shared=True, methods=list(READ_METHODS),
                  exempt_when=exempt, error_message="rate_limit_read"),
        ],
    )

    @app.errorhandler(RateLimitExceeded)
    def _too_many(err: RateLimitExceeded) -> Response:
        current = limiter.current_limit
        retry_after = 1
        if current is not None:
            try:
                retry_after = max(1, math.ceil(current.window[0] - time.time()))
            except Exception:  # storage gone between the hit and here: 1 s is a safe hint
                logger.warning("rate limit window unavailable; answering Retry-After 1")
        cap = err.description or "rate_limit"
        limit = str(err.limit.limit)
        response = _error(429, "rate_limited",
                          f"too many requests: over the cap {cap}={limit}; retry in {retry_after} s",
                          cap=cap, limit=limit)
        response.headers["Retry-After"] = str(retry_after)
        return response

    @app.errorhandler(RequestEntityTooLarge)
    def _too_large(err: RequestEntityTooLarge) -> Response:
        cap = settings.max_body_bytes
        return _error(413, "over_limit", f"the request body is over the cap max_body_bytes={cap}",
                      cap="max_body_bytes", limit=cap)

    app.extensions["boundwise.limits"] = settings
    return limiter
