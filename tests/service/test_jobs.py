"""Jobs through the API with fakeredis and an in-process RQ worker: submit, read, plans, history, budgets."""

from __future__ import annotations

import math
import threading
import time

import networkx as nx
import pytest
from rq import Queue

from tests.service.conftest import WAREHOUSE, grid_problem, random_floor
from worker.keys import job_keys


def _reference_cost(rows: list[str], start: tuple[int, int], goal: tuple[int, int], moves: int) -> float:
    """Cheapest route by networkx Dijkstra over the grid rules as the grid domain documents them."""
    def cost(r: int, c: int) -> float | None:
        ch = rows[r][c]
        return None if ch == "#" else (1.0 if ch == "." else float(ch))

    g = nx.DiGraph()
    h, w = len(rows), len(rows[0])
    steps = [(-1, 0), (0, 1), (1, 0), (0, -1)]
    if moves == 8:
        steps += [(-1, 1), (1, 1), (1, -1), (-1, -1)]
    for r in range(h):
        for c in range(w):
            if cost(r, c) is None:
                continue
            for dr, dc in steps:
                r2, c2 = r + dr, c + dc
                if not (0 <= r2 < h and 0 <= c2 < w) or cost(r2, c2) is None:
                    continue
                if dr and dc and (cost(r + dr, c) is None or cost(r, c + dc) is None):
                    continue  # no corner cutting
                g.add_edge((r, c), (r2, c2), weight=cost(r2, c2) * (math.sqrt(2) if dr and dc else 1.0))
    return nx.dijkstra_path_length(g, start, goal)


def test_a_submitted_job_is_queued_with_its_effective_budget(client, submit):
    out = submit({"problem": grid_problem(), "budget": {"expansions": 1000}})
    assert out["status"] == "queued"
    assert set(out["links"]) == {"self", "plan", "improvements", "events", "cancel"}
    job = client.get(out["links"]["self"]).get_json()
    assert job["status"] == "queued" and job["best"] is None and job["attempts"] == []
    assert job["budget"]["requested"]["expansions"] == 1000 and job["budget"]["requested"]["time_s"] is None
    assert job["budget"]["effective"]["time_s"] == 20.0  # BOUNDWISE_DEFAULT_TIME_S of the test config
    assert job["budget"]["effective"]["max_states"] == 2_000_000  # the cap fills a missing budget
    assert job["queued_s"] >= 0 and job["started_at"] is None


@pytest.mark.parametrize("moves", [4, 8])
def test_a_job_ends_at_the_proven_optimum_of_a_reference_solver(client, submit, work, moves):
    out = submit({"problem": grid_problem(moves=moves), "search": {"weight": 3.0}})
    work()
    job = client.get(out["links"]["self"]).get_json()
    # source: networkx dijkstra_path_length as the reference shortest-path solver
    expected = _reference_cost(WAREHOUSE, (6, 0), (0, 9), moves)
    assert job["status"] == "optimal" and job["proven_optimal"] is True
    assert job["best"]["cost"] == pytest.approx(expected, rel=1e-9)
    assert job["best"]["bound"] == 1.0 and job["stop_reason"] == "exhausted"
    assert [a["status"] for a in job["attempts"]] == ["optimal"] and job["finished_at"] and job["used"]["expansions"] > 0
    plan = client.get(out["links"]["plan"]).get_json()
    assert plan["final"] is True and plan["revision"] == job["best"]["revision"]
    assert math.fsum(s["cost"] for s in plan["steps"]) == pytest.approx(expected, rel=1e-9)
    assert plan["steps"][-1]["state"] == [0, 9]


def test_every_revision_is_kept_and_the_history_only_improves(client, submit, work):
    rows = random_floor(120, seed=1)
    out = submit({"problem": grid_problem(rows, start=(0, 0), goal=(119, 119)), "search": {"weight": 5.0}})
    work()
    history = client.get(out["links"]["improvements"]).get_json()["improvements"]
    assert len(history) >= 2
    assert [h["revision"] for h in history] == list(range(1, len(history) + 1))
    costs = [h["cost"] for h in history]
    bounds = [h["bound"] for h in history if h["bound"] is not None]
    assert all(a > b for a, b in zip(costs, costs[1:]))
    assert all(a >= b - 1e-9 for a, b in zip(bounds, bounds[1:]))
    for h in history:
        plan = client.get(f"{out['links']['plan']}?revision={h['revision']}").get_json()
        assert plan["revision"] == h["revision"]
        assert math.fsum(s["cost"] for s in plan["steps"]) == pytest.approx(h["cost"], rel=1e-9)
    job = client.get(out["links"]["self"]).get_json()
    # source: networkx dijkstra_path_length as the reference shortest-path solver
    assert job["best"]["cost"] == pytest.approx(_reference_cost(rows, (0, 0), (119, 119), 8), rel=1e-9)
    assert client.get(f"{out['links']['plan']}?revision={len(history) + 1}").status_code == 404


