"""Sequencing on TSPLIB instances: published optimal tour lengths proven optimal as closed tours.

source: Reinelt, "TSPLIB - A Traveling Salesman Problem Library", ORSA J. on
Computing 3(4), 1991, and the TSPLIB ``solutions`` list read from the data sets.
City 1 is the start, the others are tasks, zero durations, objective ``setup``.
"""

from __future__ import annotations

import pytest

from tests.worker.domains.tsplib import read_matrix, read_optima, read_tour, tsp_problem
from worker.domains import load_problem
from worker.engine import Budget, SearchConfig, solve
from worker.request import parse_request
from worker.runner import run

# The three the domain must prove, plus larger ones the tree bound closes in a few seconds at most.
PROVEN = ["burma14", "ulysses16", "gr17", "gr21", "ulysses22", "gr24", "fri26", "bayg29", "bays29",
          "dantzig42", "swiss42", "att48", "berlin52"]
# source: TSPLIB solutions list (Reinelt 1995), typed here to check the reader of that list too
PUBLISHED = {"burma14": 3323, "ulysses16": 6859, "gr17": 2085}


@pytest.fixture(scope="module")
def tsplib(datasets):
    return datasets / "tsplib"


def test_the_solutions_list_has_the_published_values(tsplib):
    optima = read_optima(tsplib)
    assert {k: optima[k] for k in PUBLISHED} == PUBLISHED  # source: Reinelt 1991/1995, TSPLIB optima


@pytest.mark.parametrize("name", PROVEN)
def test_published_optimum_is_proven(tsplib, name):
    opt = read_optima(tsplib)[name]  # source: TSPLIB solutions list
    kind, problem = load_problem(tsp_problem(read_matrix(tsplib / f"{name}.tsp")))
    space = kind.build(problem)
    imps, fin = solve(space, SearchConfig(weight=1.0), Budget(expansions=50_000, time_s=120))
    assert fin.proven_optimal and fin.stop_reason.value == "exhausted"
    assert fin.cost == opt
    steps = space.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
    assert kind.validate(problem, steps) == opt
    assert len(steps) == len(problem.tasks) + 1 and steps[-1]["action"] == "return"


@pytest.mark.parametrize("name", ["bays29", "dantzig42", "att48"])
def test_the_search_closes_a_gap_the_root_bound_leaves(tsplib, name):
    opt = read_optima(tsplib)[name]  # source: TSPLIB solutions list
    kind, problem = load_problem(tsp_problem(read_matrix(tsplib / f"{name}.tsp")))
    space = kind.build(problem)
    assert 0.99 * opt < space.heuristic(space.initial_state()) < opt
    imps, fin = solve(space, SearchConfig(weight=2.0), Budget(expansions=50_000, time_s=120))
    assert fin.proven_optimal and fin.cost == opt
    assert fin.counters.expansions > len(problem.tasks)
    assert all(imp.cost / opt <= imp.bound * (1 + 1e-9) for imp in imps)


@pytest.mark.parametrize("name", ["ulysses16", "ulysses22", "gr24", "fri26", "bayg29"])
def test_the_published_optimal_tour_replays_at_the_optimum(tsplib, name):
    tour = read_tour(tsplib / f"{name}.opt.tour")  # source: TSPLIB optimal tour file
    start = tour.index(0)
    order = tour[start + 1:] + tour[:start]
    kind, problem = load_problem(tsp_problem(read_matrix(tsplib / f"{name}.tsp")))
    steps = kind.build(problem).timeline([f"c{i + 1}" for i in order] + ["return"])
    assert kind.validate(problem, steps) == read_optima(tsplib)[name]


def test_durations_shift_the_makespan_by_their_sum(tsplib):
    doc = tsp_problem(read_matrix(tsplib / "burma14.tsp"))
    doc["objective"] = "makespan"
    for i, task in enumerate(doc["tasks"]):
        task["duration"] = 10 * (i % 4)
    shift = sum(t["duration"] for t in doc["tasks"])
    kind, problem = load_problem(doc)
    _, fin = solve(kind.build(problem), SearchConfig(weight=1.0), Budget(expansions=50_000))
    assert fin.proven_optimal and fin.cost == 3323 + shift  # source: TSPLIB optimum of burma14


def test_a_job_request_runs_to_a_proof_with_checked_plans(tsplib):
    doc = {"problem": tsp_problem(read_matrix(tsplib / "gr17.tsp")),
           "search": {"weight": 2.0}, "budget": {"time_s": 60, "expansions": 100_000}}
    events = list(run(parse_request(doc)))
    improvements = [e for e in events if e["type"] == "improvement"]
    final = events[-1]
    assert final["type"] == "finished" and final["proven_optimal"] and final["cost"] == 2085  # source: TSPLIB
    assert improvements and all(e["cost"] / 2085 <= e["bound"] * (1 + 1e-9) for e in improvements)
