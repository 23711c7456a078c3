"""Fixtures of the API unit tests: fakeredis, the app, an in-process RQ worker, sample problems."""

from __future__ import annotations

import random
from collections.abc import Callable

import fakeredis
import pytest
from rq import Queue, SimpleWorker

from service.app import create_app
from service.config import load

# A small parts warehouse: picker robots start at the dock (bottom left) and
# drive to the packing station (top right) between shelf rows; the middle
# aisle is a slow lane (terrain cost 3).
WAREHOUSE = [
    "..........",
    ".##.##.##.",
    ".##.##.##.",
    "3333333333",
    ".##.##.##.",
    ".##.##.##.",
    "..........",
]

TEST_ENV = {
    "BOUNDWISE_AUTH": "off",
    "BOUNDWISE_RATE_LIMITS": "off",
    "BOUNDWISE_MAX_BODY_BYTES": "65536",
    "BOUNDWISE_MAX_TIME_S": "60",
    "BOUNDWISE_DEFAULT_TIME_S": "20",
    "BOUNDWISE_MAX_EXPANSIONS": "5000000",
    "BOUNDWISE_MAX_STATES": "2000000",
    "BOUNDWISE_MAX_WAIT_S": "5",
    "BOUNDWISE_HEARTBEAT_S": "0.2",
    "BOUNDWISE_LOST_AFTER_S": "1",
    "BOUNDWISE_LOG_FORMAT": "text",
}


def grid_problem(rows=None, start=(6, 0), goal=(0, 9), moves=8) -> dict:
    """Return a grid problem document (the warehouse floor by default)."""
    return {"domain": "grid", "rows": list(rows or WAREHOUSE), "moves": moves,
            "start": list(start), "goals": [list(goal)]}


def random_floor(n: int, seed: int, blocked: float = 0.3) -> list[str]:
    """Return an n x n floor with random blocked cells; the corners are kept open."""
    rng = random.Random(seed)
    rows = ["".join("#" if rng.random() < blocked else "." for _ in range(n)) for _ in range(n)]
    rows[0] = "." + rows[0][1:]
    rows[-1] = rows[-1][:-1] + "."
    return rows


@pytest.fixture
def redis():
    """Return a fresh in-memory Redis (bytes replies, as RQ needs)."""
    return fakeredis.FakeRedis(server=fakeredis.FakeServer())


@pytest.fixture
def config():
    return load(TEST_ENV)


@pytest.fixture
def app(config, redis):
    return create_app(config, redis=redis)


@pytest.fixture
def client(app):
    return app.test_client()


@pytest.fixture
def work(redis) -> Callable[..., None]:
    """Return a function that runs an in-process RQ worker until the queues are empty."""

    def run(max_jobs: int | None = None) -> None:
        worker = SimpleWorker([Queue("high", connection=redis), Queue("default", connection=redis)],
                              connection=redis)
        worker.work(burst=True, max_jobs=max_jobs)

    return run


@pytest.fixture
def submit(client) -> Callable[..., dict]:
    """Return a function that submits a job request and returns the 202 answer's JSON."""

    def post(document: dict, **headers: str) -> dict:
        response = client.post("/v1/jobs", json=document, headers=headers)
        assert response.status_code == 202, response.get_json()
        return response.get_json()

    return post
