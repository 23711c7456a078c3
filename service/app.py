"""Build the Flask app of the planning API: settings, Redis, extensions, error table, blueprints.

``create_app()`` is what gunicorn loads (``service.app:create_app()``). Everything
the app is made of is listed once, here, in order:

- ``EXTENSIONS``: what every request goes through (request ids and JSON logs,
  API keys, rate and size limits, metrics); each entry installs its own
  ``before_request`` / ``after_request`` hooks, so adding one is one line;
- the error table (``service.errors``);
- ``BLUEPRINTS`` (``service.views``): one per resource.
"""

from __future__ import annotations

import logging
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import redis as redis_lib
from flask import Flask
from redis.backoff import ExponentialBackoff
from redis.retry import Retry

from service import auth, errors, limits, logs, metrics
from service.config import Config, load
from service.queue import JobStore
from service.views import BLUEPRINTS
from worker.keys import QUEUES

logger = logging.getLogger(__name__)

__all__ = ["create_app", "Service", "EXTENSIONS", "connect"]


@dataclass(frozen=True, slots=True)
class Service:
    """What the views need: the settings, the Redis client, the job store and the tenant slots."""

    config: Config
    redis: Any
    store: JobStore
    slots: limits.RunningSlots
    limits_storage: str


def connect(url: str) -> Any:
    """Return a Redis client for the API (bytes replies, as RQ needs; short connect timeout)."""
    # socket_timeout stays above the longest blocking read (2 s slices) with room to spare;
    # two quick retries ride out a blip, and an outage answers 503 within a second.
    return redis_lib.Redis.from_url(url, socket_connect_timeout=2, socket_timeout=10, health_check_interval=30,
                                    retry=Retry(ExponentialBackoff(cap=0.2, base=0.02), 2))


def _logs(app: Flask, svc: Service) -> None:
    logs.init_app(app)


def _auth(app: Flask, svc: Service) -> None:
    store = auth.KeyStore(svc.redis)
    auth.init_app(app, lambda: store)


def _limits(app: Flask, svc: Service) -> None:
    limits.init_app(app, svc.config.limits, svc.limits_storage)


def _metrics(app: Flask, svc: Service) -> None:
    metrics.init_app(app, lambda: svc.redis, lambda: QUEUES)


# Order matters: the request id first (every later line carries it), the key
# before the rate limits (buckets are per key), metrics last (they time the rest).
EXTENSIONS: tuple[Callable[[Flask, Service], None], ...] = (_logs, _auth, _limits, _metrics)


def create_app(config: Config | Mapping[str, str] | None = None, *, redis: Any = None) -> Flask:
    """Return the API app.

    ``config`` is a ``Config``, a mapping read like the environment, or None
    for the process environment. ``redis`` replaces the client made from
    ``REDIS_URL`` (tests pass a fakeredis client; rate counters then stay in
    memory).
    """
    cfg = config if isinstance(config, Config) else load(config)
    connection = redis if redis is not None else connect(cfg.redis_url)
    svc = Service(
        config=cfg,
        redis=connection,
        store=JobStore(connection, cfg),
        slots=limits.RunningSlots(connection),
        limits_storage=cfg.redis_url if redis is None else "memory://",
    )
    app = Flask("boundwise", static_folder=None)
    app.json.sort_keys = False  # type: ignore[attr-defined]
    app.config.update(
        AUTH_REQUIRED=cfg.auth_required,
        METRICS_ENABLED=cfg.metrics_enabled,
        METRICS_ALLOW=cfg.metrics_allow,
        METRICS_TOKEN=cfg.metrics_token,
    )
    app.extensions["boundwise"] = svc
    errors.register(app)
    for install in EXTENSIONS:
        install(app, svc)
    for blueprint in BLUEPRINTS:
        app.register_blueprint(blueprint)
    logger.debug("app ready: auth %s, redis %s", "on" if cfg.auth_required else "off",
                 "injected" if redis is not None else "from REDIS_URL")
    return app
