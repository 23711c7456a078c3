"""Serve Prometheus metrics at /metrics: the workers' job metrics, queue depths and HTTP counts.

In production ``PROMETHEUS_MULTIPROC_DIR`` names a directory shared by the
gunicorn workers and the RQ workers of one machine (it must be set before any
of them imports prometheus_client, and emptied when they all start afresh):
``/metrics`` then adds up the samples of every process. Queue depths are read
from Redis at scrape time, so every API instance reports the same, true value.

Access is set by two settings: ``METRICS_ALLOW`` (comma-separated networks,
e.g. ``127.0.0.1/32,10.0.0.0/8``; empty allows any address) and
``METRICS_TOKEN`` (when set, a scraper must send ``Authorization: Bearer
<token>``). ``METRICS_ENABLED`` false removes the endpoint (404).
"""

from __future__ import annotations

import hmac
import ipaddress
import logging
import os
import time
from collections.abc import Callable, Iterable, Sequence
from typing import Any

from flask import Flask, Response, current_app, g, request
from prometheus_client import (
    CONTENT_TYPE_LATEST,
    REGISTRY,
    CollectorRegistry,
    Counter,
    Histogram,
    generate_latest,
)
from prometheus_client.core import GaugeMetricFamily

logger = logging.getLogger(__name__)

__all__ = ["QueueDepthCollector", "init_app", "child_exit", "parse_networks"]

HTTP_REQUESTS = Counter("boundwise_http_requests", "HTTP requests answered", ["method", "status"])
HTTP_SECONDS = Histogram("boundwise_http_request_seconds", "Seconds to answer an HTTP request",
                         buckets=(0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5))


class QueueDepthCollector:
    """Report each queue's waiting and running job counts, read from Redis when scraped."""

    def __init__(self, redis: Callable[[], Any], queues: Callable[[], Sequence[str]]) -> None:
        self._redis = redis
        self._queues = queues

    def collect(self) -> Iterable[GaugeMetricFamily]:
        from rq import Queue
        from rq.registry import StartedJobRegistry

        depth = GaugeMetricFamily("boundwise_queue_depth", "Jobs waiting in each queue", labels=["queue"])
        running = GaugeMetricFamily("boundwise_queue_running", "Jobs being searched, per queue",
                                    labels=["queue"])
        up = GaugeMetricFamily("boundwise_redis_up", "1 when Redis answered this scrape, else 0")
        try:
            connection = self._redis()
            for name in self._queues():
                queue = Queue(name, connection=connection)
                depth.add_metric([name], queue.count)
                running.add_metric([name], StartedJobRegistry(queue=queue).count)
        except Exception as err:  # Redis down must not take /metrics down with it
            logger.warning("queue depths unavailable: %s", err)
            up.add_metric([], 0)
            yield up
            return
        up.add_metric([], 1)
        yield depth
        yield running
        yield up


def parse_networks(text: str) -> tuple[ipaddress.IPv4Network | ipaddress.IPv6Network, ...]:
    """Parse ``METRICS_ALLOW``; raise ValueError naming the entry that is not a network."""
    nets = []
    for part in (p.strip() for p in text.split(",")):
        if not part:
            continue
        try:
            nets.append(ipaddress.ip_network(part, strict=False))
        except ValueError:
            raise ValueError(f"METRICS_ALLOW: {part!r} is not an IP network") from None
    return tuple(nets)


def _allowed(allow: tuple[Any, ...], token: str) -> bool:
    if allow:
        try:
            addr = ipaddress.ip_address(request.remote_addr or "")
        except ValueError:
            return False
        if not any(addr in net for net in allow):
            return False
    if token:
        scheme, _, given = request.headers.get("Authorization", "").partition(" ")
        if scheme.lower() != "bearer" or not hmac.compare_digest(given.strip().encode(), token.encode()):
            return False
    return True


def registry_for_scrape(extra: Sequence[Any] = ()) -> CollectorRegistry:
    """Return the registry to expose: all processes' files in multiprocess mode, else this one."""
    if os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        from prometheus_client import multiprocess

        registry = CollectorRegistry()
        multiprocess.MultiProcessCollector(registry)
    else:
        registry = CollectorRegistry()
        registry.register(_Forward(REGISTRY))
    for collector in extra:
        registry.register(collector)
    return registry


class _Forward:
    """Expose the process registry's samples inside a per-scrape registry."""

    def __init__(self, source: CollectorRegistry) -> None:
        self._source = source

    def collect(self) -> Iterable[Any]:
        return self._source.collect()


def init_app(app: Flask, redis: Callable[[], Any], queues: Callable[[], Sequence[str]]) -> None:
    """Add ``/metrics`` and the HTTP request counters to ``app``.

    ``redis`` returns the app's Redis connection and ``queues`` the RQ queue
    names whose depth to report; both are called at scrape time.
    """
    app.config.setdefault("METRICS_ENABLED", True)
    app.config.setdefault("METRICS_ALLOW", "")
    app.config.setdefault("METRICS_TOKEN", "")
    allow = parse_networks(app.config["METRICS_ALLOW"])
    collector = QueueDepthCollector(redis, queues)
    import worker.metrics  # noqa: F401  (defines the job metrics in this process too)

    @app.before_request
    def _start_clock() -> None:
        g.metrics_started = time.perf_counter()

    @app.after_request
    def _count(response: Response) -> Response:
        started = g.pop("metrics_started", None)
        HTTP_REQUESTS.labels(method=request.method, status=str(response.status_code)).inc()
        if started is not None:
            HTTP_SECONDS.observe(time.perf_counter() - started)
        return response

    def metrics() -> Response:
        if not current_app.config["METRICS_ENABLED"]:
            return Response("not found\n", status=404, mimetype="text/plain")
        if not _allowed(allow, current_app.config["METRICS_TOKEN"]):
            # 404, not 403: the endpoint's existence is nobody else's business.
            return Response("not found\n", status=404, mimetype="text/plain")
        body = generate_latest(registry_for_scrape([collector]))
        return Response(body, status=200, headers={"Content-Type": CONTENT_TYPE_LATEST})

    app.add_url_rule("/metrics", endpoint="metrics", view_func=metrics, methods=["GET"])


def child_exit(server: Any, worker: Any) -> None:
    """Gunicorn hook: drop a dead worker's live-gauge files from the multiprocess directory."""
    if os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        from prometheus_client import multiprocess

        multiprocess.mark_process_dead(worker.pid)


def serve_worker_metrics(port: int, addr: str = "0.0.0.0") -> None:
    """Serve this machine's multiprocess samples on ``port`` from a worker process (no Flask).

    For deployments where the workers share no directory with an API process
    (one pod per worker): the scraper reads each worker pod directly. Queue
    depths are left to the API's ``/metrics``, so they are not counted twice.
    """
    from prometheus_client import start_http_server

    start_http_server(port, addr=addr, registry=registry_for_scrape())
    logger.info("worker metrics on %s:%d", addr, port)
