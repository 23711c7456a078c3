"""Limits: rates per key with 429 + Retry-After, tenant caps, size caps; each refusal names its cap."""

from __future__ import annotations

import fakeredis
import pytest
from flask import Flask, jsonify
from marshmallow import Schema

from service import auth, limits
from service.limits import Caps, LimitSettings, RunningSlots, apply_caps
from worker.domains.base import DomainKind
from worker.engine import Budget, SearchConfig
from worker.exceptions import LimitError
from worker.request import JobRequest


def _job(budget: Budget, sizes: dict[str, int], document: dict | None = None) -> JobRequest:
    kind = DomainKind(name="toy", summary="", schema=Schema, build=lambda p: None,
                      validate=lambda p, s: 0.0, sizes=lambda p: sizes)
    return JobRequest(document=document or {"problem": {}}, kind=kind, problem={}, space=None,
                      search=SearchConfig(), budget=budget, deadline=None, queue="default", retries=1)


CAPS = Caps(max_running_jobs=2, max_time_s=30.0, max_expansions=1000, max_states=500,
            sizes={"cells": 100, "nodes": 10})


def test_missing_budgets_get_the_caps():
    job = apply_caps(_job(Budget(target_bound=1.5), {"cells": 100}), CAPS)
    assert job.budget == Budget(time_s=30.0, expansions=1000, max_states=500, target_bound=1.5)


def test_budgets_within_the_caps_are_kept():
    b = Budget(time_s=2.0, expansions=10, max_states=20)
    assert apply_caps(_job(b, {}), CAPS).budget == b


@pytest.mark.parametrize(("budget", "field", "cap", "value"), [
    (Budget(time_s=31.0), "budget.time_s", "max_time_s", 30.0),
    (Budget(expansions=1001), "budget.expansions", "max_expansions", 1000),
    (Budget(max_states=501), "budget.max_states", "max_states", 500),
])
def test_budgets_over_a_cap_are_refused_naming_it(budget, field, cap, value):
    doc = {"problem": {}, "budget": {"time_s": 31.0}} if field == "budget.time_s" else None
    with pytest.raises(LimitError) as info:
        apply_caps(_job(budget, {}, doc), CAPS)
    err = info.value.to_dict()
    assert err["field"] == field and err["cap"] == cap and err["limit"] == value
    assert f"{cap}={value}" in err["message"]


def test_a_far_deadline_is_named_as_the_deadline():
    with pytest.raises(LimitError) as info:
        apply_caps(_job(Budget(time_s=3600.0), {}, {"problem": {}, "budget": {"deadline": "x"}}), CAPS)
    assert info.value.field == "budget.deadline"


def test_sizes_over_their_caps_are_refused():
    with pytest.raises(LimitError) as info:
        apply_caps(_job(Budget(), {"cells": 101, "nodes": 3}), CAPS)
    assert info.value.extra == {"cap": "max_cells", "limit": 100}
    assert "cells 101" in info.value.message
    # a size no cap names is not refused
    assert apply_caps(_job(Budget(), {"widgets": 10**9}), CAPS).budget.time_s == 30.0


def test_settings_from_env_with_tenant_overrides():
    s = LimitSettings.from_env({
        "BOUNDWISE_RATE_LIMIT_SUBMIT": "5/second", "BOUNDWISE_MAX_TIME_S": "12.5",
        "BOUNDWISE_MAX_SIZES": '{"cells": 64}',
        "BOUNDWISE_TENANT_CAPS": '{"night-batch": {"max_time_s": 600, "sizes": {"tasks": 100}}}',
    })
    assert s.submit_rate == "5/second" and s.caps.max_time_s == 12.5
    assert s.caps.sizes["cells"] == 64 and s.caps.sizes["nodes"] == limits.DEFAULT_SIZE_CAPS["nodes"]
    night = s.caps_for("night-batch")
    assert night.max_time_s == 600 and night.sizes["tasks"] == 100 and night.sizes["cells"] == 64
    assert s.caps_for("anyone") is s.caps


@pytest.mark.parametrize(("env", "named"), [
    ({"BOUNDWISE_MAX_TIME_S": "soon"}, "BOUNDWISE_MAX_TIME_S"),
    ({"BOUNDWISE_MAX_RUNNING_JOBS": "-1"}, "BOUNDWISE_MAX_RUNNING_JOBS"),
    ({"BOUNDWISE_MAX_SIZES": "[1]"}, "BOUNDWISE_MAX_SIZES"),
    ({"BOUNDWISE_TENANT_CAPS": '{"t": {"max_speed": 1}}'}, "BOUNDWISE_TENANT_CAPS.t"),
])
def test_bad_settings_name_the_variable(env, named):
    with pytest.raises(ValueError, match=named.replace(".", r"\.")):
        LimitSettings.from_env(env)


