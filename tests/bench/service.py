"""Service benchmark: submit-to-first-plan latency, sustained submits per second and cancel latency.

Run by hand (not collected by the test command), with the real Redis up::

    python3 tests/bench/service.py                  # 200 latency jobs, 8 clients for 5 s
    python3 tests/bench/service.py --quick          # 60 jobs, 3 s

It starts the API under gunicorn (``--web-workers``, threaded) and warm
``boundwise worker`` processes against database 9 of ``BOUNDWISE_TEST_REDIS_URL``
(default redis://127.0.0.1:6379/0; flushed before and after), then prints,
beside the same figures for a bare Redis round trip (PING) measured in the same
run from the same client:

- submit -> first improvement of a small floor job, as a client sees it
  (POST, then a long-poll GET that returns once revision 1 exists): p50, p95;
- submits per second from ``--clients`` keep-alive clients for ``--seconds``:
  with the workers running (they take every job); with no worker (the backlog
  grows, and the tenant running-jobs check reads every queued job on each
  submit); and with no worker while that check's set is emptied every 50 ms
  (the API's own cost at the size a running-jobs cap keeps it to);
- DELETE -> status ``cancelled`` of a running search, polled every 2 ms: p50, max.
"""

from __future__ import annotations

import argparse
import csv
import http.client
import json
import os
import statistics
import subprocess
import sys
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

import redis  # noqa: E402

from tests.integration.service_stack import end, free_port  # noqa: E402

DATASETS = Path(os.environ.get("BOUNDWISE_DATASETS", ROOT.parent / "shared" / "datasets"))
# A picker robot's route across a small parts-warehouse floor (invented layout).
FLOOR = ["..........", ".##.##.##.", ".##.##.##.", "3333333333", ".##.##.##.", ".##.##.##.", ".........."]
SMALL = {"problem": {"domain": "grid", "rows": FLOOR, "start": [6, 0], "goals": [[0, 9]]},
         "search": {"weight": 2.0}, "budget": {"time_s": 5}}


def pct(values: list[float], q: float) -> float:
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, int(round(q * (len(ordered) - 1))))]


class Client:
    """One keep-alive HTTP connection to the API."""

    def __init__(self, port: int) -> None:
        self.conn = http.client.HTTPConnection("127.0.0.1", port, timeout=60)

    def call(self, method: str, path: str, body: object = None) -> tuple[int, dict]:
        data = json.dumps(body).encode() if body is not None else None
        self.conn.request(method, path, body=data, headers={"Content-Type": "application/json"} if data else {})
        response = self.conn.getresponse()
        return response.status, json.loads(response.read())


def _env(url: str) -> dict[str, str]:
    env = {**os.environ, "PYTHONPATH": str(ROOT), "REDIS_URL": url, "BOUNDWISE_AUTH": "off",
           "BOUNDWISE_RATE_LIMITS": "off", "BOUNDWISE_MAX_RUNNING_JOBS": "1000000", "BOUNDWISE_LOG_LEVEL": "WARNING"}
    env.pop("PROMETHEUS_MULTIPROC_DIR", None)
    return env


def start_worker(url: str, name: str) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "service.cli", "worker", "--name", name], cwd=ROOT,
                            env=_env(url), stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)


def start(url: str, port: int, web_workers: int, workers: int, logs: Path) -> list[subprocess.Popen]:
    with open(logs / "bench-api.log", "ab") as log:
        procs = [subprocess.Popen(
            [sys.executable, "-m", "gunicorn", "--config", str(ROOT / "deploy" / "gunicorn.conf.py"), "--bind",
             f"127.0.0.1:{port}", "--workers", str(web_workers), "service.app:create_app()"],
            cwd=ROOT, env=_env(url), stdout=log, stderr=subprocess.STDOUT, start_new_session=True)]
    procs += [start_worker(url, f"bench-{os.getpid()}-{i}") for i in range(workers)]
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        try:
            if Client(port).call("GET", "/readyz")[0] == 200:
                return procs
        except OSError:
            pass
        time.sleep(0.1)
    raise SystemExit("the API did not become ready (see bench-api.log)")


def redis_latency(url: str, n: int) -> list[float]:
    r = redis.Redis.from_url(url)
    out = []
    for _ in range(n):
        t0 = time.perf_counter()
        r.ping()
        out.append(time.perf_counter() - t0)
    return out


def first_plan_latency(port: int, n: int) -> list[float]:
    client = Client(port)
    out = []
    for _ in range(n):
        t0 = time.perf_counter()
        status, job = client.call("POST", "/v1/jobs", SMALL)
        assert status == 202, job
        status, doc = client.call("GET", f"/v1/jobs/{job['id']}?after=0&wait=10")
        assert doc["best"] is not None, doc
        out.append(time.perf_counter() - t0)
    return out


