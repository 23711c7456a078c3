"""Logs: one JSON object per line with request_id and job_id; X-Request-ID passed through or made."""

from __future__ import annotations

import io
import json
import logging

import fakeredis
import pytest
from flask import Flask, jsonify
from rq import Queue, SimpleWorker

from service import logs

log = logging.getLogger("boundwise.test.logs")


@pytest.fixture()
def captured():
    stream = io.StringIO()
    root = logging.getLogger()
    saved = (list(root.handlers), root.level)
    logs.configure("INFO", stream=stream)
    yield stream
    for h in list(root.handlers):
        root.removeHandler(h)
    for h in saved[0]:
        root.addHandler(h)
    root.setLevel(saved[1])


def _lines(stream: io.StringIO) -> list[dict]:
    return [json.loads(line) for line in stream.getvalue().splitlines() if line.strip()]


def _app() -> Flask:
    app = Flask("t")
    logs.init_app(app)

    @app.get("/v1/jobs/<job_id>")
    def read(job_id):
        log.info("reading job", extra={"step": "read"})
        return jsonify(id=job_id)

    @app.post("/v1/jobs")
    def submit():
        logs.bind_job("job-made-here")
        log.info("queued")
        return jsonify(ok=True), 202

    return app


def test_request_id_is_passed_through_and_on_every_line(captured):
    r = _app().test_client().get("/v1/jobs/abc123", headers={"X-Request-ID": "req-42.a"})
    assert r.headers["X-Request-ID"] == "req-42.a"
    lines = _lines(captured)
    assert {line["request_id"] for line in lines} == {"req-42.a"}
    view = next(line for line in lines if line["message"] == "reading job")
    assert view["job_id"] == "abc123" and view["step"] == "read" and view["level"] == "info"
    access = next(line for line in lines if line["logger"] == "boundwise.access")
    assert access["status"] == 200 and access["path"] == "/v1/jobs/abc123" and access["duration_ms"] >= 0


@pytest.mark.parametrize("given", ["", "has space", "x" * 129, "a;b=c", "ünï"])
def test_unsafe_or_missing_request_ids_are_replaced(captured, given):
    r = _app().test_client().get("/v1/jobs/j", headers={"X-Request-ID": given} if given else {})
    rid = r.headers["X-Request-ID"]
    assert rid != given and len(rid) == 32 and int(rid, 16) >= 0
    assert all(line["request_id"] == rid for line in _lines(captured))


def test_views_bind_the_job_they_make(captured):
    _app().test_client().post("/v1/jobs", json={})
    queued = next(line for line in _lines(captured) if line["message"] == "queued")
    assert queued["job_id"] == "job-made-here"


def test_ids_do_not_leak_between_requests(captured):
    app = _app()
    app.test_client().get("/v1/jobs/first", headers={"X-Request-ID": "one"})
    assert logs.request_id() is None and logs.job_id() is None
    log.info("outside")
    outside = _lines(captured)[-1]
    assert outside["request_id"] is None and outside["job_id"] is None


def test_exceptions_are_one_json_line(captured):
    try:
        raise ValueError("bad thing")
    except ValueError:
        log.exception("failed")
    line = _lines(captured)[-1]
    assert "ValueError: bad thing" in line["exception"] and line["level"] == "error"


def logged_task():
    logging.getLogger("boundwise.test.task").warning("inside the job")
    return 1


def test_lines_inside_an_rq_job_carry_its_ids(captured):
    redis = fakeredis.FakeRedis()
    job = Queue("default", connection=redis).enqueue(logged_task, meta={"request_id": "from-submit"})
    SimpleWorker(["default"], connection=redis).work(burst=True)
    inside = next(line for line in _lines(captured) if line["message"] == "inside the job")
    assert inside["job_id"] == job.id and inside["request_id"] == "from-submit"


def test_plain_text_format_for_a_terminal(captured):
    stream = io.StringIO()
    logs.configure("WARNING", stream=stream, fmt="text")
    log.warning("plain %s", "words")
    assert stream.getvalue().rstrip().endswith("boundwise.test.logs: plain words")


@pytest.mark.redis
@pytest.mark.e2e
def test_every_line_of_the_api_and_a_worker_is_json_with_both_ids(tmp_path):
    import requests as http

    from tests.ops.harness import Stack, require_redis_server

    require_redis_server()
    stack = Stack(tmp_path, {"BOUNDWISE_LOG_FORMAT": "json"})
    try:
        stack.worker()
        body = {"problem": {"domain": "grid", "rows": ["...", "..."], "moves": 4, "start": [1, 0],
                            "goals": [[0, 2]]}}
        r = http.post(stack.api.url + "/v1/jobs", json=body, timeout=10,
                      headers={**stack.headers(), "X-Request-ID": "from-the-dispatcher"})
        job_id = r.json()["id"]
        stack.wait_job(job_id, lambda d: d["status"] == "optimal", 30)
    finally:
        stack.close()
    lines = [line for f in sorted((tmp_path / "logs").glob("*.log")) for line in f.read_text().splitlines()]
    parsed = [json.loads(line) for line in lines if line.strip()]
    assert len(parsed) == len([line for line in lines if line.strip()]), "every line is one JSON object"
    assert all("request_id" in p and "job_id" in p for p in parsed)
    mine = [p for p in parsed if p["request_id"] == "from-the-dispatcher"]
    assert any(p["logger"] == "boundwise.access" and p["status"] == 202 for p in mine)
    # the worker's lines about the job carry the job id and the id of the request that made it
    assert any(p["job_id"] == job_id and p["logger"].startswith(("worker.", "rq.")) for p in mine)
