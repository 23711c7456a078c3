"""Read and ground PDDL: the supported subset, reachability grounding, and located refusals."""

from __future__ import annotations

import itertools
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from tests.worker.strips.helpers import ipc_texts, state_graph
from worker.domains.pddl import EXAMPLE, PddlProblem, build
from worker.engine import SearchConfig, solve
from worker.exceptions import ProblemError, RequestError
from worker.pddl import ground, parse_domain, parse_problem
from worker.request import parse_request

ROOT = Path(__file__).resolve().parents[3]

DOMAIN = textwrap.dedent("""\
    (define (domain yard)
      (:requirements :strips :typing :negative-preconditions :equality :action-costs)
      (:types crane truck - vehicle  vehicle bay - object)
      (:constants depot - bay)
      (:predicates (at ?v - vehicle ?b - bay) (loaded ?v - vehicle) (busy ?b - bay))
      (:functions (lane ?from ?to - bay) - number (total-cost) - number)
      (:action move
        :parameters (?v - (either crane truck) ?from ?to - bay)
        :precondition (and (at ?v ?from) (not (= ?from ?to)) (not (busy ?to)))
        :effect (and (not (at ?v ?from)) (at ?v ?to) (increase (total-cost) (lane ?from ?to))))
      (:action load
        :parameters (?t - truck)
        :precondition (and (at ?t depot) (not (loaded ?t)))
        :effect (and (loaded ?t) (increase (total-cost) 1.5))))
    """)

PROBLEM = textwrap.dedent("""\
    (define (problem two-trucks)
      (:domain yard)
      (:objects t nil - truck  north south - bay)
      (:init (at t north) (at nil south) (busy south)
             (= (lane north depot) 2) (= (lane depot north) 2) (= (lane south depot) 7)
             (= (lane depot south) 7) (= (lane north south) 4) (= (lane south north) 4)
             (= (lane depot depot) 0) (= (lane north north) 0) (= (lane south south) 0)
             (= (total-cost) 0))
      (:goal (and (loaded t) (loaded nil) (at t north)))
      (:metric minimize (total-cost)))
    """)


def _task(domain_text: str = DOMAIN, problem_text: str = PROBLEM):
    domain = parse_domain(domain_text)
    return ground(domain, parse_problem(problem_text, domain))


def _located(text: str, needle: str, occurrence: int = 0) -> tuple[int, int]:
    """Return the 1-based (line, column) of ``needle`` in ``text``, found independently of the reader."""
    i = -1
    for _ in range(occurrence + 1):
        i = text.index(needle, i + 1)
    line = text.count("\n", 0, i) + 1
    return line, i - (text.rfind("\n", 0, i) + 1) + 1


def test_subset_features_ground_and_solve_to_the_hand_computed_optimum():
    task = _task()
    names = {a.name for a in task.actions}
    # `t` and `nil` are plain object names, not a boolean or an empty list.
    assert "(load t)" in names and "(load nil)" in names
    assert all(not n.startswith("(move") or n.split()[2] != n.split()[3].rstrip(")") for n in names)
    # `busy south` is static, so no move may enter south; `depot` is a domain constant.
    assert not any(n.startswith("(move") and n.endswith("south)") for n in names)
    space = build(PddlProblem(DOMAIN, PROBLEM))
    _, fin = solve(space, SearchConfig(weight=1.0))
    # hand computation: t goes north->depot->north (2+2) and loads (1.5); nil goes south->north->depot
    # (4+2, cheaper than the direct lane of 7) and loads (1.5): 13
    assert fin.proven_optimal and fin.cost == 13.0


def test_case_does_not_matter():
    upper = parse_domain(DOMAIN.upper())
    lower = parse_domain(DOMAIN)
    assert upper == lower
    assert _task(DOMAIN.upper(), PROBLEM.upper()) == _task()


def test_grounding_builds_only_reachable_actions_not_the_cross_product(datasets):
    domain_text, problem_text = ipc_texts(datasets, "logistics-ipc2000-strips-typed", "probLOGISTICS-4-0.pddl")
    task = _task(domain_text, problem_text)
    drives = sorted(a.name for a in task.actions if a.name.startswith("(drive-truck"))
    # hand count from the problem file: each truck drives between the two places of its own city, both ways
    assert drives == ["(drive-truck tru1 apt1 pos1 cit1)", "(drive-truck tru1 pos1 apt1 cit1)",
                      "(drive-truck tru2 apt2 pos2 cit2)", "(drive-truck tru2 pos2 apt2 cit2)"]


