"""Bad input gets a clear JSON error naming the field and the reason, never a 5xx."""

from __future__ import annotations

import io
import json

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.app import create_app
from tests.service.conftest import grid_problem


def _error(response, status: int) -> dict:
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.is_json
    body = response.get_json()
    assert set(body) == {"error"} and body["error"]["code"] and body["error"]["message"]
    return body["error"]


def test_malformed_json_is_400(client):
    err = _error(client.post("/v1/jobs", data='{"problem": ', content_type="application/json"), 400)
    assert err["code"] == "malformed_json" and "line 1" in err["message"]


@pytest.mark.parametrize("body", ["", "   ", '{"a": NaN}', '{"a": Infinity}', "[" * 20000],
                         ids=["empty", "blank", "nan", "infinity", "deep"])
def test_empty_non_standard_or_absurdly_nested_json_is_400(client, body):
    assert _error(client.post("/v1/jobs", data=body, content_type="application/json"), 400)["code"] == \
        "malformed_json"


def test_invalid_utf8_is_400(client):
    err = _error(client.post("/v1/jobs", data=b'{"problem": "\xff"}', content_type="application/json"), 400)
    assert "UTF-8" in err["message"]


@pytest.mark.parametrize(("content_type", "data"), [
    ("text/plain", "{}"),
    ("application/x-www-form-urlencoded", "problem=1"),
    (None, "{}"),
    ("application/json; charset=latin-1", "{}"),
])
def test_a_body_not_declared_as_json_is_415(client, content_type, data):
    headers = {"Content-Type": content_type} if content_type else {}
    err = _error(client.post("/v1/jobs", data=data, headers=headers), 415)
    assert err["field"] == "Content-Type"


@pytest.mark.parametrize(("document", "field", "code"), [
    ({"problem": grid_problem(), "budget": {"expansions": "many"}}, "budget.expansions", "invalid_request"),
    ({"problem": grid_problem(), "budget": {"expansions": 2.5}}, "budget.expansions", "invalid_request"),
    ({"problem": grid_problem(), "search": {"weight": True}}, "search.weight", "invalid_request"),
    ({"problem": grid_problem(), "search": {"weight": 0.5}}, "search.weight", "invalid_request"),
    ({"problem": grid_problem(), "queue": "urgent"}, "queue", "invalid_request"),
    ({"problem": grid_problem(), "colour": "blue"}, "colour", "invalid_request"),
    ({"problem": {**grid_problem(), "colour": "blue"}}, "problem.colour", "invalid_problem"),
    ({"problem": {"domain": "crane-yard"}}, "problem.domain", "unknown_domain"),
    ({"problem": grid_problem(start=(1, 1))}, "problem.start", "invalid_problem"),
    ({"problem": grid_problem(start=(99, 0))}, "problem.start", "invalid_problem"),
    ({"problem": {**grid_problem(), "start": "A1"}}, "problem.start", "invalid_problem"),
    ({"budget": {}}, "problem", "invalid_request"),
    ({"problem": grid_problem(), "budget": {"deadline": "2001-01-01T00:00:00Z"}}, "budget.deadline",
     "invalid_request"),
    ([1, 2, 3], "", "invalid_request"),
])
def test_invalid_requests_are_422_naming_the_field(client, document, field, code):
    err = _error(client.post("/v1/jobs", json=document), 422)
    assert err["field"] == field and err["code"] == code


def test_an_unsolvable_puzzle_is_refused_before_it_is_queued(client, redis):
    # source: Johnson & Story 1879: swapping two tiles of a solvable 3x3 board makes it unsolvable
    tiles = [1, 0, 2, 3, 4, 5, 6, 8, 7]
    err = _error(client.post("/v1/jobs", json={"problem": {"domain": "sliding-tile", "tiles": tiles}}), 422)
    assert err["field"].startswith("problem.") and err["code"] == "invalid_problem"
    assert redis.llen("rq:queue:default") == 0


@pytest.mark.parametrize(("budget", "field", "cap"), [
    ({"time_s": 61}, "budget.time_s", "max_time_s"),
    ({"expansions": 5_000_001}, "budget.expansions", "max_expansions"),
    ({"max_states": 2_000_001}, "budget.max_states", "max_states"),
])
def test_a_budget_over_a_cap_is_422_naming_the_cap(client, budget, field, cap):
    err = _error(client.post("/v1/jobs", json={"problem": grid_problem(), "budget": budget}), 422)
    assert err["field"] == field and err["cap"] == cap and err["code"] == "over_limit"
    assert f"{cap}=" in err["message"]


def test_a_body_over_the_limit_is_413(client):
    body = json.dumps({"problem": grid_problem(), "pad": "x" * 70000})
    err = _error(client.post("/v1/jobs", data=body, content_type="application/json"), 413)
    assert err["cap"] == "max_body_bytes" and err["limit"] == 65536


