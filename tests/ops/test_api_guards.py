"""The real app with its guards on: keys, tenant isolation, rate and size caps, request ids, metrics."""

from __future__ import annotations

import fakeredis
import pytest

from service.app import create_app
from service.auth import KeyStore
from service.config import load

GRID = {"domain": "grid", "rows": ["....", ".##.", "...."], "moves": 4, "start": [2, 0], "goals": [[0, 3]]}
ENV = {"BOUNDWISE_LOG_FORMAT": "text", "BOUNDWISE_RATE_LIMIT_SUBMIT": "5/minute",
       "BOUNDWISE_RATE_LIMIT_READ": "1000/minute", "BOUNDWISE_MAX_RUNNING_JOBS": "3",
       "BOUNDWISE_MAX_SIZES": '{"cells": 100}', "BOUNDWISE_MAX_TIME_S": "30"}


@pytest.fixture()
def redis():
    return fakeredis.FakeRedis(server=fakeredis.FakeServer())


@pytest.fixture()
def app(redis):
    return create_app(load(ENV), redis=redis)


def _h(redis, tenant: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {KeyStore(redis).create(tenant)[1]}"}


def test_auth_is_on_by_default_and_every_job_route_needs_a_key(app, redis):
    client = app.test_client()
    job_id = client.post("/v1/jobs", json={"problem": GRID}, headers=_h(redis, "dispatch")).get_json()["id"]
    for method, path in [("post", "/v1/jobs"), ("get", f"/v1/jobs/{job_id}"), ("get", f"/v1/jobs/{job_id}/plan"),
                         ("get", f"/v1/jobs/{job_id}/events"), ("delete", f"/v1/jobs/{job_id}"),
                         ("get", "/v1/domains")]:
        r = getattr(client, method)(path, json={"problem": GRID} if method == "post" else None)
        assert r.status_code == 401, (method, path)
        assert r.headers["WWW-Authenticate"].startswith("Bearer")
    assert client.get("/healthz").status_code == 200
    assert client.get("/metrics").status_code == 200


def test_another_tenants_job_is_not_found_for_every_route(app, redis):
    client = app.test_client()
    owner, other = _h(redis, "dispatch"), _h(redis, "night-batch")
    job_id = client.post("/v1/jobs", json={"problem": GRID}, headers=owner).get_json()["id"]
    for method, path in [("get", ""), ("get", "/plan"), ("get", "/improvements"), ("get", "/events"),
                         ("delete", "")]:
        r = getattr(client, method)(f"/v1/jobs/{job_id}{path}", headers=other)
        assert r.status_code == 404, (method, path, r.status_code)
        assert r.get_json()["error"]["code"] == "job_not_found"
    assert client.get(f"/v1/jobs/{job_id}", headers=owner).get_json()["status"] == "queued", "not cancelled"
    # the same key answers the same for another tenant's id and for an id never issued
    never = client.get("/v1/jobs/" + "A" * 22, headers=other)
    assert never.status_code == 404 and never.get_json() == client.get(f"/v1/jobs/{job_id}", headers=other).get_json()


def test_submits_over_the_rate_get_429_with_retry_after(app, redis):
    client = app.test_client()
    h = _h(redis, "dispatch")
    codes = [client.post("/v1/jobs", json={"problem": GRID, "budget": {"time_s": 1}}, headers=h).status_code
             for _ in range(6)]
    # 3 fit under the running-jobs cap, the next 2 are refused by it, the 6th by the rate
    assert codes[:3] == [202] * 3 and codes[3:5] == [422, 422] and codes[5] == 429
    r = client.post("/v1/jobs", json={"problem": GRID}, headers=h)
    assert r.status_code == 429 and int(r.headers["Retry-After"]) >= 1
    assert r.get_json()["error"]["cap"] == "rate_limit_submit"
    assert client.post("/v1/jobs", json={"problem": GRID}, headers=_h(redis, "other")).status_code == 202


def test_running_jobs_cap_names_itself(app, redis):
    client = app.test_client()
    h = _h(redis, "dispatch")
    for _ in range(3):
        assert client.post("/v1/jobs", json={"problem": GRID}, headers=h).status_code == 202
    r = client.post("/v1/jobs", json={"problem": GRID}, headers=h)
    err = r.get_json()["error"]
    assert r.status_code == 422 and err["cap"] == "max_running_jobs" and err["limit"] == 3
    assert "max_running_jobs=3" in err["message"]


@pytest.mark.parametrize(("body", "field", "cap", "limit"), [
    ({"problem": {**GRID, "rows": ["." * 11] * 10, "start": [0, 0], "goals": [[9, 10]]}}, "problem", "max_cells", 100),
    ({"problem": GRID, "budget": {"time_s": 31}}, "budget.time_s", "max_time_s", 30.0),
])
def test_size_and_budget_caps_name_the_cap_and_value(app, redis, body, field, cap, limit):
    r = app.test_client().post("/v1/jobs", json=body, headers=_h(redis, "dispatch"))
    err = r.get_json()["error"]
    assert r.status_code == 422 and err["field"] == field and err["cap"] == cap and err["limit"] == limit


def test_request_id_is_echoed_on_success_and_on_refusal(app, redis):
    client = app.test_client()
    assert client.get("/v1/domains", headers={"X-Request-ID": "abc-1"}).headers["X-Request-ID"] == "abc-1"
    r = client.get("/v1/domains", headers={**_h(redis, "t"), "X-Request-ID": "abc-2"})
    assert r.status_code == 200 and r.headers["X-Request-ID"] == "abc-2"


def test_job_ids_are_random_and_never_reach_a_key_unchecked(app, redis):
    client = app.test_client()
    h = _h(redis, "dispatch")
    ids = {client.post("/v1/jobs", json={"problem": GRID}, headers=h).get_json()["id"] for _ in range(3)}
    assert len(ids) == 3 and all(len(i) >= 22 for i in ids)
    before = set(redis.keys("*"))
    for bad in ["..%2F..%2Fetc", "*", "a b", "x" * 300, "{x}:state"]:
        assert client.get(f"/v1/jobs/{bad}", headers=h).status_code == 404
    assert set(redis.keys("*")) - before <= {k for k in redis.keys("boundwise:rate*")}
