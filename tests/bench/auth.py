"""Benchmark: what API keys and rate limits cost, against the same service without them, in one run.

Two API servers (gunicorn, 2 processes each) share one private Redis: one with
keys and rate limiting on (limits high enough never to refuse, so every
request pays for the check and the count), one with both off. Measured on
each, alternating rounds so drift hits both alike:

- submit rate: jobs accepted per second from 8 client threads (no workers
  running, so only the API and Redis are measured);
- first-plan latency: seconds from a submit to its first plan, seen by a
  long-poll read, one job at a time with 2 workers waiting.

Run by hand from the repository root: ``python3 tests/bench/auth.py``.
"""

from __future__ import annotations

import statistics
import sys
import tempfile
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import requests

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.ops.harness import RedisServer, Service, Worker, wait_for  # noqa: E402

SUBMITS = 400
CLIENTS = 8
ROUNDS = 3
LATENCY_JOBS = 30
GRID = {"domain": "grid", "rows": ["." * 40] * 40, "moves": 8, "start": [39, 0], "goals": [[0, 39]]}
BODY = {"problem": GRID, "budget": {"time_s": 2}}
GUARDED = {"BOUNDWISE_AUTH": "on", "BOUNDWISE_RATE_LIMITS": "on", "BOUNDWISE_RATE_LIMIT_SUBMIT": "1000000/minute",
           "BOUNDWISE_RATE_LIMIT_READ": "1000000/minute", "BOUNDWISE_MAX_RUNNING_JOBS": "1000000",
           "BOUNDWISE_LOG_LEVEL": "WARNING"}
OPEN = {"BOUNDWISE_AUTH": "off", "BOUNDWISE_RATE_LIMITS": "off", "BOUNDWISE_MAX_RUNNING_JOBS": "1000000",
        "BOUNDWISE_LOG_LEVEL": "WARNING"}


def submit_rate(url: str, headers: dict[str, str]) -> float:
    """Return jobs accepted per second for SUBMITS submits from CLIENTS threads."""
    local = threading.local()

    def one(_: int) -> None:
        if not hasattr(local, "s"):
            local.s = requests.Session()
        r = local.s.post(url + "/v1/jobs", json=BODY, headers=headers, timeout=30)
        assert r.status_code == 202, r.text

    with ThreadPoolExecutor(CLIENTS) as pool:
        list(pool.map(one, range(CLIENTS)))  # warm the connections and the app
        began = time.perf_counter()
        list(pool.map(one, range(SUBMITS)))
        return SUBMITS / (time.perf_counter() - began)


def first_plan_latency(url: str, headers: dict[str, str], session: requests.Session) -> float:
    """Return seconds from one submit to its first plan (long-poll read)."""
    began = time.perf_counter()
    r = session.post(url + "/v1/jobs", json=BODY, headers=headers, timeout=30)
    job = r.json()["links"]["self"]
    while True:
        doc = session.get(f"{url}{job}?after=0&wait=10", headers=headers, timeout=30).json()
        if doc["best"] is not None:
            return time.perf_counter() - began
        if doc["status"] not in ("queued", "running"):
            raise RuntimeError(f"job ended without a plan: {doc['status']}")


def drain(redis_url: str) -> None:
    import redis

    r = redis.Redis.from_url(redis_url)
    for name in ("high", "default"):
        r.delete(f"rq:queue:{name}")


def main() -> int:
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        redis_server = RedisServer(root / "redis").start()
        import redis

        from service.auth import KeyStore

        _, key = KeyStore(redis.Redis.from_url(redis_server.url)).create("bench")
        guarded = Service(redis_server.url, root / "logs", GUARDED).start()
        open_ = Service(redis_server.url, root / "logs", OPEN).start()
        sides = {"guarded": (guarded.url, {"Authorization": f"Bearer {key}"}), "open": (open_.url, {})}
        workers: list[Worker] = []
        try:
            rates: dict[str, list[float]] = {"guarded": [], "open": []}
            for _ in range(ROUNDS):
                for name, (url, headers) in sides.items():
                    rates[name].append(submit_rate(url, headers))
                    drain(redis_server.url)
            workers = [Worker(redis_server.url, root / "logs", OPEN).start() for _ in range(2)]
            wait_for(lambda: requests.get(open_.url + "/readyz", timeout=5).status_code == 200, 30,
                     what="the workers")
            latencies: dict[str, list[float]] = {"guarded": [], "open": []}
            sessions = {name: requests.Session() for name in sides}
            for i in range(LATENCY_JOBS * 2):
                name = ("guarded", "open")[i % 2]
                url, headers = sides[name]
                latencies[name].append(first_plan_latency(url, headers, sessions[name]))
        finally:
            for w in workers:
                w.stop()
            guarded.stop()
            open_.stop()
            redis_server.stop()

    def line(label: str, values: dict[str, list[float]], unit: str, better_high: bool) -> None:
        g = statistics.median(values["guarded"])
        o = statistics.median(values["open"])
        ratio = g / o
        print(f"{label:<28} guarded {g:9.3f} {unit:<8} open {o:9.3f} {unit:<8} "
              f"guarded/open {ratio:6.3f} ({'higher' if better_high else 'lower'} is better)")

    print(f"submit rate: {SUBMITS} submits x {ROUNDS} rounds from {CLIENTS} threads; "
          f"first plan: {LATENCY_JOBS} jobs each, 2 workers")
    line("submit rate (median)", rates, "jobs/s", True)
    line("first-plan latency (median)", latencies, "s", False)
    p90 = {k: sorted(v)[int(0.9 * (len(v) - 1))] for k, v in latencies.items()}
    print(f"{'first-plan latency (p90)':<28} guarded {p90['guarded']:9.3f} s        open {p90['open']:9.3f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
