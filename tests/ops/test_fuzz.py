"""Fuzz every operation of the OpenAPI document against the app: no 5xx, every answer as documented."""

from __future__ import annotations

from pathlib import Path

import fakeredis
import pytest
from hypothesis import HealthCheck, settings
from rq import Worker

schemathesis = pytest.importorskip("schemathesis", reason="install the test extras: pip install -e '.[test]'")
from schemathesis.specs.openapi.checks import negative_data_rejection, positive_data_acceptance  # noqa: E402

from service.app import create_app  # noqa: E402
from service.auth import KeyStore  # noqa: E402
from service.config import load  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
ENV = {"BOUNDWISE_LOG_FORMAT": "text", "BOUNDWISE_LOG_LEVEL": "ERROR", "BOUNDWISE_RATE_LIMITS": "off",
       "BOUNDWISE_MAX_RUNNING_JOBS": "1000000", "BOUNDWISE_SSE_MAX_S": "0.05", "BOUNDWISE_SSE_KEEPALIVE_S": "0.05",
       "BOUNDWISE_MAX_TIME_S": "5", "BOUNDWISE_MAX_BODY_BYTES": "65536"}

_redis = fakeredis.FakeRedis(server=fakeredis.FakeServer())
APP = create_app(load(ENV), redis=_redis)
KEY = KeyStore(_redis).create("fuzz")[1]
# A registered worker, so /readyz answers 200 as it does in service (503 is for an outage).
Worker(["default"], connection=_redis, name="fuzz-worker").register_birth()
JOB_IDS: list[str] = []


@pytest.fixture(scope="module", autouse=True)
def _real_jobs():
    """Make a few real jobs (two finished, one cancelled), so the fuzzer also meets ids that exist.

    All are final, so a generated long-poll ``wait`` answers at once.
    """
    from rq import Queue

    from worker.jobs import run_job

    client = APP.test_client()
    auth = {"Authorization": f"Bearer {KEY}"}
    grid = {"domain": "grid", "rows": ["....", ".##.", "...."], "moves": 4, "start": [2, 0], "goals": [[0, 3]]}
    JOB_IDS[:] = [client.post("/v1/jobs", json={"problem": grid}, headers=auth).get_json()["id"] for _ in range(3)]
    for job_id in JOB_IDS[:2]:
        Queue("default", connection=_redis).remove(job_id)
        assert run_job(job_id, connection=_redis) == "optimal"
    assert client.delete(f"/v1/jobs/{JOB_IDS[2]}", headers=auth).status_code == 200


schema = schemathesis.openapi.from_path(ROOT / "openapi" / "openapi.yaml")
schema.app = APP  # requests go through the WSGI app in process, probes included
schema.config.update(base_url="http://localhost")


@schema.hook("map_path_parameters")
def _some_real_job_ids(context, path_parameters):
    # Half the generated job ids are swapped for a real one (chosen by the generated id itself).
    job_id = (path_parameters or {}).get("job_id")
    if JOB_IDS and isinstance(job_id, str) and len(job_id) % 2 == 0:
        path_parameters["job_id"] = JOB_IDS[len(job_id) % len(JOB_IDS)]
    return path_parameters


@schema.parametrize()
@settings(max_examples=300, deadline=None, database=None,
          suppress_health_check=list(HealthCheck))
def test_every_operation_answers_as_documented(case):  # common practice: property-based API conformance
    # Every check but the two about which inputs are taken: the document cannot say
    # which problems each domain takes (a valid-looking problem may rightly get 422),
    # and unknown query parameters are ignored, as is common, not refused.
    response = case.call_and_validate(headers={"Authorization": f"Bearer {KEY}"},
                                      excluded_checks=[positive_data_acceptance, negative_data_rejection])
    assert response.status_code < 500
