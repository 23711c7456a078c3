"""Processes for the integration tests: a private redis-server, the API under gunicorn, RQ workers.

Every process is started by the test that needs it, on a free port of
127.0.0.1, and ended by its own pid (never by name), so tests cannot touch any
other Redis or service on the machine.
"""

from __future__ import annotations

import os
import shutil
import signal
import socket
import subprocess
import sys
import time
from collections.abc import Mapping
from pathlib import Path

import requests

ROOT = Path(__file__).resolve().parents[2]


def free_port() -> int:
    """Return a TCP port on 127.0.0.1 that nothing listens on right now."""
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def wait_for(check, timeout: float, interval: float = 0.05, what: str = "condition"):
    """Call ``check`` until it returns a truthy value; return it, or raise TimeoutError."""
    deadline = time.monotonic() + timeout
    last_error: BaseException | None = None
    while time.monotonic() < deadline:
        try:
            value = check()
        except Exception as err:  # the thing polled may not be up yet; keep the last error for the report
            last_error = err
            value = None
        if value:
            return value
        time.sleep(interval)
    raise TimeoutError(f"timed out after {timeout} s waiting for {what}"
                       + (f" (last error: {last_error!r})" if last_error else ""))


def children(pid: int) -> list[int]:
    """Return the direct child pids of ``pid`` (Linux /proc)."""
    out: list[int] = []
    task_dir = Path(f"/proc/{pid}/task")
    if not task_dir.is_dir():
        return out
    for task in task_dir.iterdir():
        try:
            out.extend(int(p) for p in (task / "children").read_text().split())
        except OSError:
            continue
    return out


