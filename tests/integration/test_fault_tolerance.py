"""Fault tolerance against real processes: a killed worker, a restarted Redis, tenants kept apart.

Each test runs its own redis-server (append-only persistence, a free port),
the API under gunicorn and RQ workers, so killing or restarting them touches
nothing else on the machine.
"""

from __future__ import annotations

import random
import time

import pytest
import requests

from tests.ops.harness import Stack, require_redis_server, wait_for

pytestmark = [pytest.mark.redis, pytest.mark.e2e, pytest.mark.slow]

FINAL = {"optimal", "bounded", "infeasible", "cancelled", "failed", "lost"}
# Pure Python search keeps a big floor busy for many seconds after its first plan.
ENV = {"BOUNDWISE_PURE_PYTHON": "1", "BOUNDWISE_MAX_BODY_BYTES": "4000000", "BOUNDWISE_LOG_FORMAT": "json"}


def warehouse_floor(n: int, seed: int, blocked: float) -> list[str]:
    """Return an n x n floor of shelving ('#') with open corners for the dock and the packing station."""
    rng = random.Random(seed)
    cells = [["#" if rng.random() < blocked else "." for _ in range(n)] for _ in range(n)]
    for r in range(5):
        for c in range(5):
            cells[r][n - 1 - c] = "."
            cells[n - 1 - r][c] = "."
    return ["".join(row) for row in cells]


def big_job(time_s: float, retries: int = 1) -> dict:
    n = 1000
    return {"problem": {"domain": "grid", "rows": warehouse_floor(n, 3, 0.32), "moves": 8,
                        "start": [n - 1, 0], "goals": [[0, n - 1]]},
            "search": {"weight": 3.0, "schedule": "fixed"}, "budget": {"time_s": time_s}, "retries": retries}


SMALL = {"problem": {"domain": "grid", "rows": ["....", ".##.", "...."], "moves": 4, "start": [2, 0],
                     "goals": [[0, 3]]}, "budget": {"time_s": 5}}


def _first_plan_or_end(doc: dict) -> bool:
    return (doc["status"] == "running" and doc["best"] is not None) or doc["status"] in FINAL


@pytest.fixture()
def stack(tmp_path):
    require_redis_server()
    s = Stack(tmp_path, ENV, fsync="always")  # a killed Redis must give back every write
    try:
        yield s
    finally:
        s.close()


def test_a_killed_worker_is_reported_lost_and_another_worker_runs_the_job_again(stack):
    first = stack.worker()
    r = stack.post("/v1/jobs", big_job(time_s=6.0))
    assert r.status_code == 202, r.text
    job_id = r.json()["id"]
    running = stack.wait_job(job_id, _first_plan_or_end, 60, "the first plan")
    assert running["status"] == "running", running  # ended already: the kill would come too late
    second = stack.worker()  # started only now, so the first attempt is surely the first worker's
    killed = first.kill_hard()
    killed_at = time.monotonic()
    assert len(killed) >= 2, "the worker and its work-horse"
    kept = running["best"]

    lost = stack.wait_job(job_id, lambda d: d["attempts"] and d["attempts"][0]["status"] == "lost", 10,
                          "the attempt to be reported lost")
    assert time.monotonic() - killed_at < 10.0
    assert lost["best"]["cost"] <= kept["cost"] and lost["best"]["revision"] >= kept["revision"]
    plan = stack.get(f"/v1/jobs/{job_id}/plan?revision={kept['revision']}")
    assert plan.status_code == 200 and plan.json()["cost"] == pytest.approx(kept["cost"])

    done = stack.wait_job(job_id, lambda d: d["status"] in FINAL, 60, "the second attempt to end")
    assert second.proc.poll() is None, "the second worker is still serving"
    assert [a["attempt"] for a in done["attempts"]] == [1, 2]
    assert done["attempts"][0]["status"] == "lost"
    assert done["attempts"][1]["status"] == done["status"] and done["status"] in ("bounded", "optimal")
    assert done["best"]["cost"] <= kept["cost"], "a retry never loses the plan it started from"
    # Every published revision is still readable: nothing of the lost attempt went missing.
    history = stack.get(f"/v1/jobs/{job_id}/improvements").json()
    revisions = [i["revision"] for i in history["improvements"]]
    assert revisions == list(range(1, done["best"]["revision"] + 1))
    costs = [i["cost"] for i in history["improvements"]]
    assert costs == sorted(costs, reverse=True) and len(set(costs)) == len(costs)
    metrics = requests.get(stack.api.url + "/metrics", timeout=10).text
    assert "boundwise_jobs_retried_total" in metrics


