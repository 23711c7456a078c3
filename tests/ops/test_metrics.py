"""/metrics: job metrics from every process in multiprocess mode, queue depths from Redis, access rules."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
from pathlib import Path

import fakeredis
import pytest
from flask import Flask
from prometheus_client.parser import text_string_to_metric_families
from rq import Queue

from service import metrics
from worker import metrics as wm

ROOT = Path(__file__).resolve().parents[2]


def _samples(text: str) -> dict[tuple[str, tuple], float]:
    out = {}
    for family in text_string_to_metric_families(text):
        for s in family.samples:
            out[(s.name, tuple(sorted(s.labels.items())))] = s.value
    return out


def _app(redis, **config) -> Flask:
    app = Flask("t")
    app.config.update(config)
    metrics.init_app(app, lambda: redis, lambda: ["high", "default"])

    @app.get("/v1/ping")
    def ping():
        return "pong"

    return app


def test_metrics_report_queue_depth_and_job_outcomes():
    redis = fakeredis.FakeRedis()
    q = Queue("default", connection=redis)
    for _ in range(3):
        q.enqueue("builtins.len", [1])
    before = _samples(_app(redis).test_client().get("/metrics").get_data(as_text=True))
    wm.record_finished("succeeded", 2.0, 5000, 1.25)
    wm.record_first_plan(0.3)
    wm.record_lost(final=True)
    app = _app(redis)
    client = app.test_client()
    assert client.get("/v1/ping").status_code == 200
    r = client.get("/metrics")
    assert r.status_code == 200 and r.headers["Content-Type"].startswith("text/plain")
    after = _samples(r.get_data(as_text=True))
    assert after[("boundwise_queue_depth", (("queue", "default"),))] == 3
    assert after[("boundwise_queue_depth", (("queue", "high"),))] == 0
    assert after[("boundwise_redis_up", ())] == 1

    def grew(name, labels=(), by=1.0):
        return after[(name, labels)] - before.get((name, labels), 0.0) == pytest.approx(by)

    assert grew("boundwise_jobs_finished_total", (("status", "succeeded"),))
    assert grew("boundwise_jobs_finished_total", (("status", "lost"),))
    assert grew("boundwise_jobs_lost_total")
    assert grew("boundwise_first_plan_seconds_count")
    assert grew("boundwise_expansions_per_second_sum", by=2500.0)
    assert grew("boundwise_final_bound_sum", by=1.25)
    assert after[("boundwise_http_requests_total", (("method", "GET"), ("status", "200")))] >= 1


def test_a_retried_lost_job_is_not_a_final_status():
    before = wm.JOBS_FINISHED.labels(status="lost")._value.get()
    lost = wm.JOBS_LOST._value.get()
    wm.record_lost(final=False)
    assert wm.JOBS_FINISHED.labels(status="lost")._value.get() == before
    assert wm.JOBS_LOST._value.get() == lost + 1


def test_metrics_survive_redis_down():
    import redis as redis_lib

    down = redis_lib.Redis(host="127.0.0.1", port=1, socket_connect_timeout=0.2, retry=None)
    r = _app(down).test_client().get("/metrics")
    assert r.status_code == 200
    assert _samples(r.get_data(as_text=True))[("boundwise_redis_up", ())] == 0


def test_metrics_token_and_networks_restrict_access():
    redis = fakeredis.FakeRedis()
    client = _app(redis, METRICS_TOKEN="s3cret").test_client()
    assert client.get("/metrics").status_code == 404
    assert client.get("/metrics", headers={"Authorization": "Bearer nope"}).status_code == 404
    assert client.get("/metrics", headers={"Authorization": "Bearer s3cret"}).status_code == 200
    client = _app(redis, METRICS_ALLOW="10.0.0.0/8").test_client()
    assert client.get("/metrics").status_code == 404  # the test client comes from 127.0.0.1
    assert client.get("/metrics", environ_base={"REMOTE_ADDR": "10.1.2.3"}).status_code == 200
    assert _app(redis, METRICS_ENABLED=False).test_client().get("/metrics").status_code == 404


def test_bad_network_setting_is_named():
    with pytest.raises(ValueError, match="METRICS_ALLOW"):
        metrics.parse_networks("10.0.0.0/8, not-a-net")


SCRIPT = textwrap.dedent("""
    import multiprocessing, sys
    from flask import Flask

    def work(n):
        from worker import metrics as wm
        for _ in range(n):
            wm.record_finished("succeeded", 1.0, 100, 1.0)
        wm.record_lost(final=True)

    if __name__ == "__main__":
        ctx = multiprocessing.get_context("spawn")
        procs = [ctx.Process(target=work, args=(n,)) for n in (2, 3)]
        for p in procs: p.start()
        for p in procs: p.join()
        import fakeredis
        from service import metrics
        app = Flask("scrape")
        metrics.init_app(app, lambda: fakeredis.FakeRedis(), lambda: ["default"])
        sys.stdout.write(app.test_client().get("/metrics").get_data(as_text=True))
""")


def test_multiprocess_mode_adds_up_every_process(tmp_path):
    script = tmp_path / "scrape.py"
    script.write_text(SCRIPT)
    env = dict(os.environ, PROMETHEUS_MULTIPROC_DIR=str(tmp_path / "prom"), PYTHONPATH=str(ROOT))
    (tmp_path / "prom").mkdir()
    out = subprocess.run([sys.executable, str(script)], env=env, capture_output=True, text=True, timeout=60)
    assert out.returncode == 0, out.stderr
    s = _samples(out.stdout)
    assert s[("boundwise_jobs_finished_total", (("status", "succeeded"),))] == 5
    assert s[("boundwise_jobs_lost_total", ())] == 2
    assert s[("boundwise_job_seconds_count", ())] == 5
    assert len(list((tmp_path / "prom").glob("*.db"))) >= 2
