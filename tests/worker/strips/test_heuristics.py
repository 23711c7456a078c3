"""Check h_max, LM-cut and h_FF against exact costs over whole state spaces.

The exact cost-to-go h* of every reachable state comes from networkx's
Dijkstra on the reversed state graph, built here with a set-based successor
function apart from the search space's bitset code. The optimal relaxed cost
h+ comes the same way from the graph of fact sets under the delete relaxation.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.worker.strips.helpers import bits, cost_to_go, ipc_texts, relaxed_costs, state_graph
from worker.domains.strips.model import StripsSchema, compile_task
from worker.heuristics import HFF, Blind, HMax, LMCut, RelaxedTask
from worker.pddl import ground, parse_domain, parse_problem

TOL = 1e-9


def _ipc_task(datasets, folder, problem):
    domain_text, problem_text = ipc_texts(datasets, folder, problem)
    domain = parse_domain(domain_text)
    return ground(domain, parse_problem(problem_text, domain))


def _check_bounds(task, graph, hstar, relaxed=None):
    r = RelaxedTask.from_task(task)
    hmax, lmcut, hff = HMax(task, r), LMCut(task, r), HFF(task, r)
    for s in graph:
        b = bits(s)
        hm, lm, ff = hmax(b), lmcut(b), hff(b)
        true = hstar.get(s, math.inf)
        # from memory: Helmert & Domshlak 2009 show h_max <= LM-cut <= h+ <= h*
        assert hm <= lm + TOL, (s, hm, lm)
        assert lm <= true + TOL, (s, lm, true)
        if relaxed is not None:
            hplus = relaxed.get(s, math.inf)
            assert lm <= hplus + TOL and hplus <= true + TOL, (s, lm, hplus, true)
            assert ff >= hplus - TOL, (s, ff, hplus)  # a relaxed plan costs at least h+
        assert math.isinf(hm) == math.isinf(lm) == math.isinf(ff)
        # common practice: h_max is consistent, h(s) <= c(s, t) + h(t) on every edge
        for t, data in graph[s].items():
            assert hm <= data["weight"] + hmax(bits(t)) + TOL, (s, t)


@pytest.mark.parametrize("folder,problem,states", [
    # source: counting argument; 4 labelled blocks form 73 tower sets, 13 for 3, so 73 + 4 * 13 = 125 states
    ("blocks-ipc2000-strips-typed", "probBLOCKS-4-0.pddl", 125),
    # source: counting argument; 5 blocks: 501 tower sets + 5 * 73 with one block held = 866 states
    ("blocks-ipc2000-strips-typed", "probBLOCKS-5-2.pddl", 866),
    # source: counting argument; 2 rooms * (2^4 + 2*4*2^3 + 4*3*2^2) ball placements = 256 states
    ("gripper-ipc1998-strips", "prob01.pddl", 256),
])
def test_estimates_bound_the_true_cost_on_every_reachable_state(datasets, folder, problem, states):
    task = _ipc_task(datasets, folder, problem)
    graph, start = state_graph(task)
    assert graph.number_of_nodes() == states
    hstar = cost_to_go(task, graph)
    assert len(hstar) == states  # every state can still reach the goal in these domains
    _check_bounds(task, graph, hstar)


@pytest.mark.parametrize("folder,problem", [
    ("blocks-ipc2000-strips-typed", "probBLOCKS-4-0.pddl"),
    ("gripper-ipc1998-strips", "prob01.pddl"),
])
def test_search_space_successors_match_the_set_based_replay(datasets, folder, problem):
    from worker.domains.strips.space import StripsSpace
    task = _ipc_task(datasets, folder, problem)
    graph, _ = state_graph(task)
    space = StripsSpace(task)
    for s in graph:
        got = {(t, c) for t, c, _ in space.successors(bits(s))}
        want = {(bits(t), d["weight"]) for t, d in graph[s].items()}
        assert {t for t, _ in got} == {t for t, _ in want}
        assert len(got) == len(want)  # unit costs: one cost per target


@st.composite
def small_models(draw):
    """Draw a small JSON action model with zero, fractional and integer costs."""
    n = draw(st.integers(3, 6))
    facts = [f"f{i}" for i in range(n)]
    subset = st.lists(st.sampled_from(facts), max_size=3, unique=True)
    actions = []
    for i in range(draw(st.integers(1, 8))):
        pre = draw(subset)
        pre_not = [f for f in draw(subset) if f not in pre]
        actions.append({"name": f"a{i}", "pre": pre, "pre_not": pre_not, "add": draw(subset),
                        "delete": draw(subset), "cost": draw(st.sampled_from([0, 0.5, 1, 2, 3.25]))})
    return {"facts": facts, "init": draw(subset), "goal": draw(st.lists(st.sampled_from(facts), min_size=1,
                                                                         max_size=3, unique=True)),
            "actions": actions}


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(small_models())
def test_random_models_respect_hmax_lmcut_hplus_hstar(doc):
    task = compile_task(StripsSchema().load(doc))
    graph, _ = state_graph(task)
    _check_bounds(task, graph, cost_to_go(task, graph), relaxed_costs(task))


def test_zero_cost_actions_keep_lmcut_finite_and_admissible():
    # A chain where only the last step costs anything: every estimate must stay at most 1.
    doc = {"facts": ["a", "b", "c", "d"], "init": ["a"], "goal": ["d"], "actions": [
        {"name": "ab", "pre": ["a"], "add": ["b"], "cost": 0},
        {"name": "bc", "pre": ["b"], "add": ["c"], "cost": 0},
        {"name": "cd", "pre": ["c"], "add": ["d"], "cost": 1},
        {"name": "ad", "pre": ["a"], "add": ["d"], "cost": 5}]}
    task = compile_task(StripsSchema().load(doc))
    start = bits(frozenset(task.init))
    assert HMax(task)(start) == 1.0  # from memory: the cheapest route a->b->c->d costs 1
    assert LMCut(task)(start) == 1.0
    assert HFF(task)(start) == 1.0
    assert Blind(task)(start) == 0.0  # the cheapest action costs 0


def test_lmcut_exceeds_hmax_on_independent_subgoals():
    # Two goals reached by separate unit actions: h_max sees 1, the landmarks add up to 2.
    doc = {"facts": ["s", "g1", "g2"], "init": ["s"], "goal": ["g1", "g2"], "actions": [
        {"name": "one", "pre": ["s"], "add": ["g1"]}, {"name": "two", "pre": ["s"], "add": ["g2"]}]}
    task = compile_task(StripsSchema().load(doc))
    start = bits(frozenset(task.init))
    landmarks: list = []
    # from memory: Helmert & Domshlak 2009, each disjunctive action landmark adds its least cost
    assert LMCut(task).cuts(list(task.init), landmarks) == 2 and len(landmarks) == 2
    assert HMax(task)(start) == 1.0 and LMCut(task)(start) == 2.0
