"""The OpenAPI document: valid OpenAPI 3.1, the same routes as the app, and true of real responses."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
import yaml
from jsonschema import Draft202012Validator
from openapi_spec_validator import validate as validate_spec
from referencing import Registry, Resource
from referencing.jsonschema import DRAFT202012

from tests.service import stub
from tests.service.conftest import grid_problem

DOC_PATH = Path(__file__).resolve().parents[2] / "openapi" / "openapi.yaml"
METHODS = {"get", "post", "put", "patch", "delete"}


@pytest.fixture(scope="module")
def doc() -> dict:
    return yaml.safe_load(DOC_PATH.read_text())


def test_the_document_is_valid_openapi_3_1(doc):
    # source: the OpenAPI 3.1 specification, through openapi-spec-validator
    assert doc["openapi"].startswith("3.1")
    validate_spec(doc)


def _template(rule: str) -> str:
    return re.sub(r"<(?:[a-z_]+:)?([a-z_]+)>", r"{\1}", rule)


def test_every_route_is_documented_and_every_documented_route_exists(app, doc):
    served = {(_template(rule.rule), method.lower()) for rule in app.url_map.iter_rules()
              for method in rule.methods if method.lower() in METHODS}
    documented = {(path, method) for path, item in doc["paths"].items() for method in item if method in METHODS}
    assert served == documented


class Checker:
    """Validate a response against the schema the document gives for its route, method and status."""

    def __init__(self, doc: dict) -> None:
        self.doc = doc
        self.registry = Registry().with_resource("urn:api", Resource.from_contents(
            doc, default_specification=DRAFT202012))
        self.seen: set[tuple[str, str, int]] = set()

    def _operation(self, path: str, method: str) -> tuple[str, dict]:
        for template, item in self.doc["paths"].items():
            pattern = "^" + re.sub(r"\{[a-z_]+\}", "[^/]+", template) + "$"
            if re.match(pattern, path) and method in item:
                return template, item[method]
        raise AssertionError(f"{method.upper()} {path} is not in the document")

    def _resolve(self, node: dict) -> dict:
        while "$ref" in node:
            node = self.registry.resolver(base_uri="urn:api").lookup("urn:api" + node["$ref"]).contents
        return node

    def check(self, response, path: str, method: str) -> None:
        template, operation = self._operation(path.split("?")[0], method)
        status = str(response.status_code)
        assert status in operation["responses"], f"{method.upper()} {template} answered {status}, undocumented"
        spec = self._resolve(operation["responses"][status])
        content = spec.get("content", {})
        assert response.mimetype in content, f"{response.mimetype} not documented for {template} {status}"
        if response.mimetype == "application/json":
            schema = _absolute(content[response.mimetype]["schema"])
            errors = list(Draft202012Validator(schema, registry=self.registry).iter_errors(response.get_json()))
            assert not errors, f"{method.upper()} {path} {status}: {errors[0].message} at {list(errors[0].path)}"
        self.seen.add((template, method, response.status_code))

    def check_events(self, response) -> int:
        schema = {"$ref": "urn:api#/components/schemas/Event"}
        count = 0
        for block in response.get_data(as_text=True).split("\n\n"):
            for line in block.splitlines():
                if line.startswith("data: "):
                    data = json.loads(line[6:])
                    errors = list(Draft202012Validator(schema, registry=self.registry).iter_errors(data))
                    assert not errors, errors[0].message
                    count += 1
        return count


def _absolute(schema: dict) -> dict:
    """Make the document's local references absolute, so they resolve from a detached schema."""
    text = json.dumps(schema).replace('"#/components/', '"urn:api#/components/')
    return json.loads(text)


def test_real_responses_match_their_documented_schemas(client, doc, work):
    c = Checker(doc)

    def call(method: str, path: str, **kw):
        response = getattr(client, method)(path, **kw)
        c.check(response, path, method)
        return response

    job = call("post", "/v1/jobs", json={"problem": grid_problem(), "search": {"weight": 3.0}}).get_json()
    path = job["links"]["self"]
    call("get", path)
    call("get", f"{path}/plan")  # 404: no plan yet
    call("get", f"{path}/improvements")
    work()
    call("get", f"{path}?after=0&wait=1")
    call("get", f"{path}/plan")
    call("get", f"{path}/plan?revision=1")
    call("delete", path)  # already final: 200
    events = client.get(f"{path}/events")
    c.check(events, f"{path}/events", "get")
    assert c.check_events(events) >= 3
    queued = call("post", "/v1/jobs", json={"problem": grid_problem()}).get_json()
    call("delete", queued["links"]["cancel"])
    call("get", "/v1/domains")
    call("get", "/v1/domains/grid")
    call("get", "/v1/domains/crane-yard")
    call("get", "/healthz")
    call("get", "/readyz")  # 503: no worker is registered in this test
    call("get", "/v1/jobs/AAAAAAAAAAAAAAAAAAAAAA")
    call("post", "/v1/jobs", data="{", content_type="application/json")
    call("post", "/v1/jobs", data="{}", content_type="text/plain")
    call("post", "/v1/jobs", json={"problem": grid_problem(start=(1, 1))})
    call("post", "/v1/jobs", json={"problem": grid_problem(), "budget": {"time_s": 3600}})
    call("post", "/v1/jobs", data=json.dumps({"pad": "x" * 70000}), content_type="application/json")
    call("get", f"{path}?wait=99")
    statuses = {s for _, _, s in c.seen}
    assert {200, 202, 400, 404, 413, 415, 422, 503} <= statuses


def test_a_running_job_and_its_cancel_match_the_document(client, doc, redis):
    import threading

    from worker.jobs import run_job

    c = Checker(doc)
    with stub.registered():
        job = client.post("/v1/jobs", json={"problem": {"domain": "endless"}, "budget": {"time_s": 20}}).get_json()
        searcher = threading.Thread(target=run_job, args=(job["id"],), kwargs={"connection": redis})
        searcher.start()
        running = client.get(f"{job['links']['self']}?after=0&wait=5")
        c.check(running, job["links"]["self"], "get")
        assert running.get_json()["status"] == "running"
        cancel = client.delete(job["links"]["cancel"])
        c.check(cancel, job["links"]["cancel"], "delete")
        assert cancel.status_code == 202
        searcher.join(5)
    c.check(client.get(job["links"]["self"]), job["links"]["self"], "get")
