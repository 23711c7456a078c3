"""Properties of whole searches on random small grids and graphs, checked against networkx Dijkstra."""

from __future__ import annotations

import random

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.worker.domains.refs import (cost_to_go, free_cells, graph_cost_to_go, grid_graph, random_graph_body,
                                       random_rows)
from worker.domains import graph, grid
from worker.engine import Budget, Finished, Improvement, Progress, SearchConfig, search

configs = st.builds(
    SearchConfig,
    weight=st.sampled_from([1.0, 1.5, 2.0, 5.0]),
    schedule=st.sampled_from(["fixed", "decreasing"]),
    reopen=st.sampled_from(["reopen", "defer"]),
    bound_share=st.sampled_from([0.0, 0.1, 0.5]),
)


def grid_case(seed: int):
    """Return (kind, problem, optimal cost or None) for a random floor plan."""
    rng = random.Random(seed)
    cells: list = []
    while len(cells) < 2:
        rows = random_rows(rng, rng.randint(1, 9), rng.randint(2, 9), rng.choice([0.1, 0.3]),
                           terrain=rng.random() < 0.6)
        cells = free_cells(rows)
    moves, cut = rng.choice([4, 8]), rng.random() < 0.3
    start, goals = rng.choice(cells), rng.sample(cells, k=rng.randint(1, 2))
    problem = grid.GridSchema().load({"rows": rows, "moves": moves, "corner_cutting": cut, "start": list(start),
                                      "goals": [list(g) for g in goals]})
    togo = cost_to_go(grid_graph(rows, moves, cut), goals)  # source: networkx dijkstra
    return grid.KIND, problem, togo.get(start)


def graph_case(seed: int):
    """Return (kind, problem, optimal cost or None) for a random graph."""
    rng = random.Random(seed)
    body = random_graph_body(rng, rng.randint(1, 14), rng.choice([None, "plane", "geo"]), rng.random() < 0.5)
    togo = graph_cost_to_go(body)  # source: networkx dijkstra
    return graph.KIND, graph.GraphSchema().load(body), togo.get("n0")


CASES = {"grid": grid_case, "graph": graph_case}


def run(kind, problem, config, budget=None):
    space = kind.build(problem)
    events = list(search(space, config, budget or Budget(), progress_every_s=0.0))
    return space, events


@settings(max_examples=60, deadline=None)
@given(domain=st.sampled_from(sorted(CASES)), seed=st.integers(0, 10**9), config=configs)
def test_anytime_search_is_honest_and_ends_optimal(domain, seed, config):
    kind, problem, optimal = CASES[domain](seed)
    space, events = run(kind, problem, config)
    fin = events[-1]
    assert isinstance(fin, Finished) and fin.stop_reason.value == "exhausted"
    if optimal is None:
        assert fin.proven_infeasible and fin.cost is None
        return
    assert fin.proven_optimal
    assert fin.cost == pytest.approx(optimal, rel=1e-9, abs=1e-9)
    improvements = [e for e in events if isinstance(e, Improvement)]
    costs = [e.cost for e in improvements]
    assert costs and all(a > b for a, b in zip(costs, costs[1:]))
    lowers = [e.lower_bound for e in events]
    assert all(a <= b for a, b in zip(lowers, lowers[1:]))
    for e in events:
        assert e.lower_bound <= optimal * (1 + 1e-9) + 1e-9
        if isinstance(e, (Improvement, Progress)) and e.cost is not None and optimal > 0:
            assert e.bound >= e.cost / optimal - 1e-9
    for e in improvements:
        steps = space.render_plan(e.path.states, e.path.actions, e.path.costs)
        assert kind.validate(problem, steps) == pytest.approx(e.cost, rel=1e-9, abs=1e-9)


@settings(max_examples=40, deadline=None)
@given(domain=st.sampled_from(sorted(CASES)), seed=st.integers(0, 10**9), config=configs,
       expansions=st.integers(1, 60))
def test_an_expansions_budget_gives_the_same_events_every_run(domain, seed, config, expansions):
    kind, problem, _ = CASES[domain](seed)

    def trace():
        _, events = run(kind, problem, config, Budget(expansions=expansions))
        return [(type(e).__name__, e.cost, e.lower_bound, e.path, e.counters.expansions, e.counters.generated)
                for e in events if not isinstance(e, Progress)]

    first = trace()
    assert first == trace()
    assert first[-1][0] == "Finished" and first[-1][4] <= expansions
