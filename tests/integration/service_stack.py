"""The API under gunicorn and `boundwise worker` processes on the real Redis, for the service tests.

The Redis is the one CI runs (``BOUNDWISE_TEST_REDIS_URL``, default
``redis://127.0.0.1:6379/0``), used on a database of its own (9) that is
flushed before and after. Processes listen on free loopback ports and are
ended by their own pids.
"""

from __future__ import annotations

import http.client
import json
import os
import signal
import socket
import subprocess
import sys
import time
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any
from urllib.parse import urlsplit, urlunsplit

import pytest

ROOT = Path(__file__).resolve().parents[2]
TEST_DB = 9


def redis_url() -> str:
    """Return the URL of the test database on the real Redis; skip or fail loudly if it is not there."""
    import redis

    base = os.environ.get("BOUNDWISE_TEST_REDIS_URL", "redis://127.0.0.1:6379/0")
    parts = urlsplit(base)
    url = urlunsplit((parts.scheme, parts.netloc, f"/{TEST_DB}", parts.query, parts.fragment))
    try:
        redis.Redis.from_url(url, socket_connect_timeout=1).ping()
    except redis.RedisError as err:
        if os.environ.get("BOUNDWISE_REQUIRE_REDIS"):
            pytest.fail(f"BOUNDWISE_REQUIRE_REDIS is set but Redis at {url} does not answer: {err}")
        pytest.skip(f"no Redis at {url} ({err}); set BOUNDWISE_TEST_REDIS_URL")
    return url


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def wait_until(check: Callable[[], Any], timeout: float, what: str, interval: float = 0.05) -> Any:
    """Call ``check`` until it returns something truthy; return it, or fail naming ``what``."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        try:
            value = check()
        except OSError:
            value = None
        if value:
            return value
        time.sleep(interval)
    pytest.fail(f"timed out after {timeout} s waiting for {what}")


def children(pid: int) -> list[int]:
    out: list[int] = []
    for task in Path(f"/proc/{pid}/task").glob("*"):
        try:
            out.extend(int(p) for p in (task / "children").read_text().split())
        except OSError:
            continue
    return out


def end(proc: subprocess.Popen, grace: float = 10.0) -> None:
    """SIGTERM ``proc``, then SIGKILL it if it has not gone after ``grace`` seconds."""
    if proc.poll() is not None:
        return
    proc.send_signal(signal.SIGTERM)
    try:
        proc.wait(grace)
    except subprocess.TimeoutExpired:
        for pid in children(proc.pid):
            try:
                os.kill(pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
        proc.kill()
        proc.wait(5)


class Stack:
    """gunicorn serving the API plus named RQ workers, all on ``url``."""

    def __init__(self, url: str, logs: Path, env: Mapping[str, str]) -> None:
        self.redis_url = url
        self.logs = logs
        self.port = free_port()
        self.env = {**os.environ, "PYTHONPATH": str(ROOT), "REDIS_URL": url, **env}
        self.env.pop("PROMETHEUS_MULTIPROC_DIR", None)
        self.api: subprocess.Popen | None = None
        self.workers: dict[str, subprocess.Popen] = {}
        self._started = 0

    def _spawn(self, args: list[str], name: str) -> subprocess.Popen:
        with open(self.logs / f"{name}.log", "ab") as log:  # the child keeps its own copy of the descriptor
            return subprocess.Popen(args, cwd=ROOT, env=self.env, stdout=log, stderr=subprocess.STDOUT,
                                    start_new_session=True)

    def start(self, workers: int) -> "Stack":
        self.logs.mkdir(parents=True, exist_ok=True)
        self.api = self._spawn([sys.executable, "-m", "gunicorn", "--config", str(ROOT / "deploy" /
                                "gunicorn.conf.py"), "--bind", f"127.0.0.1:{self.port}", "--workers", "1",
                                "service.app:create_app()"], "api")
        for _ in range(workers):
            self.add_worker()
        wait_until(lambda: self.request("GET", "/readyz")[0] == 200, 30, "the API to be ready")
        return self

    def add_worker(self) -> str:
        self._started += 1
        name = f"itest-{os.getpid()}-{self._started}"
        self.workers[name] = self._spawn([sys.executable, "-m", "service.cli", "worker", "--name", name], name)
        return name

    def stop(self) -> None:
        for proc in self.workers.values():
            end(proc)
        if self.api is not None:
            end(self.api)

    def request(self, method: str, path: str, body: Any = None, headers: Mapping[str, str] | None = None,
                timeout: float = 40) -> tuple[int, Any, dict[str, str]]:
        conn = http.client.HTTPConnection("127.0.0.1", self.port, timeout=timeout)
        try:
            data = json.dumps(body).encode() if body is not None else None
            hdrs = {"Content-Type": "application/json", **(headers or {})} if data is not None else dict(headers or {})
            conn.request(method, path, body=data, headers=hdrs)
            response = conn.getresponse()
            raw = response.read()
            payload = json.loads(raw) if raw and response.getheader("Content-Type", "").startswith(
                "application/json") else raw.decode()
            return response.status, payload, {k.lower(): v for k, v in response.getheaders()}
        finally:
            conn.close()

    def job(self, job_id: str, query: str = "") -> dict:
        status, body, _ = self.request("GET", f"/v1/jobs/{job_id}{query}")
        assert status == 200, body
        return body

    def wait_job(self, job_id: str, check: Callable[[dict], bool], timeout: float, what: str) -> dict:
        def poll() -> dict | None:
            doc = self.job(job_id)
            return doc if check(doc) else None

        return wait_until(poll, timeout, what, interval=0.02)

    def events(self, path: str, last: str | None = None, timeout: float = 60) -> list[tuple[str, str, dict]]:
        """Read a whole event stream (it ends after the final event)."""
        conn = http.client.HTTPConnection("127.0.0.1", self.port, timeout=timeout)
        try:
            conn.request("GET", path, headers={"Last-Event-ID": last} if last else {})
            response = conn.getresponse()
            assert response.status == 200
            text = response.read().decode()
        finally:
            conn.close()
        out = []
        for block in text.split("\n\n"):
            fields = dict(line.split(": ", 1) for line in block.splitlines()
                          if ": " in line and not line.startswith(":"))
            if "data" in fields:
                out.append((fields["id"], fields["event"], json.loads(fields["data"])))
        return out
