"""A job's life through the API: event stream, cancel, idempotent submits, lost workers, failures."""

from __future__ import annotations

import json
import threading
import time

import pytest
from rq import Queue

from tests.service import stub
from tests.service.conftest import grid_problem
from worker.jobs import run_job
from worker.keys import job_keys
from worker.publish import Publisher


def _events(client, path: str, last: str | None = None) -> list[tuple[str, str, dict]]:
    headers = {"Last-Event-ID": last} if last else {}
    response = client.get(path, headers=headers)
    assert response.status_code == 200 and response.mimetype == "text/event-stream"
    events = []
    for block in response.get_data(as_text=True).split("\n\n"):
        fields = dict(line.split(": ", 1) for line in block.splitlines() if not line.startswith(":") and ": " in line)
        if "data" in fields:
            events.append((fields["id"], fields["event"], json.loads(fields["data"])))
    return events


def test_the_event_stream_ends_with_the_final_event_and_resumes_after_an_id(client, submit, work):
    out = submit({"problem": grid_problem()})
    work()
    events = _events(client, out["links"]["events"])
    kinds = [kind for _, kind, _ in events]
    assert kinds[0] == "status" and kinds[-1] == "finished" and "improvement" in kinds
    ids = [tuple(map(int, i.split("-"))) for i, _, _ in events]
    assert ids == sorted(ids) and len(set(ids)) == len(ids)
    improvement = next(data for _, kind, data in events if kind == "improvement")
    assert improvement["plan"] and improvement["revision"] == 1
    assert events[-1][2]["status"] == "optimal"
    resumed = _events(client, out["links"]["events"], last=events[1][0])
    assert [e[0] for e in resumed] == [e[0] for e in events[2:]]
    assert _events(client, out["links"]["events"], last=events[-1][0]) == []


def test_a_cancelled_queued_job_never_runs(client, submit, work, redis):
    out = submit({"problem": grid_problem()})
    response = client.delete(out["links"]["cancel"])
    assert response.status_code == 200
    job = response.get_json()
    assert job["status"] == "cancelled" and job["stop_reason"] == "cancelled"
    assert Queue("default", connection=redis).job_ids == []
    work()
    job = client.get(out["links"]["self"]).get_json()
    assert job["status"] == "cancelled" and job["started_at"] is None and job["attempts"] == []
    assert _events(client, out["links"]["events"])[-1][2]["status"] == "cancelled"
    assert client.delete(out["links"]["cancel"]).status_code == 200  # cancelling again changes nothing


def test_a_job_taken_from_the_queue_after_its_cancel_does_not_search(client, submit, redis):
    out = submit({"problem": grid_problem()})
    client.delete(out["links"]["cancel"])
    assert run_job(out["id"], connection=redis) == "cancelled"
    assert not redis.exists(job_keys(out["id"]).plans)


def test_a_running_job_stops_soon_after_its_cancel_and_keeps_its_plan(client, submit, redis):
    with stub.registered():
        out = submit({"problem": {"domain": "endless", "width": 1}, "budget": {"time_s": 30}})
        finished: list[str] = []
        searcher = threading.Thread(target=lambda: finished.append(run_job(out["id"], connection=redis)))
        searcher.start()
        job = client.get(f"{out['links']['self']}?after=0&wait=5").get_json()
        assert job["status"] == "running" and job["best"]["cost"] == stub.DEAR
        asked = time.monotonic()
        response = client.delete(out["links"]["cancel"])
        assert response.status_code == 202
        searcher.join(5)
        stopped = time.monotonic() - asked
    assert finished == ["cancelled"]
    assert stopped < 2.0  # generous for a loaded test machine; the benchmark measures the real figure
    job = client.get(out["links"]["self"]).get_json()
    assert job["status"] == "cancelled" and job["stop_reason"] == "cancelled"
    plan = client.get(out["links"]["plan"]).get_json()
    assert plan["cost"] == stub.DEAR and plan["steps"][-1]["state"] == stub.GOAL


def test_a_time_budget_stops_a_running_job_as_bounded(client, submit, redis):
    with stub.registered():
        out = submit({"problem": {"domain": "endless", "width": 1}, "budget": {"time_s": 0.3}})
        assert run_job(out["id"], connection=redis) == "bounded"
    job = client.get(out["links"]["self"]).get_json()
    assert job["stop_reason"] == "time" and job["best"]["cost"] == stub.DEAR
    assert 0.3 <= job["used"]["time_s"] < 1.5


