"""The service end to end on the real Redis: gunicorn, `boundwise worker` processes, real HTTP.

The workers search in pure Python so that a large floor keeps a search busy
for seconds after its first plan: long enough to follow it, cancel it, or kill
its worker mid-way.
"""

from __future__ import annotations

import csv
import http.client
import json
import os
import signal
import time

import pytest
import redis as redis_lib
from rq.job import Job

from tests.integration.service_stack import Stack, children, redis_url, wait_until
from tests.service.conftest import random_floor

pytestmark = [pytest.mark.redis, pytest.mark.e2e]

ENV = {"BOUNDWISE_PURE_PYTHON": "1", "BOUNDWISE_AUTH": "off", "BOUNDWISE_RATE_LIMITS": "off",
       "BOUNDWISE_LOG_LEVEL": "WARNING", "BOUNDWISE_MAX_BODY_BYTES": "1000000"}
FINAL = {"optimal", "bounded", "infeasible", "cancelled", "failed", "lost"}


def busy_floor_job(**extra) -> dict:
    """A 400 x 400 floor with a fixed weight 5: a first plan in a blink, then seconds of better ones."""
    rows = random_floor(400, seed=1, blocked=0.25)
    return {"problem": {"domain": "grid", "rows": rows, "start": [0, 0], "goals": [[399, 399]]},
            "search": {"weight": 5.0, "schedule": "fixed"}, "budget": {"time_s": 30}, **extra}


SMALL = {"problem": {"domain": "grid", "rows": ["....", ".##.", "...."], "moves": 4, "start": [2, 0],
                     "goals": [[0, 3]]}}


@pytest.fixture(scope="module")
def stack(tmp_path_factory):
    url = redis_url()
    client = redis_lib.Redis.from_url(url)
    client.flushdb()
    s = Stack(url, tmp_path_factory.mktemp("service-logs"), ENV).start(workers=2)
    try:
        yield s
    finally:
        s.stop()
        client.flushdb()


def _submit(stack: Stack, body: dict, **headers: str) -> dict:
    status, out, _ = stack.request("POST", "/v1/jobs", body, headers)
    assert status == 202, out
    return out


def test_a_grid_job_publishes_improving_plans_and_long_poll_follows_them(stack):
    out = _submit(stack, busy_floor_job())
    first = stack.job(out["id"], "?after=0&wait=25")
    assert first["best"] is not None and first["best"]["revision"] >= 1
    seen = first["best"]["revision"]
    started = time.monotonic()
    later = stack.job(out["id"], f"?after={seen}&wait=25")
    assert later["best"]["revision"] > seen or later["status"] in FINAL
    assert time.monotonic() - started < 26
    done = stack.wait_job(out["id"], lambda d: d["status"] in FINAL, 60, "the search to end")
    assert done["status"] == "optimal"
    _, history, _ = stack.request("GET", f"/v1/jobs/{out['id']}/improvements")
    items = history["improvements"]
    assert len(items) >= 2
    assert all(a["cost"] > b["cost"] for a, b in zip(items, items[1:]))
    bounds = [i["bound"] for i in items if i["bound"] is not None]
    assert all(a >= b - 1e-9 for a, b in zip(bounds, bounds[1:]))
    assert done["best"]["cost"] == pytest.approx(items[-1]["cost"]) and done["best"]["bound"] == 1.0


def test_a_sliding_tile_job_brackets_the_published_optimum(stack, datasets):
    lines = [x for x in (datasets / "korf15" / "korf100.csv").read_text().splitlines() if not x.startswith("#")]
    row = next(r for r in csv.DictReader(lines) if r["id"] == "1")
    # source: Korf 1985, Table 1 (instance 1, optimal length 57), via datasets/korf15/korf100.csv;
    # the data set's goal (blank top left, tile v in cell v) is the domain's default goal.
    optimal = int(row["optimal_length"])
    tiles = [int(t) for t in row["tiles"].split()]
    out = _submit(stack, {"problem": {"domain": "sliding-tile", "tiles": tiles}, "search": {"weight": 3.0, "schedule": "fixed"},
                          "budget": {"time_s": 4}})
    done = stack.wait_job(out["id"], lambda d: d["status"] in FINAL, 60, "the puzzle job to end")
    assert done["status"] in ("bounded", "optimal") and done["best"] is not None
    assert done["progress"]["lower_bound"] <= optimal + 1e-9 <= done["best"]["cost"] + 1e-9
    _, plan, _ = stack.request("GET", f"/v1/jobs/{out['id']}/plan")
    assert len(plan["steps"]) == plan["cost"] >= optimal