def test_grounded_state_space_equals_a_brute_force_lifted_exploration(datasets):
    domain_text, problem_text = ipc_texts(datasets, "gripper-ipc1998-strips", "prob01.pddl")
    domain = parse_domain(domain_text)
    problem = parse_problem(problem_text, domain)
    task = ground(domain, problem)
    graph, _ = state_graph(task)
    ground_states = {frozenset(task.facts[f] for f in s) for s in graph}
    # Brute force: every binding of every schema over all objects, applied lifted to every reached state.
    objects = sorted(problem.objects)
    fluent = domain.fluent_predicates()
    start = frozenset(problem.init)
    seen, todo = {start}, [start]
    while todo:
        s = todo.pop()
        for schema in domain.actions:
            for args in itertools.product(objects, repeat=len(schema.params)):
                sub = dict(zip(schema.variables(), args))
                bind = lambda a: type(a)(a.predicate, tuple(sub.get(x, x) for x in a.args))  # noqa: E731
                if all((bind(l.atom) in s) == l.positive for l in schema.pre):
                    t = (s - {bind(a) for a in schema.delete}) | {bind(a) for a in schema.add}
                    if t not in seen:
                        seen.add(t)
                        todo.append(t)
    lifted_states = {frozenset(a.text() for a in s if a.predicate in fluent) for s in seen}
    assert lifted_states == ground_states
    assert len(ground_states) == 256  # source: counting argument (see test_heuristics)


def test_unreachable_goal_is_proven_infeasible_before_search():
    # With north busy too (a static fact), no move may enter north, so nil can never get there.
    problem = PROBLEM.replace("(at t north))", "(at nil north))").replace("(busy south)", "(busy south) (busy north)")
    space = build(PddlProblem(DOMAIN, problem))
    assert space.task.infeasible and "(at nil north)" in space.task.infeasible
    _, fin = solve(space)
    assert fin.proven_infeasible and fin.cost is None and fin.counters.expansions == 0


def test_false_static_goal_is_proven_infeasible():
    problem = PROBLEM.replace("(at t north))", "(at t north) (not (= north north)))")
    _, fin = solve(build(PddlProblem(DOMAIN, problem)))
    assert fin.proven_infeasible and fin.counters.expansions == 0


def test_grounding_is_the_same_under_any_hash_seed():
    code = ("from worker.domains.pddl import EXAMPLE, PddlProblem, build;"
            "t = build(PddlProblem(EXAMPLE['domain_text'], EXAMPLE['problem_text'])).task;"
            "print(t.facts, [a.name for a in t.actions])")
    outs = set()
    for seed in ("1", "2", "3"):
        env = dict(os.environ, PYTHONHASHSEED=seed)
        outs.add(subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=env, capture_output=True,
                                text=True, check=True).stdout)
    assert len(outs) == 1


BAD_DOMAIN = [
    # (replace this, with that, the message must mention, located at this text)
    ("(at ?v ?from) (not (= ?from ?to))", "(or (at ?v ?from) (loaded ?v)) (not (= ?from ?to))", "disjunction (or)",
     "(or (at"),
    ("(loaded ?t) (increase", "(forall (?x - bay) (busy ?x)) (loaded ?t) (increase", "universal effect (forall)",
     "(forall"),
    ("(loaded ?t) (increase", "(when (busy depot) (loaded ?t)) (increase", "conditional effect (when)", "(when"),
    ("(and (at ?t depot)", "(and (exists (?b - bay) (busy ?b)) (at ?t depot)",
     "existential quantifier (exists)", "(exists"),
    ("(not (loaded ?t)))", "(not (loaded ?t)) (> (lane depot depot) 0))", "numeric comparison (>)", "(> (lane"),
    ("(not (loaded ?t)))", "(not (loaded ?t)) (= (lane depot depot) 0))", "numeric comparison (=)", "(= (lane"),
    ("(increase (total-cost) 1.5)", "(decrease (total-cost) 1.5)", "numeric effect (decrease)", "(decrease"),
    ("(increase (total-cost) 1.5)", "(increase (lane depot depot) 1)", "numeric fluents other than", "(lane depot depot) 1"),
    (":action-costs)", ":action-costs :durative-actions)", "requirement :durative-actions", ":durative-actions"),
    ("  (:action load", "  (:derived (free ?b - bay) (not (busy ?b)))\n  (:action load", "derived predicates",
     "(:derived"),
    ("  (:action load", "  (:durative-action wait :parameters ())\n  (:action load", "durative actions",
     "(:durative-action"),
    ("(loaded ?v - vehicle)", "(loaded ?v - vehicle) (loaded ?w)", "declared twice", "loaded ?w"),
    ("(at ?t depot) (not", "(at ?t) (not", "takes 2 argument(s)", "(at ?t)"),
    ("(at ?t depot) (not", "(at ?t ?b) (not", "undeclared variable ?b", "?b) (not"),
    ("(at ?t depot) (not", "(parked ?t) (not", "unknown predicate 'parked'", "parked"),
    ("(?t - truck)", "(?t - lorry)", "unknown type 'lorry'", "?t - lorry"),
    ("(increase (total-cost) 1.5)", "(increase (total-cost) -2)", "must not be negative", "-2"),
    (":effect (and (loaded ?t)", ":parameters (?u - truck) :effect (and (loaded ?t)", ":parameters is given twice",
     ":parameters (?u"),
]


