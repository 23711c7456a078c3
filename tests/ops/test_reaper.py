"""Lost jobs: a running job without heartbeat is reported lost, kept, and queued again while retries remain."""

from __future__ import annotations

import threading

import fakeredis
import pytest
from rq import Queue

from service.app import create_app
from service.config import load
from worker.keys import job_keys
from worker.publish import Publisher
from worker.reaper import LOCK_KEY, Reaper, attempt_history

ENV = {"BOUNDWISE_AUTH": "off", "BOUNDWISE_RATE_LIMITS": "off", "BOUNDWISE_LOG_FORMAT": "text",
       "BOUNDWISE_HEARTBEAT_S": "0.2", "BOUNDWISE_LOST_AFTER_S": "1"}
GRID = {"domain": "grid", "rows": ["....", ".##.", "...."], "moves": 4, "start": [2, 0], "goals": [[0, 3]]}


@pytest.fixture()
def redis():
    return fakeredis.FakeRedis(server=fakeredis.FakeServer())


@pytest.fixture()
def client(redis):
    return create_app(load(ENV), redis=redis).test_client()


def _submit(client, retries: int) -> str:
    r = client.post("/v1/jobs", json={"problem": GRID, "budget": {"time_s": 5}, "retries": retries})
    assert r.status_code == 202, r.get_json()
    return r.get_json()["id"]


def _start_and_die(redis, job_id: str, plan_cost: float | None = None) -> None:
    """Start an attempt, publish a plan if asked, then die: no more heartbeats, the alive key gone."""
    pub = Publisher(redis, job_id)
    pub.load()
    assert pub.start().value == "running"
    pub.stop_heartbeat()
    if plan_cost is not None:
        assert pub.improvement({"cost": plan_cost, "lower_bound": 4.0, "bound": plan_cost / 4.0, "weight": 2.0,
                                "expansions": 10, "generated": 20, "reopened": 0, "stored": 20,
                                "elapsed_s": 0.01, "plan": [{"action": "E", "cost": 1.0, "state": [2, 1]}]})
    redis.delete(job_keys(job_id).alive)  # what the TTL does once the work-horse is gone


def _queued_ids(redis) -> list[str]:
    return Queue("default", connection=redis).get_job_ids()


def test_a_lost_attempt_is_retried_then_reported_lost(client, redis):
    job_id = _submit(client, retries=1)
    assert _queued_ids(redis) == [job_id]
    Queue("default", connection=redis).remove(job_id)  # a worker took it
    _start_and_die(redis, job_id, plan_cost=6.0)

    reaper = Reaper(redis)
    assert reaper.reap(job_id) == "requeued"
    assert reaper.reap(job_id) is None, "a second reaper does nothing"
    doc = client.get(f"/v1/jobs/{job_id}").get_json()
    assert doc["status"] == "queued"
    assert doc["best"]["cost"] == 6.0, "the best plan of the lost attempt is kept"
    assert client.get(f"/v1/jobs/{job_id}/plan").get_json()["cost"] == 6.0
    assert [a["status"] for a in doc["attempts"]] == ["lost"]
    assert doc["attempts"][0]["attempt"] == 1 and doc["attempts"][0]["cost"] == 6.0
    assert _queued_ids(redis) == [job_id], "queued again for another worker"

    Queue("default", connection=redis).remove(job_id)
    _start_and_die(redis, job_id)
    doc = client.get(f"/v1/jobs/{job_id}").get_json()  # the API reaps what it reads
    assert doc["status"] == "lost"
    assert [(a["attempt"], a["status"]) for a in doc["attempts"]] == [(1, "lost"), (2, "lost")]
    assert doc["best"]["cost"] == 6.0
    assert _queued_ids(redis) == [], "no retries left"
    events = redis.xrange(job_keys(job_id).events)
    assert events[-1][1][b"type"] == b"finished"


def test_no_retries_means_lost_at_once(client, redis):
    job_id = _submit(client, retries=0)
    Queue("default", connection=redis).remove(job_id)
    _start_and_die(redis, job_id)
    assert Reaper(redis).reap(job_id) == "lost"
    doc = client.get(f"/v1/jobs/{job_id}").get_json()
    assert doc["status"] == "lost" and len(doc["attempts"]) == 1


def test_a_live_or_finished_job_is_left_alone(client, redis):
    job_id = _submit(client, retries=1)
    pub = Publisher(redis, job_id)
    pub.load()
    pub.start()
    try:
        assert Reaper(redis).reap(job_id) is None  # heartbeat alive
    finally:
        pub.stop_heartbeat()
    queued = _submit(client, retries=1)
    assert Reaper(redis).reap(queued) is None
    assert Reaper(redis).reap("not a job id") is None


def test_sweep_takes_the_lock_once_per_period(redis):
    reaper = Reaper(redis)
    assert reaper.sweep("w1", lock_ms=5000) == 0
    assert redis.get(LOCK_KEY) == b"w1"
    redis.set(LOCK_KEY, "w2", px=5000)
    assert reaper.sweep("w1") == 0 and redis.get(LOCK_KEY) == b"w2"


def test_background_thread_reaps_what_it_finds(client, redis, monkeypatch):
    job_id = _submit(client, retries=0)
    Queue("default", connection=redis).remove(job_id)
    _start_and_die(redis, job_id)
    reaper = Reaper(redis)
    # RQ's started-job registry is what a real sweep reads; here the one candidate is given.
    monkeypatch.setattr(reaper, "stale", lambda: [job_id])
    stop = reaper.start(period_s=0.05, owner="t")
    try:
        for _ in range(100):
            if redis.hget(job_keys(job_id).state, "status") == b"lost":
                break
            threading.Event().wait(0.02)
    finally:
        stop.set()
    assert redis.hget(job_keys(job_id).state, "status") == b"lost"


def test_attempt_history_adds_the_current_attempt():
    lost = {"attempt": 1, "status": "lost", "started_at": "a", "ended_at": "b", "revision": 1, "cost": 9.0}
    history = attempt_history([lost], 2, "optimal", "c", "d", 2, {"cost": 7.0})
    assert history == [lost, {"attempt": 2, "status": "optimal", "started_at": "c", "ended_at": "d",
                              "revision": 2, "cost": 7.0}]
    assert attempt_history([], 0, "queued", None, None, 0, None) == []
    assert attempt_history([lost], 1, "queued", None, None, 1, None) == [lost]


def test_a_cut_off_attempt_that_comes_back_writes_nothing_over_the_retry(client, redis):
    job_id = _submit(client, retries=1)
    Queue("default", connection=redis).remove(job_id)
    zombie = Publisher(redis, job_id)
    zombie.load()
    zombie.start()
    zombie.stop_heartbeat()  # cut off from Redis: no beats, so the job is reported lost ...
    redis.delete(job_keys(job_id).alive)
    assert Reaper(redis).reap(job_id) == "requeued"
    retry = Publisher(redis, job_id)  # ... and another worker runs it again
    retry.load()
    assert retry.start().value == "running"
    retry.stop_heartbeat()
    event = {"cost": 5.0, "lower_bound": 5.0, "bound": 1.0, "weight": 1.0, "expansions": 1, "generated": 1,
             "reopened": 0, "stored": 1, "elapsed_s": 0.01, "plan": [{"action": "E", "cost": 5.0, "state": [0, 3]}]}
    assert zombie.improvement(event) is False, "the old attempt publishes nothing"
    assert zombie.cancelled(), "and is told to stop"
    assert retry.improvement(event) is True
    assert client.get(f"/v1/jobs/{job_id}").get_json()["best"]["revision"] == 1