def _chunked(app, body: bytes):
    # A chunked upload reaches the app with no CONTENT_LENGTH and a stream the
    # server terminates itself, which it says with wsgi.input_terminated.
    environ = {
        "REQUEST_METHOD": "POST", "PATH_INFO": "/v1/jobs", "SERVER_NAME": "localhost", "SERVER_PORT": "80",
        "SERVER_PROTOCOL": "HTTP/1.1", "wsgi.url_scheme": "http", "wsgi.input": io.BytesIO(body),
        "wsgi.errors": io.StringIO(), "wsgi.multithread": True, "wsgi.multiprocess": False,
        "wsgi.run_once": False, "wsgi.version": (1, 0), "wsgi.input_terminated": True,
        "CONTENT_TYPE": "application/json", "HTTP_TRANSFER_ENCODING": "chunked", "REMOTE_ADDR": "127.0.0.1",
    }
    status: list[str] = []
    chunks = app.wsgi_app(environ, lambda s, h, exc=None: status.append(s))
    return int(status[0].split()[0]), json.loads(b"".join(chunks))


def test_a_chunked_body_over_the_limit_is_413_not_cut(app):
    body = json.dumps({"problem": grid_problem(), "pad": "x" * 70000}).encode()
    status, payload = _chunked(app, body)
    assert status == 413 and payload["error"]["cap"] == "max_body_bytes"


def test_a_chunked_body_under_the_limit_is_read_whole(app):
    status, payload = _chunked(app, json.dumps({"problem": grid_problem()}).encode())
    assert status == 202 and payload["status"] == "queued"


@pytest.mark.parametrize("path", ["/v1/jobs/AAAAAAAAAAAAAAAAAAAAAA", "/v1/jobs/not-an-id!",
                                  "/v1/jobs/AAAAAAAAAAAAAAAAAAAAAA/plan", "/v1/jobs/x/events",
                                  "/v1/jobs/AAAAAAAAAAAAAAAAAAAAAA/improvements", "/v1/nothing"])
def test_unknown_jobs_and_routes_are_404(client, path):
    assert _error(client.get(path), 404)["code"] in ("job_not_found", "not_found")


def test_a_wrong_method_is_405_with_allow(client):
    response = client.put("/v1/jobs")
    assert _error(response, 405)["code"] == "method_not_allowed"
    assert "POST" in response.headers["Allow"]


@pytest.mark.parametrize("query", ["wait=31", "wait=-1", "wait=soon", "wait=nan", "after=-1", "after=x"])
def test_bad_long_poll_parameters_are_400(client, submit, query):
    job = submit({"problem": grid_problem()})
    err = _error(client.get(f"{job['links']['self']}?{query}"), 400)
    assert err["field"] == query.split("=")[0]


def test_bad_stream_positions_and_revisions_are_400(client, submit):
    job = submit({"problem": grid_problem()})
    assert _error(client.get(job["links"]["events"], headers={"Last-Event-ID": "yesterday"}), 400)["field"] == \
        "Last-Event-ID"
    assert _error(client.get(f"{job['links']['plan']}?revision=0"), 400)["field"] == "revision"
    assert _error(client.get(job["links"]["plan"]), 404)["code"] == "plan_not_found"


def test_a_bad_idempotency_key_is_400(client):
    response = client.post("/v1/jobs", json={"problem": grid_problem()}, headers={"Idempotency-Key": "a b"})
    assert _error(response, 400)["field"] == "Idempotency-Key"


def test_redis_down_is_503_with_retry_after(config):
    from service.app import connect

    app = create_app(config, redis=connect("redis://127.0.0.1:1/0"))
    client = app.test_client()
    for response in (client.post("/v1/jobs", json={"problem": grid_problem()}),
                     client.get("/v1/jobs/AAAAAAAAAAAAAAAAAAAAAA")):
        assert _error(response, 503)["code"] == "unavailable"
        assert response.headers["Retry-After"]
    ready = client.get("/readyz")
    assert ready.status_code == 503 and ready.get_json()["redis"] is False
    from worker.engine import kernels

    assert ready.get_json()["search_backend"] == kernels.BACKEND


_json = st.recursive(st.none() | st.booleans() | st.integers() | st.floats(allow_nan=False) | st.text(max_size=8),
                     lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=8), inner,
                                                                                  max_size=4), max_leaves=12)
_fields = st.sampled_from(["problem", "search", "budget", "queue", "retries", "domain", "rows", "start",
                           "goals", "weight", "time_s", "expansions", "tiles"])


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(document=st.one_of(_json, st.dictionaries(_fields, _json, max_size=4),
                          st.builds(lambda extra: {"problem": {**grid_problem(), **extra}},
                                    st.dictionaries(_fields, _json, max_size=2))))
def test_no_document_a_client_can_send_gets_a_5xx(client, document):
    response = client.post("/v1/jobs", data=json.dumps(document), content_type="application/json")
    assert response.status_code in (202, 400, 413, 422)
    if response.status_code != 202:
        assert response.get_json()["error"]["message"]
