"""The JSON action model: field errors, infeasibility, and agreement with the same model in PDDL."""

from __future__ import annotations

import copy
import textwrap

import pytest

from tests.worker.strips.helpers import cost_to_go, ipc_optimum, ipc_texts, state_graph
from worker.domains.pddl import PddlProblem
from worker.domains.pddl import build as build_pddl
from worker.domains.strips import EXAMPLE, StripsSchema, build, compile_task
from worker.engine import SearchConfig, solve
from worker.exceptions import RequestError
from worker.request import parse_request
from worker.runner import run


def _doc(**changes):
    doc = copy.deepcopy(EXAMPLE)
    doc.update(changes)
    return doc


def _error(problem) -> RequestError:
    with pytest.raises(RequestError) as err:
        parse_request({"problem": problem})
    return err.value


def test_example_reaches_the_networkx_optimum():
    problem = StripsSchema().load({k: v for k, v in EXAMPLE.items() if k != "domain"})
    task = compile_task(problem)
    graph, start = state_graph(task)
    best = cost_to_go(task, graph)[start]  # source: networkx Dijkstra on the reversed state graph
    events = list(run(parse_request({"problem": EXAMPLE})))
    assert events[-1]["proven_optimal"] and events[-1]["cost"] == pytest.approx(best, rel=1e-12)


@pytest.mark.parametrize("change,field,words", [
    ({"actions": [{"name": "go", "pre": ["robot at charger", "robot at mars"]}]}, "problem.actions.0.pre.1",
     "unknown fact 'robot at mars'"),
    ({"actions": [{"name": "go", "add": ["hand empty"], "cost": -1}]}, "problem.actions.0.cost", "at least 0"),
    ({"actions": [{"name": "go", "cost": "3"}]}, "problem.actions.0.cost", "must be a number"),
    ({"actions": [{"name": "  ", "add": ["hand empty"]}]}, "problem.actions.0.name", "must not be empty"),
    ({"actions": [{"name": "go"}, {"name": "stay"}, {"name": "go"}]}, "problem.actions.2.name",
     "duplicate action name 'go' (also actions.0)"),
    ({"actions": [{"name": "go", "pre": ["hand empty"], "pre_not": ["hand empty"]}]},
     "problem.actions.0.pre_not.0", "also in pre"),
    ({"actions": [{"name": "go", "effects": []}]}, "problem.actions.0.effects", "Unknown field"),
    ({"facts": ["a", "b", "a"], "init": [], "goal": ["a"]}, "problem.facts.2", "duplicate fact 'a'"),
    ({"facts": ["a", ""], "init": [], "goal": ["a"]}, "problem.facts.1", "must not be empty"),
    ({"init": ["robot at charger", "robot on the moon"]}, "problem.init.1", "unknown fact"),
    ({"goal": ["nowhere"]}, "problem.goal.0", "unknown fact 'nowhere'"),
    ({"goal_not": ["bolts packed"]}, "problem.goal_not.0", "also in goal"),
    ({"heuristic": "hff"}, "problem.heuristic", "Must be one of"),
])
def test_bad_models_name_the_field(change, field, words):
    e = _error(_doc(**change))
    assert e.field == field and words in e.message, (e.field, e.message)


def test_unreachable_goal_is_proven_infeasible_without_search():
    doc = _doc(facts=EXAMPLE["facts"] + ["bolts shipped"], goal=["bolts shipped"])
    space = build(StripsSchema().load({k: v for k, v in doc.items() if k != "domain"}))
    assert "bolts shipped" in space.task.infeasible
    events = list(run(parse_request({"problem": doc})))
    assert events[-1]["proven_infeasible"] and events[-1]["expansions"] == 0 and events[-1]["cost"] is None


def test_goal_that_forbids_an_undeletable_fact_is_infeasible():
    doc = {"domain": "strips", "facts": ["lit", "done"], "init": ["lit"], "goal": ["done"], "goal_not": ["lit"],
           "actions": [{"name": "finish", "add": ["done"]}]}
    fin = list(run(parse_request({"problem": doc})))[-1]
    assert fin["proven_infeasible"]


def test_start_that_is_a_goal_gives_an_empty_plan():
    events = list(run(parse_request({"problem": _doc(goal=["hand empty"])})))
    assert events[0]["type"] == "improvement" and events[0]["plan"] == [] and events[-1]["cost"] == 0.0