def test_cancelling_a_running_search_stops_it_and_keeps_its_best_plan(stack):
    out = _submit(stack, busy_floor_job())
    running = stack.job(out["id"], "?after=0&wait=25")
    assert running["status"] == "running" and running["best"] is not None
    asked = time.monotonic()
    status, answer, _ = stack.request("DELETE", f"/v1/jobs/{out['id']}")
    assert status == 202 and answer["status"] == "running"
    done = stack.wait_job(out["id"], lambda d: d["status"] in FINAL, 10, "the cancel to take effect")
    took = time.monotonic() - asked
    assert done["status"] == "cancelled" and done["stop_reason"] == "cancelled"
    assert took < 1.5  # the goal is 250 ms; tests/bench/service.py measures it
    assert done["best"]["revision"] >= running["best"]["revision"]
    _, plan, _ = stack.request("GET", f"/v1/jobs/{out['id']}/plan")
    assert plan["cost"] == pytest.approx(done["best"]["cost"]) and plan["steps"]


def test_a_resubmit_with_the_same_idempotency_key_returns_the_same_job(stack):
    first = _submit(stack, SMALL, **{"Idempotency-Key": "dock-7-route-19"})
    status, again, headers = stack.request("POST", "/v1/jobs", SMALL, {"Idempotency-Key": "dock-7-route-19"})
    assert status == 202 and again["id"] == first["id"] and headers["idempotent-replayed"] == "true"
    status, clash, _ = stack.request("POST", "/v1/jobs", {**SMALL, "queue": "high"},
                                     {"Idempotency-Key": "dock-7-route-19"})
    assert status == 409 and clash["error"]["field"] == "Idempotency-Key"


def test_the_event_stream_resumes_after_the_last_event_id(stack):
    out = _submit(stack, busy_floor_job(budget={"time_s": 30, "expansions": 60000}))
    events = stack.events(f"/v1/jobs/{out['id']}/events?plans=0")
    kinds = [k for _, k, _ in events]
    assert kinds[-1] == "finished" and kinds.count("improvement") >= 2
    middle = len(events) // 2
    resumed = stack.events(f"/v1/jobs/{out['id']}/events?plans=0", last=events[middle][0])
    assert [e[0] for e in resumed] == [e[0] for e in events[middle + 1:]]
    assert resumed[-1][2]["status"] == events[-1][2]["status"]


def _chunked_post(stack: Stack, body: bytes) -> tuple[int, dict]:
    conn = http.client.HTTPConnection("127.0.0.1", stack.port, timeout=30)
    try:
        conn.request("POST", "/v1/jobs", body=iter([body[i:i + 8192] for i in range(0, len(body), 8192)]),
                     headers={"Content-Type": "application/json"}, encode_chunked=True)
        response = conn.getresponse()
        return response.status, json.loads(response.read())
    finally:
        conn.close()


def test_a_chunked_body_over_the_limit_is_refused_through_gunicorn(stack):
    big = json.dumps({**SMALL, "pad": "x" * 1_100_000}).encode()
    status, answer = _chunked_post(stack, big)
    assert status == 413 and answer["error"]["cap"] == "max_body_bytes"
    status, answer = _chunked_post(stack, json.dumps(SMALL).encode())
    assert status == 202 and answer["status"] == "queued"


def test_a_worker_killed_mid_search_leaves_the_job_lost_with_its_plan(stack):
    out = _submit(stack, busy_floor_job(retries=0))
    running = stack.job(out["id"], "?after=0&wait=25")
    assert running["status"] == "running" and running["best"] is not None
    name = Job.fetch(out["id"], connection=redis_lib.Redis.from_url(stack.redis_url)).worker_name
    parent = stack.workers.pop(name)
    for pid in [*children(parent.pid), parent.pid]:  # the work-horse and its parent
        os.kill(pid, signal.SIGKILL)
    parent.wait(5)
    killed = time.monotonic()
    stack.add_worker()  # the service goes on with a fresh worker
    lost = stack.wait_job(out["id"], lambda d: d["status"] in FINAL, 12, "the job to be reported lost")
    assert lost["status"] == "lost" and time.monotonic() - killed < 10.0
    assert lost["best"]["revision"] >= running["best"]["revision"]
    _, plan, _ = stack.request("GET", f"/v1/jobs/{out['id']}/plan?revision={running['best']['revision']}")
    assert plan["cost"] == pytest.approx(running["best"]["cost"])
    assert stack.events(f"/v1/jobs/{out['id']}/events?plans=0")[-1][2]["status"] == "lost"