def throughput(action, clients: int, seconds: float) -> float:
    counts = [0] * clients
    stop = time.perf_counter() + seconds

    def run(i: int) -> None:
        do = action()
        while time.perf_counter() < stop:
            do()
            counts[i] += 1

    threads = [threading.Thread(target=run, args=(i,)) for i in range(clients)]
    t0 = time.perf_counter()
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    return sum(counts) / (time.perf_counter() - t0)


def submitter(port: int):
    def make():
        client = Client(port)

        def do():
            status, body = client.call("POST", "/v1/jobs", SMALL)
            assert status == 202, body
        return do
    return make


def pinger(url: str):
    def make():
        r = redis.Redis.from_url(url)
        return r.ping
    return make


def cancel_latency(port: int, runs: int) -> list[float]:
    lines = [x for x in (DATASETS / "korf15" / "korf100.csv").read_text().splitlines() if not x.startswith("#")]
    tiles = [int(t) for t in next(r for r in csv.DictReader(lines) if r["id"] == "3")["tiles"].split()]
    body = {"problem": {"domain": "sliding-tile", "tiles": tiles}, "search": {"weight": 1.5},
            "budget": {"time_s": 30}}
    client = Client(port)
    out = []
    for _ in range(runs):
        _, job = client.call("POST", "/v1/jobs", body)
        _, doc = client.call("GET", f"/v1/jobs/{job['id']}?after=0&wait=20")
        assert doc["status"] == "running", doc["status"]
        t0 = time.perf_counter()
        client.call("DELETE", f"/v1/jobs/{job['id']}")
        while client.call("GET", f"/v1/jobs/{job['id']}")[1]["status"] != "cancelled":
            time.sleep(0.002)
        out.append(time.perf_counter() - t0)
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--clients", type=int, default=8)
    parser.add_argument("--web-workers", type=int, default=2)
    parser.add_argument("--workers", type=int, default=2)
    args = parser.parse_args()
    jobs, seconds, cancels = (60, 3.0, 5) if args.quick else (200, 5.0, 10)
    base = os.environ.get("BOUNDWISE_TEST_REDIS_URL", "redis://127.0.0.1:6379/0").rsplit("/", 1)[0]
    url = base + "/9"
    r = redis.Redis.from_url(url)
    r.flushdb()
    logs = Path("/tmp") if Path("/tmp").is_dir() else ROOT
    port = free_port()
    procs = start(url, port, args.web_workers, args.workers, logs)
    try:
        first_plan_latency(port, 20)  # warm: imports, forks, connection pools
        ping = redis_latency(url, 2000)
        lat = first_plan_latency(port, jobs)
        print(f"machine: {os.cpu_count()} cores; {args.web_workers} web workers, {args.workers} search workers, "
              f"{args.clients} clients")
        print(f"{'measure':44s} {'service':>12s} {'Redis PING':>12s} {'ratio':>8s}")
        for q in (0.5, 0.95):
            s, p = pct(lat, q) * 1000, pct(ping, q) * 1000
            print(f"{'submit -> first plan, p%d (ms)' % (q * 100):44s} {s:12.2f} {p:12.3f} {s / p:8.0f}")
        pings = throughput(pinger(url), args.clients, seconds)
        busy = throughput(submitter(port), args.clients, seconds)
        print(f"{'submits/s, workers running':44s} {busy:12.0f} {pings:12.0f} {pings / busy:8.1f}")
        for proc in procs[1:]:
            end(proc)
        r.flushdb()
        idle = throughput(submitter(port), args.clients, seconds)
        print(f"{'submits/s, no worker (backlog grows)':44s} {idle:12.0f} {pings:12.0f} {pings / idle:8.1f}")
        r.flushdb()
        # The tenant running-jobs check reads every queued job's status on each submit, so
        # a growing backlog slows submits; emptying the set keeps it at the size a cap allows.
        stop = threading.Event()

        def drain() -> None:
            while not stop.wait(0.05):
                r.delete("boundwise:tenant:local:active")

        drainer = threading.Thread(target=drain)
        drainer.start()
        bounded = throughput(submitter(port), args.clients, seconds)
        stop.set()
        drainer.join()
        print(f"{'submits/s, no worker, running-jobs set kept small':44s} {bounded:12.0f} {pings:12.0f} "
              f"{pings / bounded:8.1f}")
        r.flushdb()
        procs[1:] = [start_worker(url, f"bench-{os.getpid()}-cancel")]
        time.sleep(1.0)
        cancel = cancel_latency(port, cancels)
        print(f"{'DELETE -> cancelled, p50 / max (ms)':44s} {pct(cancel, 0.5) * 1000:6.0f} /"
              f"{max(cancel) * 1000:4.0f}")
    finally:
        for proc in procs:
            end(proc)
        r.flushdb()


if __name__ == "__main__":
    main()
