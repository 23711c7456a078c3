"""Engine tests on random explicit graphs, checked against networkx Dijkstra."""

from __future__ import annotations

import math
import random

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.worker.engine.toy import ToySpace, random_instance
from worker.engine import Budget, Finished, Improvement, Progress, SearchConfig, StopReason, search, solve


def _check_run(space, opt, config, budget=None):
    improvements, fin = solve(space, config, budget)
    costs = [imp.cost for imp in improvements]
    assert all(a > b for a, b in zip(costs, costs[1:])), "improvements must strictly decrease"
    lowers = [imp.lower_bound for imp in improvements] + [fin.lower_bound]
    assert all(a <= b for a, b in zip(lowers, lowers[1:])), "L must never decrease"
    for imp in improvements:
        assert math.isclose(imp.path.cost, imp.cost, rel_tol=1e-9, abs_tol=1e-9)
        assert imp.path.states[0] == space.start and space.is_goal(imp.path.states[-1])
        if opt is not None:
            assert imp.lower_bound <= opt + 1e-9, "L must stay below the optimum"
            if opt > 0:
                assert imp.bound >= imp.cost / opt - 1e-9, "the bound must be honest"
    return improvements, fin


@settings(max_examples=150, deadline=None)
@given(seed=st.integers(0, 10**9), n=st.integers(2, 14), p=st.sampled_from([0.15, 0.3, 0.6]),
       h_kind=st.sampled_from(["zero", "perfect", "inconsistent"]),
       weight=st.sampled_from([1.0, 1.5, 3.0, 10.0]), reopen=st.sampled_from(["reopen", "defer"]),
       schedule=st.sampled_from(["fixed", "decreasing"]), dense=st.booleans(),
       share=st.sampled_from([0.0, 0.1, 0.5]), int_costs=st.booleans())
def test_anytime_search_ends_optimal_and_honest(seed, n, p, h_kind, weight, reopen, schedule, dense, share, int_costs):
    rng = random.Random(seed)
    space, opt, _ = random_instance(rng, n, p, h_kind, dense=dense, int_costs=int_costs)
    cfg = SearchConfig(weight=weight, reopen=reopen, schedule=schedule, bound_share=share)
    improvements, fin = _check_run(space, opt, cfg)
    assert fin.stop_reason is StopReason.EXHAUSTED
    if opt is None:  # source: networkx Dijkstra finds no path
        assert fin.proven_infeasible and fin.cost is None and not improvements
    else:  # source: networkx Dijkstra optimal cost
        assert fin.proven_optimal
        assert fin.cost == pytest.approx(opt, rel=1e-9, abs=1e-9)
        assert fin.bound == 1.0


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 10**9), budget=st.integers(1, 40), weight=st.sampled_from([1.0, 2.0, 5.0]))
def test_expansions_budget_is_deterministic(seed, budget, weight):
    def run():
        space, opt, _ = random_instance(random.Random(seed), 12, 0.3, "inconsistent")
        imps, fin = solve(space, SearchConfig(weight=weight), Budget(expansions=budget))
        return [(i.cost, i.lower_bound, i.counters.expansions) for i in imps], (fin.stop_reason, fin.cost, fin.counters.expansions)
    first, second = run(), run()
    assert first == second
    assert first[1][2] <= budget


def test_start_is_goal_gives_empty_plan():
    space = ToySpace(2, [(0, 1, 1.0)], 0, [0])
    imps, fin = solve(space)
    assert len(imps) == 1 and imps[0].cost == 0.0 and imps[0].path.actions == ()
    assert fin.proven_optimal and fin.cost == 0.0


def test_dead_end_heuristic_proves_infeasible():
    space = ToySpace(3, [(0, 1, 1.0)], 0, [2], h=[math.inf, 0.0, 0.0])
    imps, fin = solve(space)
    assert not imps and fin.proven_infeasible and fin.stop_reason is StopReason.EXHAUSTED


def _chain(n):
    # a long chain with a shortcut found late: many expansions
    edges = [(i, i + 1, 1.0) for i in range(n - 1)]
    return ToySpace(n, edges, 0, [n - 1])


def test_cancel_and_budgets_stop_the_search():
    calls = {"n": 0}

    def cancelled():
        calls["n"] += 1
        return calls["n"] > 2

    *_, fin = search(_chain(200_000), cancelled=cancelled)
    assert fin.stop_reason is StopReason.CANCELLED and fin.cost is None and not fin.proven_infeasible
    *_, fin = search(_chain(200_000), budget=Budget(expansions=500))
    assert fin.stop_reason is StopReason.EXPANSIONS and fin.counters.expansions == 500
    *_, fin = search(_chain(200_000), budget=Budget(max_states=1000))
    assert fin.stop_reason is StopReason.MEMORY and fin.counters.stored >= 1000


def test_time_budget_and_progress_events_follow_the_clock():
    ticks = iter(range(10**9))
    events = list(search(_chain(200_000), budget=Budget(time_s=50), clock=lambda: next(ticks) * 0.1,
                         progress_every_s=1.0))
    assert isinstance(events[-1], Finished) and events[-1].stop_reason is StopReason.TIME
    assert any(isinstance(e, Progress) for e in events)


def test_target_bound_stops_early():
    rng = random.Random(7)
    for _ in range(30):
        space, opt, _ = random_instance(rng, 30, 0.2, "inconsistent")
        if opt:
            break
    imps, fin = solve(space, SearchConfig(weight=5.0), Budget(target_bound=1e6))
    assert fin.stop_reason in (StopReason.TARGET_BOUND, StopReason.EXHAUSTED)
    assert len(imps) == 1 and isinstance(imps[0], Improvement)


def test_defer_policy_merges_incons_when_open_runs_empty():
    # Inconsistent h and a large weight make closed states improve later; under
    # "defer" with a fixed weight they wait on INCONS until open is empty.
    rng = random.Random(11)
    merged = 0
    for _ in range(40):
        space, opt, _ = random_instance(rng, 40, 0.15, "inconsistent")
        if opt is None:
            continue
        imps, fin = solve(space, SearchConfig(weight=5.0, reopen="defer", bound_share=0.0),
                          Budget(expansions=100_000))
        assert fin.stop_reason is StopReason.EXHAUSTED, "the search must end, not spin"
        assert fin.cost == pytest.approx(opt)  # source: networkx Dijkstra
        merged += fin.counters.expansions > 40
    assert merged > 0, "some instance re-expanded deferred states"


def test_early_lower_bound_heap_gives_the_same_search(monkeypatch):
    # With a tiny scan limit the f-heap is built before the first plan; the
    # search and every reported bound must not change.
    from worker.engine import core

    def run(limit):
        monkeypatch.setattr(core, "_SCAN_LIMIT", limit)
        results = []
        rng = random.Random(5)
        for _ in range(25):
            space, opt, _ = random_instance(rng, 30, 0.15, "inconsistent")
            events = list(search(space, SearchConfig(weight=3.0), progress_every_s=0.0))
            results.append([(type(e).__name__, getattr(e, "cost", None), e.lower_bound, e.counters.expansions)
                            for e in events])
        return results

    assert run(0) == run(10**9)