def test_running_slots_cap_and_free_lazily():
    slots = RunningSlots(fakeredis.FakeRedis())
    live = {"j1", "j2"}
    slots.admit("alpha", "j1", 2, live.__contains__, 10)
    slots.admit("alpha", "j2", 2, live.__contains__, 10)
    slots.admit("beta", "j9", 2, live.__contains__, 10)  # another tenant has its own count
    with pytest.raises(LimitError) as info:
        slots.admit("alpha", "j3", 2, live.__contains__, 10)
    assert info.value.extra == {"cap": "max_running_jobs", "limit": 2}
    live.discard("j1")  # j1 finished: its slot frees at the next admit
    slots.admit("alpha", "j3", 2, lambda j: j in live or j == "j3", 10)
    assert sorted(slots.active("alpha", lambda j: True)) == ["j2", "j3"]
    slots.release("alpha", "j2")
    assert slots.active("alpha", lambda j: True) == ["j3"]


def _app(settings: LimitSettings) -> tuple[Flask, auth.KeyStore]:
    store = auth.KeyStore(fakeredis.FakeRedis())
    app = Flask("t")
    auth.init_app(app, lambda: store)
    limits.init_app(app, settings, "memory://")

    @app.post("/v1/jobs")
    def submit():
        return jsonify(ok=True), 202

    @app.get("/v1/jobs/<job_id>")
    def read(job_id):
        return jsonify(id=job_id)

    @app.get("/healthz")
    def health():
        return "ok"

    return app, store


def test_submits_over_the_rate_get_429_with_retry_after():
    app, store = _app(LimitSettings(submit_rate="3/minute", read_rate="5/minute"))
    _, key_a = store.create("alpha")
    _, key_b = store.create("beta")
    client = app.test_client()
    a = {"Authorization": f"Bearer {key_a}"}
    assert [client.post("/v1/jobs", json={}, headers=a).status_code for _ in range(3)] == [202] * 3
    r = client.post("/v1/jobs", json={}, headers=a)
    assert r.status_code == 429
    assert 1 <= int(r.headers["Retry-After"]) <= 60
    body = r.get_json()["error"]
    assert body["code"] == "rate_limited" and body["cap"] == "rate_limit_submit" and "3 per 1 minute" in body["limit"]
    # reads have their own bucket, and another key its own submits
    assert client.get("/v1/jobs/x", headers=a).status_code == 200
    assert client.post("/v1/jobs", json={}, headers={"Authorization": f"Bearer {key_b}"}).status_code == 202
    for _ in range(10):
        assert client.get("/healthz").status_code == 200


def test_reads_over_the_rate_get_429():
    app, store = _app(LimitSettings(read_rate="2/minute"))
    _, key = store.create("alpha")
    client = app.test_client()
    h = {"Authorization": f"Bearer {key}"}
    codes = [client.get("/v1/jobs/x", headers=h).status_code for _ in range(3)]
    assert codes == [200, 200, 429]


def test_body_over_the_cap_gets_413_naming_it():
    app, store = _app(LimitSettings(max_body_bytes=1000))
    _, key = store.create("alpha")
    r = app.test_client().post("/v1/jobs", data=b"{" + b" " * 2000 + b"}", content_type="application/json",
                               headers={"Authorization": f"Bearer {key}"})
    assert r.status_code == 413
    err = r.get_json()["error"]
    assert err["cap"] == "max_body_bytes" and err["limit"] == 1000


def test_rate_limits_can_be_switched_off():
    app, store = _app(LimitSettings(submit_rate="1/minute", rate_limits_enabled=False))
    _, key = store.create("alpha")
    h = {"Authorization": f"Bearer {key}"}
    assert {app.test_client().post("/v1/jobs", json={}, headers=h).status_code for _ in range(5)} == {202}


def test_every_size_a_built_in_domain_reports_has_a_cap():
    from worker.domains import kinds, load_problem

    checked = 0
    for name, kind in sorted(kinds().items()):
        if kind.example is None:
            continue
        _, problem = load_problem(dict(kind.example))
        sizes = kind.sizes(problem)
        assert sizes, f"{name} reports no size, so nothing caps its problems"
        assert set(sizes) <= set(limits.DEFAULT_SIZE_CAPS), (name, sorted(sizes))
        checked += 1
    assert checked >= 4


def test_settings_from_an_empty_environment_are_the_declared_defaults():
    from service.limits import Caps, LimitSettings

    settings = LimitSettings.from_env({})
    assert settings == LimitSettings(caps=settings.caps)
    assert (settings.caps.max_running_jobs, settings.caps.max_time_s) == (Caps().max_running_jobs, Caps().max_time_s)
    assert isinstance(settings.max_body_bytes, int) and settings.submit_rate == "60/minute"
