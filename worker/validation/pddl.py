"""Replay a plan on the lifted PDDL model: substitute each step's arguments into its action schema.

The replay reads the parsed domain and problem (never the ground task the
search used): for each step ``"(name obj ...)"`` it finds the schema, checks
the objects' types, checks every precondition literal (atoms, negations,
equality) on the current set of true atoms (static ones included), applies
deletes then adds, and recomputes the cost from the schema's ``increase``
terms and the problem's function values. A step's ``state`` must list exactly
the true atoms of the predicates some action changes.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from fractions import Fraction
from functools import lru_cache
from typing import Any

from worker.exceptions import PlanValidationError
from worker.pddl import parse_domain, parse_problem
from worker.pddl.model import EQUALITY, Atom, Domain, Literal, Problem
from worker.validation import check_step_cost, check_total, step_parts
from worker.validation.strips import check_state

__all__ = ["validate_pddl_plan", "replay"]


@lru_cache(maxsize=8)
def _parsed(domain_text: str, problem_text: str) -> tuple[Domain, Problem]:
    domain = parse_domain(domain_text)
    return domain, parse_problem(problem_text, domain)


def _holds(lit: Literal, state: set[Atom]) -> bool:
    a = lit.atom
    truth = a.args[0] == a.args[1] if a.predicate == EQUALITY else a in state
    return truth == lit.positive


def _call(index: int, action: Any) -> tuple[str, tuple[str, ...]]:
    if not isinstance(action, str) or not action.startswith("(") or not action.endswith(")"):
        raise PlanValidationError(f"step {index}: action {action!r} is not written as (name arg ...)")
    words = action[1:-1].lower().split()
    if not words:
        raise PlanValidationError(f"step {index}: empty action")
    return words[0], tuple(words[1:])


def _cost(index: int, domain: Domain, problem: Problem, schema_cost: Any, sub: dict[str, str]) -> Fraction:
    if not domain.uses_costs:
        return Fraction(1)
    total = Fraction(0)
    for term in schema_cost:
        if term.number is not None:
            total += term.number
            continue
        key = Atom(term.function.predicate, tuple(sub.get(t, t) for t in term.function.args))
        if key not in problem.values:
            raise PlanValidationError(f"step {index}: {key.text()} has no value in :init")
        total += problem.values[key]
    return total


def replay(domain: Domain, problem: Problem, steps: Sequence[Any]) -> tuple[set[Atom], list[float]]:
    """Replay ``steps`` on the lifted model; return the final atoms and each step's recomputed cost."""
    fluent = domain.fluent_predicates()
    state = set(problem.init)
    costs: list[float] = []
    for i, step in enumerate(steps):
        action, claimed, listed = step_parts(i, step)
        name, args = _call(i, action)
        schema = domain.action(name)
        if schema is None:
            raise PlanValidationError(f"step {i}: unknown action {name!r}")
        if len(args) != len(schema.params):
            raise PlanValidationError(f"step {i}: {name!r} takes {len(schema.params)} argument(s), got {len(args)}")
        for (var, types), obj in zip(schema.params, args):
            if obj not in problem.objects:
                raise PlanValidationError(f"step {i}: unknown object {obj!r}")
            if not domain.is_of_type(problem.objects[obj], types):
                raise PlanValidationError(f"step {i}: {obj!r} is not of type {'/'.join(types)} for {var}")
        sub = dict(zip(schema.variables(), args))

        def bind(a: Atom) -> Atom:
            return Atom(a.predicate, tuple(sub.get(t, t) for t in a.args))

        for lit in schema.pre:
            ground = Literal(bind(lit.atom), lit.positive)
            if not _holds(ground, state):
                want = "" if lit.positive else "not "
                raise PlanValidationError(f"step {i}: {action} needs {want}{ground.atom.text()}, which fails")
        state = (state - {bind(a) for a in schema.delete}) | {bind(a) for a in schema.add}
        cost = float(_cost(i, domain, problem, schema.cost, sub))
        check_step_cost(i, claimed, cost)
        check_state(i, listed, {a.text() for a in state if a.predicate in fluent})
        costs.append(cost)
    return state, costs


def validate_pddl_plan(problem: Any, steps: Sequence[Any]) -> float:
    """Replay ``steps`` on a loaded ``pddl`` problem's texts; return the recomputed cost."""
    domain, prob = _parsed(problem.domain_text, problem.problem_text)
    state, costs = replay(domain, prob, steps)
    for lit in prob.goal:
        if not _holds(lit, state):
            want = "" if lit.positive else "not "
            raise PlanValidationError(f"the plan ends without reaching the goal: {want}{lit.atom.text()} fails")
    return check_total(steps, math.fsum(costs))