@pytest.mark.parametrize("old,new,words,where", BAD_DOMAIN, ids=[b[2] for b in BAD_DOMAIN])
def test_bad_domain_is_refused_with_construct_line_and_column(old, new, words, where):
    assert old in DOMAIN
    text = DOMAIN.replace(old, new, 1)
    with pytest.raises(ProblemError) as err:
        build(PddlProblem(text, PROBLEM))
    e = err.value
    assert e.field == "domain_text" and words in e.message
    line, col = _located(text.lower(), where.lower())
    assert (e.extra["line"], e.extra["column"]) == (line, col), e.message
    assert e.message.startswith(f"line {line}, column {col}: ")


BAD_PROBLEM = [
    ("(:domain yard)", "(:domain dock)", "for domain 'dock'", "dock"),
    ("(at nil south)", "(at nil east)", "unknown object or constant 'east'", "east"),
    ("(:metric minimize (total-cost))", "(:metric maximize (total-cost))", "only supported metric", "(:metric"),
    ("(busy south)", "(not (busy north)) (busy south)", "negative initial atoms", "(not (busy"),
    ("(:objects t nil - truck", "(:objects t t - truck", "declared twice", "t - truck"),
    ("(loaded nil)", "(loaded nil", "never closed", "(define"),
    ("(define (problem", ") (define (problem", "unexpected ')'", ") (define"),
    ("(at t north)))", "(at ?x north)))", "undeclared variable ?x", "?x"),
]


@pytest.mark.parametrize("old,new,words,where", BAD_PROBLEM, ids=[b[2] for b in BAD_PROBLEM])
def test_bad_problem_is_refused_with_line_and_column(old, new, words, where):
    assert old in PROBLEM
    text = PROBLEM.replace(old, new, 1)
    with pytest.raises(ProblemError) as err:
        build(PddlProblem(DOMAIN, text))
    e = err.value
    assert e.field == "problem_text" and words in e.message, e.message
    line, col = _located(text, where)
    assert (e.extra["line"], e.extra["column"]) == (line, col), e.message


def test_request_errors_carry_the_dotted_field_and_location():
    doc = {"problem": dict(EXAMPLE, domain_text=EXAMPLE["domain_text"].replace("(and (robot-at ?p)", "(or (robot-at ?p)"))}
    with pytest.raises(RequestError) as err:
        parse_request(doc)
    out = err.value.to_dict()
    assert out["field"] == "problem.domain_text" and "disjunction" in out["message"]
    assert (out["line"], out["column"]) == _located(doc["problem"]["domain_text"], "(or (robot-at")
    with pytest.raises(RequestError) as err:
        parse_request({"problem": dict(EXAMPLE, heuristic="perfect")})
    assert err.value.field == "problem.heuristic"


def test_deep_nesting_is_refused_at_the_list_past_the_cap():
    from worker.pddl.sexpr import MAX_DEPTH
    text = DOMAIN.replace("(and (loaded ?t) (increase", "(and " * 70 + "(loaded ?t)" + ")" * 70 + " (and (increase", 1)
    with pytest.raises(ProblemError) as err:
        build(PddlProblem(text, PROBLEM))
    # The (MAX_DEPTH + 1)-th open list is the one refused; count the parentheses independently.
    depth, where = 0, None
    for i, ch in enumerate(text):
        depth += ch == "("
        depth -= ch == ")"
        if depth > MAX_DEPTH:
            where = i
            break
    line = text.count("\n", 0, where) + 1
    assert "nest deeper" in err.value.message
    assert (err.value.extra["line"], err.value.extra["column"]) == (line, where - text.rfind("\n", 0, where))


def test_unconstrained_parameters_are_refused_before_enumerating_them():
    domain = ("(define (domain wide) (:predicates (done ?a))"
              " (:action mark :parameters (?a ?b ?c ?d ?e) :effect (done ?a)))")
    objects = " ".join(f"bin{i}" for i in range(30))
    problem = f"(define (problem p) (:domain wide) (:objects {objects}) (:goal (done bin1)))"
    with pytest.raises(RequestError) as err:
        build(PddlProblem(domain, problem))
    # 30 objects for each of 5 free parameters: 30 ** 5 bindings, over the cap
    assert err.value.field == "problem_text" and str(30 ** 5) in err.value.message
    assert err.value.to_dict()["code"] == "over_limit"