def test_decimal_costs_stay_exact_through_lmcut():
    # Ten steps of 0.1: the sum must be seen as 1.0, so the bound meets the cost exactly.
    facts = [f"p{i}" for i in range(11)]
    actions = [{"name": f"s{i}", "pre": [f"p{i}"], "add": [f"p{i + 1}"], "delete": [f"p{i}"], "cost": 0.1}
               for i in range(10)]
    doc = {"domain": "strips", "facts": facts, "init": ["p0"], "goal": ["p10"], "actions": actions}
    req = parse_request({"problem": doc, "search": {"weight": 1.0}})
    assert req.space.task.scale == 10
    assert req.space.heuristic(req.space.initial_state()) == 1.0  # source: 10 * 0.1, by hand
    fin = list(run(req))[-1]
    assert fin["proven_optimal"] and fin["cost"] == pytest.approx(1.0)


PDDL_DOMAIN = textwrap.dedent("""\
    (define (domain cell)
      (:requirements :strips :negative-preconditions :action-costs)
      (:predicates (clamp-open) (part-in) (part-done) (tool-a) (tool-b))
      (:functions (total-cost) - number)
      (:action load :parameters () :precondition (and (clamp-open) (not (part-in)))
        :effect (and (part-in) (not (clamp-open)) (increase (total-cost) 1.25)))
      (:action swap-to-b :parameters () :precondition (tool-a)
        :effect (and (tool-b) (not (tool-a)) (increase (total-cost) 0.5)))
      (:action machine :parameters () :precondition (and (part-in) (tool-b))
        :effect (and (part-done) (increase (total-cost) 3)))
      (:action unload :parameters () :precondition (and (part-in) (part-done))
        :effect (and (clamp-open) (not (part-in)) (increase (total-cost) 0.75))))
    """)
PDDL_PROBLEM = """(define (problem one) (:domain cell) (:init (clamp-open) (tool-a))
  (:goal (and (part-done) (clamp-open) (not (part-in)))) (:metric minimize (total-cost)))"""
JSON_MODEL = {
    "domain": "strips", "facts": ["clamp-open", "part-in", "part-done", "tool-a", "tool-b"],
    "init": ["clamp-open", "tool-a"], "goal": ["part-done", "clamp-open"], "goal_not": ["part-in"],
    "actions": [
        {"name": "load", "pre": ["clamp-open"], "pre_not": ["part-in"], "add": ["part-in"],
         "delete": ["clamp-open"], "cost": 1.25},
        {"name": "swap-to-b", "pre": ["tool-a"], "add": ["tool-b"], "delete": ["tool-a"], "cost": 0.5},
        {"name": "machine", "pre": ["part-in", "tool-b"], "add": ["part-done"], "cost": 3},
        {"name": "unload", "pre": ["part-in", "part-done"], "add": ["clamp-open"], "delete": ["part-in"],
         "cost": 0.75}]}


def test_json_model_and_the_same_model_in_pddl_agree():
    results = []
    for problem in (JSON_MODEL, {"domain": "pddl", "domain_text": PDDL_DOMAIN, "problem_text": PDDL_PROBLEM}):
        fin = list(run(parse_request({"problem": problem})))[-1]
        assert fin["proven_optimal"]
        results.append(fin["cost"])
    assert results[0] == results[1] == 5.5  # source: by hand, load + swap + machine + unload = 1.25+0.5+3+0.75


def test_ground_competition_task_written_as_json_keeps_its_optimum(datasets):
    domain_text, problem_text = ipc_texts(datasets, "gripper-ipc1998-strips", "prob01.pddl")
    task = build_pddl(PddlProblem(domain_text, problem_text)).task
    names = task.facts
    doc = {"domain": "strips", "facts": list(names), "init": [names[f] for f in task.init],
           "goal": [names[f] for f in task.goal],
           "actions": [{"name": a.name, "pre": [names[f] for f in a.pre], "add": [names[f] for f in a.add],
                        "delete": [names[f] for f in a.delete], "cost": task.cost(a)} for a in task.actions]}
    space = parse_request({"problem": doc}).space
    _, fin = solve(space, SearchConfig(weight=1.0))
    # source: ipc/optimal_costs.csv (exhaustive BFS over the ground space)
    assert fin.proven_optimal and fin.cost == ipc_optimum(datasets, "gripper-ipc1998-strips", "prob01.pddl")
