"""`boundwise serve` without REDIS_URL: in-memory Redis, gunicorn and workers in one command, stopped cleanly."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import urllib.request

import pytest

from tests.integration.service_stack import ROOT, children, free_port, wait_until

pytestmark = [pytest.mark.e2e]


def _get(url: str) -> dict:
    with urllib.request.urlopen(url, timeout=40) as response:
        return json.load(response)


def test_serve_runs_the_whole_service_and_stops_every_part_on_sigterm(tmp_path):
    port = free_port()
    env = {k: v for k, v in os.environ.items() if k != "REDIS_URL"}
    env["PYTHONPATH"] = str(ROOT)
    env["BOUNDWISE_LOG_LEVEL"] = "WARNING"
    with open(tmp_path / "serve.log", "wb") as log:
        proc = subprocess.Popen([sys.executable, "-m", "service.cli", "serve", "--port", str(port), "--workers",
                                 "1", "--web-workers", "1"], cwd=ROOT, env=env, stdout=subprocess.PIPE,
                                stderr=log, start_new_session=True)
    try:
        line = proc.stdout.readline().decode()
        assert f"http://127.0.0.1:{port}" in line and "in-memory Redis" in line
        base = f"http://127.0.0.1:{port}"
        wait_until(lambda: _get(base + "/readyz")["workers"] >= 1, 30, "a registered worker")
        body = json.dumps({"problem": {"domain": "grid", "rows": ["....", ".##.", "...."], "moves": 4,
                                       "start": [2, 0], "goals": [[0, 3]]}}).encode()
        request = urllib.request.Request(base + "/v1/jobs", data=body, headers={"Content-Type": "application/json"})
        with urllib.request.urlopen(request, timeout=10) as response:
            job = json.load(response)
        done = _get(f"{base}/v1/jobs/{job['id']}?after=0&wait=20")
        # common practice: with 4 unit-cost moves no route beats the Manhattan distance, 2 + 3 = 5,
        # and the open left column and top row give a route of exactly that length.
        assert done["status"] == "optimal" and done["best"]["cost"] == 5.0
        parts = children(proc.pid)
        assert len(parts) >= 2  # gunicorn and the worker
        proc.send_signal(signal.SIGTERM)
        assert proc.wait(30) == 0
        for pid in parts:
            wait_until(lambda: not os.path.exists(f"/proc/{pid}") or _zombie(pid), 10, f"part {pid} to exit")
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(5)
        proc.stdout.close()


def _zombie(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat") as f:
            return f.read().split(")")[-1].split()[0] == "Z"
    except OSError:
        return True