def test_no_retry_left_ends_the_job_lost_with_its_plan(stack):
    first = stack.worker()
    job_id = stack.post("/v1/jobs", big_job(time_s=20.0, retries=0)).json()["id"]
    running = stack.wait_job(job_id, _first_plan_or_end, 60, "the first plan")
    assert running["status"] == "running", running
    first.kill_hard()
    done = stack.wait_job(job_id, lambda d: d["status"] in FINAL, 10, "the job to be reported lost")
    assert done["status"] == "lost" and [a["status"] for a in done["attempts"]] == ["lost"]
    assert done["best"]["cost"] <= running["best"]["cost"]
    assert stack.get(f"/v1/jobs/{job_id}/plan").status_code == 200


def _answers_while_down(stack, job_id: str) -> list[requests.Response]:
    return [
        stack.get(f"/v1/jobs/{job_id}"),
        stack.get(f"/v1/jobs/{job_id}/plan"),
        stack.post("/v1/jobs", SMALL),
        requests.delete(f"{stack.api.url}/v1/jobs/{job_id}", headers=stack.headers(), timeout=30),
        requests.get(stack.api.url + "/readyz", timeout=30),
    ]


def test_redis_restart_keeps_jobs_and_the_api_answers_503_until_it_is_back(stack):
    w = stack.worker()
    done_id = stack.post("/v1/jobs", SMALL).json()["id"]
    done = stack.wait_job(done_id, lambda d: d["status"] in FINAL, 30, "the first job to finish")
    w.stop()
    queued_id = stack.post("/v1/jobs", SMALL).json()["id"]
    assert stack.get(f"/v1/jobs/{queued_id}").json()["status"] == "queued"

    stack.redis.kill()
    for r in _answers_while_down(stack, done_id):
        assert r.status_code == 503, (r.request.method, r.request.url, r.status_code, r.text)
        assert int(r.headers.get("Retry-After", "0")) >= 1, (r.request.method, r.request.url)
    assert requests.get(stack.api.url + "/healthz", timeout=10).status_code == 200, "the process itself is fine"

    stack.redis.start()  # same port, same append-only file; the API is not restarted
    again = wait_for(lambda: (lambda r: r.json() if r.status_code == 200 else None)(
        stack.get(f"/v1/jobs/{done_id}")), 30, what="the API to answer again")
    assert again["status"] == done["status"] and again["best"] == done["best"]
    assert stack.get(f"/v1/jobs/{done_id}/plan").json()["cost"] == done["best"]["cost"]
    assert stack.get(f"/v1/jobs/{queued_id}").json()["status"] == "queued"
    assert requests.get(stack.api.url + "/readyz", timeout=10).json()["redis"] is True

    stack.worker()  # the queued job survived in RQ's queue too: a new worker finds it
    finished = stack.wait_job(queued_id, lambda d: d["status"] in FINAL, 30, "the queued job to run")
    assert finished["status"] == "optimal"
    assert requests.get(stack.api.url + "/readyz", timeout=10).status_code == 200


def test_one_tenant_cannot_read_cancel_or_stream_another_tenants_job(stack):
    stack.worker()
    job_id = stack.post("/v1/jobs", SMALL, tenant="dispatch").json()["id"]
    stack.wait_job(job_id, lambda d: d["status"] in FINAL, 30, tenant="dispatch")
    other = stack.headers("night-batch")
    base = f"{stack.api.url}/v1/jobs/{job_id}"
    answers = [requests.get(base, headers=other, timeout=10),
               requests.get(base + "/plan", headers=other, timeout=10),
               requests.get(base + "/improvements", headers=other, timeout=10),
               requests.get(base + "/events", headers=other, timeout=10),
               requests.delete(base, headers=other, timeout=10)]
    assert [a.status_code for a in answers] == [404] * 5
    missing = requests.get(f"{stack.api.url}/v1/jobs/{'x' * 22}", headers=other, timeout=10)
    assert answers[0].json() == missing.json(), "another tenant's job looks exactly like no job"
    assert stack.get(f"/v1/jobs/{job_id}", tenant="dispatch").status_code == 200
    assert requests.get(base, timeout=10).status_code == 401