def test_long_poll_answers_at_once_when_there_is_something_newer(client, submit, work):
    out = submit({"problem": grid_problem()})
    work()
    started = time.monotonic()
    job = client.get(f"{out['links']['self']}?after=0&wait=5").get_json()
    assert time.monotonic() - started < 1.0
    assert job["best"]["revision"] >= 1 and job["status"] == "optimal"


def test_long_poll_waits_until_the_timeout_when_nothing_changes(client, submit):
    out = submit({"problem": grid_problem()})
    started = time.monotonic()
    job = client.get(f"{out['links']['self']}?after=0&wait=0.4").get_json()
    assert time.monotonic() - started >= 0.35
    assert job["status"] == "queued"


def test_long_poll_wakes_up_on_the_first_plan(app, submit, work):
    out = submit({"problem": grid_problem()})
    answers: list[dict] = []

    def poll() -> None:
        answers.append(app.test_client().get(f"{out['links']['self']}?after=0&wait=5").get_json())

    poller = threading.Thread(target=poll)
    poller.start()
    time.sleep(0.2)
    started = time.monotonic()
    work()  # in this thread: RQ sets signal handlers, which only the main thread may
    poller.join(6)
    assert answers and answers[0]["best"] is not None and answers[0]["best"]["revision"] >= 1
    assert time.monotonic() - started < 4.0


def test_submit_requests_go_to_the_high_queue_first(client, submit, work):
    low = submit({"problem": grid_problem()})
    high = submit({"problem": grid_problem(), "queue": "high"})
    work(max_jobs=1)
    assert client.get(high["links"]["self"]).get_json()["status"] == "optimal"
    assert client.get(low["links"]["self"]).get_json()["status"] == "queued"


def test_an_expansions_budget_stops_the_search_with_its_bound(client, submit, work):
    rows = random_floor(120, seed=1)
    out = submit({"problem": grid_problem(rows, start=(0, 0), goal=(119, 119)),
                  "search": {"weight": 5.0}, "budget": {"expansions": 2000}})
    work()
    job = client.get(out["links"]["self"]).get_json()
    assert job["stop_reason"] == "expansions" and job["used"]["expansions"] <= 2000
    assert job["status"] == "bounded"
    if job["best"] is not None:
        assert job["best"]["cost"] >= job["best"]["lower_bound"] and job["best"]["bound"] >= 1.0


def test_a_target_bound_stops_the_search_once_reached(client, submit, work):
    rows = random_floor(120, seed=1)
    out = submit({"problem": grid_problem(rows, start=(0, 0), goal=(119, 119)),
                  "search": {"weight": 5.0}, "budget": {"target_bound": 1.5}})
    work()
    job = client.get(out["links"]["self"]).get_json()
    assert job["status"] in ("bounded", "optimal")
    assert job["best"]["bound"] <= 1.5
    if job["status"] == "bounded":
        assert job["stop_reason"] == "target_bound"


def test_a_deadline_that_passes_in_the_queue_ends_the_job_without_a_search(client, submit, work):
    from datetime import datetime, timedelta, timezone

    deadline = (datetime.now(timezone.utc) + timedelta(seconds=0.4)).isoformat()
    out = submit({"problem": grid_problem(), "budget": {"deadline": deadline}})
    job = client.get(out["links"]["self"]).get_json()
    assert 0 < job["budget"]["effective"]["time_s"] <= 0.4
    time.sleep(0.5)
    work()
    job = client.get(out["links"]["self"]).get_json()
    assert job["status"] == "bounded" and job["stop_reason"] == "time" and job["best"] is None


def test_the_job_id_is_also_the_rq_job_id_and_the_keys_are_scoped(client, submit, redis):
    out = submit({"problem": grid_problem()})
    queued = Queue("default", connection=redis).job_ids
    assert queued == [out["id"]]
    keys = job_keys(out["id"])
    assert redis.exists(keys.state) and redis.ttl(keys.state) > 0
    assert len(out["id"]) >= 22  # 128 random bits, URL-safe