def stop(proc: subprocess.Popen, grace: float = 5.0) -> None:
    """End ``proc`` (and its process group) by pid: SIGTERM, then SIGKILL after ``grace``."""
    if proc.poll() is not None:
        return
    try:
        os.killpg(proc.pid, signal.SIGTERM)
    except ProcessLookupError:
        return
    try:
        proc.wait(grace)
    except subprocess.TimeoutExpired:
        try:
            os.killpg(proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        proc.wait(5)


def child_env(extra: Mapping[str, str] | None = None) -> dict[str, str]:
    """Return the environment for child processes: this checkout first on the path."""
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    env.pop("PROMETHEUS_MULTIPROC_DIR", None)  # only a test that asks for one shares a directory
    if extra:
        env.update(extra)
    return env


class RedisServer:
    """A redis-server of our own with append-only persistence in ``directory``."""

    def __init__(self, directory: Path, port: int | None = None, fsync: str = "everysec") -> None:
        self.directory = directory
        self.port = port or free_port()
        # "always" when a test kills Redis right after a write and needs that write back.
        self.fsync = fsync
        self.proc: subprocess.Popen | None = None

    @property
    def url(self) -> str:
        return f"redis://127.0.0.1:{self.port}/0"

    def start(self) -> "RedisServer":
        exe = shutil.which("redis-server")
        if exe is None:
            raise RuntimeError("redis-server is not installed")
        self.directory.mkdir(parents=True, exist_ok=True)
        self.proc = subprocess.Popen(
            [exe, "--port", str(self.port), "--bind", "127.0.0.1", "--appendonly", "yes",
             "--appendfsync", self.fsync, "--dir", str(self.directory), "--save", "",
             "--maxmemory-policy", "noeviction"],
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
        import redis

        client = redis.Redis(host="127.0.0.1", port=self.port)
        wait_for(client.ping, 10, what=f"redis-server on port {self.port}")
        # Loading the append-only file happens before PING answers PONG.
        return self

    def kill(self) -> None:
        """Stop the server at once, as a crash would (the append-only file stays)."""
        if self.proc is not None and self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGKILL)
            self.proc.wait(5)

    def stop(self) -> None:
        if self.proc is not None:
            stop(self.proc)


class Service:
    """The API under gunicorn on a free port, pointed at ``redis_url``."""

    def __init__(self, redis_url: str, log_dir: Path, env: Mapping[str, str] | None = None,
                 workers: int = 2) -> None:
        self.port = free_port()
        self.redis_url = redis_url
        self.log_dir = log_dir
        self.env = dict(env or {})
        self.workers = workers
        self.proc: subprocess.Popen | None = None

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def start(self) -> "Service":
        self.log_dir.mkdir(parents=True, exist_ok=True)
        with open(self.log_dir / f"api-{self.port}.log", "ab") as log:
            self.proc = subprocess.Popen(
                [sys.executable, "-m", "gunicorn", "--config", str(ROOT / "deploy" / "gunicorn.conf.py"),
                 "--bind", f"127.0.0.1:{self.port}", "--workers", str(self.workers), "service.app:create_app()"],
                cwd=ROOT, env=child_env({"REDIS_URL": self.redis_url, **self.env}),
                stdout=log, stderr=subprocess.STDOUT, start_new_session=True)
        wait_for(lambda: requests.get(self.url + "/healthz", timeout=1).status_code == 200, 30,
                 what="the API to answer /healthz")
        return self

    def stop(self) -> None:
        if self.proc is not None:
            stop(self.proc)


class Worker:
    """One ``boundwise worker`` process (an RQ worker that forks a work-horse per job)."""

    def __init__(self, redis_url: str, log_dir: Path, env: Mapping[str, str] | None = None,
                 args: tuple[str, ...] = ()) -> None:
        self.redis_url = redis_url
        self.log_dir = log_dir
        self.env = dict(env or {})
        self.args = args
        self.proc: subprocess.Popen | None = None

    def start(self) -> "Worker":
        self.log_dir.mkdir(parents=True, exist_ok=True)
        with open(self.log_dir / f"worker-{time.monotonic_ns()}.log", "ab") as log:
            self.proc = subprocess.Popen(
                [sys.executable, "-m", "service.cli", "worker", *self.args],
                cwd=ROOT, env=child_env({"REDIS_URL": self.redis_url, **self.env}),
                stdout=log, stderr=subprocess.STDOUT, start_new_session=True)
        return self

    def kill_hard(self) -> list[int]:
        """SIGKILL the worker and every child of it (its work-horse); return the pids killed."""
        assert self.proc is not None
        pids = children(self.proc.pid) + [self.proc.pid]
        for pid in pids:
            try:
                os.kill(pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
        self.proc.wait(5)
        return pids

    def stop(self) -> None:
        if self.proc is not None:
            stop(self.proc)


def require_redis_server() -> None:
    """Skip (or, with BOUNDWISE_REQUIRE_REDIS set, fail) when redis-server is not installed."""
    import pytest

    if shutil.which("redis-server") is None:
        if os.environ.get("BOUNDWISE_REQUIRE_REDIS"):
            pytest.fail("redis-server is not installed; CI must have it")
        pytest.skip("redis-server is not installed")


class Stack:
    """A private Redis, the API and any number of workers, with one tenant key; ``close`` ends them all."""

    def __init__(self, directory: Path, env: Mapping[str, str] | None = None, web_workers: int = 2,
                 fsync: str = "everysec") -> None:
        self.directory = directory
        self.env = dict(env or {})
        self.redis = RedisServer(directory / "redis", fsync=fsync).start()
        self.api = Service(self.redis.url, directory / "logs", self.env, workers=web_workers).start()
        self.workers: list[Worker] = []
        self._keys: dict[str, str] = {}

    def key(self, tenant: str = "picking-east") -> str:
        """Return an API key of ``tenant`` (made on first use)."""
        if tenant not in self._keys:
            import redis

            from service.auth import KeyStore

            _, self._keys[tenant] = KeyStore(redis.Redis.from_url(self.redis.url)).create(tenant)
        return self._keys[tenant]

    def headers(self, tenant: str = "picking-east") -> dict[str, str]:
        return {"Authorization": f"Bearer {self.key(tenant)}"}

    def worker(self, *args: str) -> Worker:
        """Start one more worker."""
        w = Worker(self.redis.url, self.directory / "logs", self.env, args).start()
        self.workers.append(w)
        return w

    def get(self, path: str, tenant: str = "picking-east", **kw) -> requests.Response:
        return requests.get(self.api.url + path, headers=self.headers(tenant), timeout=30, **kw)

    def post(self, path: str, body: object, tenant: str = "picking-east", **kw) -> requests.Response:
        return requests.post(self.api.url + path, json=body, headers=self.headers(tenant), timeout=30, **kw)

    def wait_job(self, job_id: str, check, timeout: float, what: str = "the job",
                 tenant: str = "picking-east") -> dict:
        """Poll the job until ``check(document)`` holds; return that document."""
        def poll():
            r = self.get(f"/v1/jobs/{job_id}", tenant=tenant)
            return r.json() if r.status_code == 200 and check(r.json()) else None
        return wait_for(poll, timeout, interval=0.1, what=what)

    def close(self) -> None:
        for w in self.workers:
            w.stop()
        self.api.stop()
        self.redis.stop()
