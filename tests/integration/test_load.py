"""Load: 200 jobs submitted at once from a pool of clients; all finish, on time, with every plan kept."""

from __future__ import annotations

import json
import random
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from datetime import datetime

import pytest
import requests
from prometheus_client.parser import text_string_to_metric_families

from tests.ops.harness import Stack, require_redis_server, wait_for

pytestmark = [pytest.mark.redis, pytest.mark.e2e, pytest.mark.slow]

JOBS = 200
CLIENTS = 16
WORKERS = 3
FINAL = {"optimal", "bounded", "infeasible", "cancelled", "failed", "lost"}
ENV = {"BOUNDWISE_PURE_PYTHON": "1", "BOUNDWISE_LOG_LEVEL": "WARNING", "BOUNDWISE_RATE_LIMIT_SUBMIT": "100000/minute",
       "BOUNDWISE_RATE_LIMIT_READ": "100000/minute", "BOUNDWISE_MAX_RUNNING_JOBS": "1000",
       "BOUNDWISE_WEB_THREADS": "32"}


def floor(n: int, seed: int, blocked: float = 0.2) -> list[str]:
    """Return an n x n warehouse floor with open corners (dock bottom left, packing top right)."""
    rng = random.Random(seed)
    cells = [["#" if rng.random() < blocked else "." for _ in range(n)] for _ in range(n)]
    for r in range(3):
        for c in range(3):
            cells[r][n - 1 - c] = "."
            cells[n - 1 - r][c] = "."
    return ["".join(row) for row in cells]


def job(i: int) -> dict:
    """Most jobs are small and end proven; every seventh is big and ends on its time budget."""
    big = i % 7 == 0
    n = 500 if big else 24
    return {"problem": {"domain": "grid", "rows": floor(n, seed=i), "moves": 8, "start": [n - 1, 0],
                        "goals": [[0, n - 1]]},
            # A fixed weight keeps reopening on the big floors, so their proofs outlast the budget.
            "search": {"weight": 3.0, "schedule": "fixed"} if big else {"weight": 1.5},
            "budget": {"time_s": 1.0 if big else 3.0},
            "queue": "high" if i % 5 == 0 else "default"}


def _seconds(a: str, b: str) -> float:
    return (datetime.fromisoformat(b.replace("Z", "+00:00")) - datetime.fromisoformat(a.replace("Z", "+00:00"))
            ).total_seconds()


def _events(stack: Stack, job_id: str) -> list[tuple[str, dict]]:
    """Read the job's whole event stream (it ends after the final event)."""
    out = []
    with requests.get(f"{stack.api.url}/v1/jobs/{job_id}/events", headers=stack.headers(), stream=True,
                      timeout=30) as r:
        kind = None
        for line in r.iter_lines(decode_unicode=True):
            if line.startswith("event: "):
                kind = line[7:]
            elif line.startswith("data: ") and kind:
                out.append((kind, json.loads(line[6:])))
    return out


@pytest.fixture()
def stack(tmp_path):
    require_redis_server()
    prom = tmp_path / "prom"  # one multiprocess directory: the API and the workers report together
    prom.mkdir()
    s = Stack(tmp_path, {**ENV, "PROMETHEUS_MULTIPROC_DIR": str(prom)}, web_workers=2)
    try:
        for _ in range(WORKERS):
            s.worker()
        wait_for(lambda: requests.get(s.api.url + "/readyz", timeout=5).status_code == 200, 30,
                 what="the workers to register")
        yield s
    finally:
        s.close()


def test_two_hundred_jobs_at_once_all_finish_on_time_with_every_plan(stack):
    documents = [job(i) for i in range(JOBS)]
    headers = stack.headers()
    start = threading.Barrier(CLIENTS)
    local = threading.local()

    def submit(i: int) -> str:
        if not hasattr(local, "session"):
            local.session = requests.Session()
            start.wait(30)  # every client fires at the same moment
        r = local.session.post(stack.api.url + "/v1/jobs", json=documents[i], headers=headers, timeout=60)
        assert r.status_code == 202, r.text
        return r.json()["id"]

    began = time.monotonic()
    with ThreadPoolExecutor(CLIENTS) as pool:
        ids = list(pool.map(submit, range(JOBS)))
    submitted_in = time.monotonic() - began
    assert len(set(ids)) == JOBS

    def all_final():
        docs = [stack.get(f"/v1/jobs/{i}").json() for i in ids]
        return docs if all(d["status"] in FINAL for d in docs) else None

    docs = wait_for(all_final, 240, interval=1.0, what="every job to finish")
    finished_in = time.monotonic() - began
    assert {d["status"] for d in docs} <= {"optimal", "bounded", "infeasible"}, sorted({d["status"] for d in docs})
    over = []
    for i, d in enumerate(docs):
        budget = documents[i]["budget"]["time_s"]
        took = _seconds(d["started_at"], d["finished_at"])
        if took > budget * 1.1 + 0.5:
            over.append((d["id"], budget, took))
        assert len(d["attempts"]) == 1 and d["attempts"][0]["status"] == d["status"]
    assert over == [], f"jobs past their time budget by more than 0.5 s + 10%: {over}"
    assert sum(d["status"] == "bounded" for d in docs) >= 10, "the big jobs stop on their budget"

    # No published plan is lost: every revision is readable, the history has one line per
    # revision, and the event stream carries one improvement per revision before the end.
    with_plans = [d for d in docs if d["status"] != "infeasible"]
    assert len(with_plans) >= JOBS * 0.9
    for d in with_plans:
        n = d["best"]["revision"]
        history = stack.get(f"/v1/jobs/{d['id']}/improvements").json()["improvements"]
        assert [h["revision"] for h in history] == list(range(1, n + 1))
        assert history[-1]["cost"] == pytest.approx(d["best"]["cost"])
        last = stack.get(f"/v1/jobs/{d['id']}/plan?revision={n}")
        assert last.status_code == 200 and last.json()["cost"] == pytest.approx(d["best"]["cost"])
    for d in with_plans[::10]:
        events = _events(stack, d["id"])
        improvements = [e for kind, e in events if kind == "improvement"]
        assert [e["revision"] for e in improvements] == list(range(1, d["best"]["revision"] + 1))
        assert all(e["plan"] for e in improvements), "each improvement event carries its plan"
        assert events[-1][0] == "finished"
    # The metrics of every process add up: the API counted the submits, the workers the outcomes.
    samples = {}
    for family in text_string_to_metric_families(requests.get(stack.api.url + "/metrics", timeout=10).text):
        for sample in family.samples:
            samples[(sample.name, tuple(sorted(sample.labels.items())))] = sample.value
    submitted = sum(v for (name, _), v in samples.items() if name == "boundwise_jobs_submitted_total")
    finished = {dict(labels)["status"]: v for (name, labels), v in samples.items()
                if name == "boundwise_jobs_finished_total"}
    assert submitted == JOBS
    assert sum(finished.values()) == JOBS
    assert finished.get("bounded", 0) == sum(d["status"] == "bounded" for d in docs)
    assert samples[("boundwise_first_plan_seconds_count", ())] == len(with_plans)
    assert samples[("boundwise_queue_depth", (("queue", "default"),))] == 0
    print(f"\n{JOBS} jobs: submitted in {submitted_in:.2f} s, all final after {finished_in:.2f} s "
          f"with {WORKERS} workers")