def test_an_idempotency_key_returns_the_same_job(client, redis):
    body = {"problem": grid_problem()}
    first = client.post("/v1/jobs", json=body, headers={"Idempotency-Key": "pick-route-0042"})
    again = client.post("/v1/jobs", json=body, headers={"Idempotency-Key": "pick-route-0042"})
    assert first.status_code == again.status_code == 202
    assert first.get_json()["id"] == again.get_json()["id"]
    assert again.headers["Idempotent-Replayed"] == "true" and "Idempotent-Replayed" not in first.headers
    assert Queue("default", connection=redis).count == 1
    other = client.post("/v1/jobs", json=body, headers={"Idempotency-Key": "pick-route-0043"})
    assert other.get_json()["id"] != first.get_json()["id"]
    changed = client.post("/v1/jobs", json={"problem": grid_problem(goal=(0, 8))},
                          headers={"Idempotency-Key": "pick-route-0042"})
    assert changed.status_code == 409 and changed.get_json()["error"]["field"] == "Idempotency-Key"


def test_idempotency_keys_of_different_callers_do_not_collide(config, redis):
    from service.app import create_app

    app = create_app(config, redis=redis)
    body = {"problem": grid_problem()}
    ids = []
    for tenant in ("dock-east", "dock-west"):
        with app.test_request_context():
            from service.queue import body_digest
            from worker.request import parse_request

            record, replayed = app.extensions["boundwise"].store.submit(
                parse_request(body), owner=tenant, digest=body_digest(body), idempotency="same-key")
            ids.append(record.id)
            assert not replayed
    assert ids[0] != ids[1]


def _start_and_die(redis, job_id: str) -> Publisher:
    pub = Publisher(redis, job_id)
    pub.load()
    assert pub.start().value == "running"
    assert pub.improvement({"cost": 17.0, "lower_bound": 12.0, "bound": 17.0 / 12.0, "weight": 3.0,
                            "expansions": 17, "generated": 39, "reopened": 0, "stored": 23, "elapsed_s": 0.01,
                            "plan": [{"action": "E", "cost": 17.0, "state": [0, 9]}]})
    pub.stop_heartbeat()  # the work-horse is gone: no more heartbeats
    return pub


def test_a_job_whose_worker_dies_is_reported_lost_with_its_plan(client, submit, redis):
    out = submit({"problem": grid_problem(), "retries": 0})
    Queue("default", connection=redis).remove(out["id"])  # a worker took it
    pub = _start_and_die(redis, out["id"])
    assert client.get(out["links"]["self"]).get_json()["status"] == "running"
    deadline = time.monotonic() + 3.0  # BOUNDWISE_LOST_AFTER_S is 1 s in the test config
    while (job := client.get(out["links"]["self"]).get_json())["status"] == "running":
        assert time.monotonic() < deadline, "the job was not reported lost"
        time.sleep(0.1)
    assert job["status"] == "lost" and job["best"]["cost"] == 17.0
    assert client.get(out["links"]["plan"]).get_json()["cost"] == 17.0
    # Lost is final: a late write of the dead attempt changes nothing.
    assert pub.progress({"cost": 17.0, "lower_bound": 16.0, "bound": 1.06, "weight": 3.0, "expansions": 99,
                         "generated": 1, "reopened": 0, "stored": 1, "elapsed_s": 0.2}) is False
    assert client.get(out["links"]["self"]).get_json()["status"] == "lost"
    assert _events(client, out["links"]["events"])[-1][2]["status"] == "lost"


def test_a_failed_search_is_reported_failed_with_its_error(client, submit, work, monkeypatch):
    import worker.jobs

    def broken(*args, **kwargs):
        raise RuntimeError("the floor plan caught fire")
        yield  # pragma: no cover

    monkeypatch.setattr(worker.jobs, "run", broken)
    out = submit({"problem": grid_problem(), "retries": 0})
    work()
    job = client.get(out["links"]["self"]).get_json()
    assert job["status"] == "failed" and "caught fire" in job["error"]["message"]
    assert job["error"]["code"] == "internal_error"


def test_a_failed_attempt_is_retried_while_retries_remain(client, submit, work, monkeypatch):
    import worker.jobs

    real = worker.jobs.run
    calls: list[int] = []

    def flaky(*args, **kwargs):
        calls.append(1)
        if len(calls) == 1:
            raise RuntimeError("a passing glitch")
        yield from real(*args, **kwargs)

    monkeypatch.setattr(worker.jobs, "run", flaky)
    out = submit({"problem": grid_problem(), "retries": 1})
    work()
    work()
    job = client.get(out["links"]["self"]).get_json()
    assert len(calls) == 2 and job["status"] == "optimal"
    assert len(job["attempts"]) == 2 and job["best"]["revision"] == 1


@pytest.mark.parametrize("status", ["optimal", "cancelled"])
def test_a_final_job_is_never_searched_again(client, submit, work, redis, status):
    out = submit({"problem": grid_problem()})
    if status == "cancelled":
        client.delete(out["links"]["cancel"])
    else:
        work()
    assert run_job(out["id"], connection=redis) == status
