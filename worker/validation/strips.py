"""Replay a plan on a JSON action model: each action applicable, its state, its cost, the goal.

The replay works on the problem as written (fact names and action records),
not on the ground task or the bitsets the search used.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from typing import Any

from worker.exceptions import PlanValidationError
from worker.validation import check_step_cost, check_total, step_parts

__all__ = ["validate_strips_plan", "check_state", "check_goal"]


def check_state(index: int, claimed: Any, expected: set[str]) -> None:
    """Raise unless a step's ``state`` lists exactly the ``expected`` facts."""
    if not isinstance(claimed, list) or not all(isinstance(f, str) for f in claimed):
        raise PlanValidationError(f"step {index}: state must be a list of fact names")
    got = set(claimed)
    if got != expected or len(claimed) != len(got):
        extra = sorted(got - expected)[:3]
        missing = sorted(expected - got)[:3]
        raise PlanValidationError(
            f"step {index}: state differs from the replay (listed but false: {extra}; true but missing: {missing})")


def check_goal(state: set[str], goal: Iterable[str], goal_not: Iterable[str]) -> None:
    """Raise unless ``state`` satisfies the goal."""
    unmet = sorted(f for f in goal if f not in state)
    if unmet:
        raise PlanValidationError(f"the plan ends without reaching the goal: {unmet[0]!r} is false")
    held = sorted(f for f in goal_not if f in state)
    if held:
        raise PlanValidationError(f"the plan ends with {held[0]!r} true, which the goal forbids")


def validate_strips_plan(problem: Any, steps: Sequence[Any]) -> float:
    """Replay ``steps`` from the initial facts of a loaded JSON model; return the recomputed cost."""
    by_name = {a.name: a for a in problem.actions}
    state = set(problem.init)
    costs = []
    for i, step in enumerate(steps):
        name, claimed, listed = step_parts(i, step)
        action = by_name.get(name) if isinstance(name, str) else None
        if action is None:
            raise PlanValidationError(f"step {i}: unknown action {name!r}")
        missing = [f for f in action.pre if f not in state]
        if missing:
            raise PlanValidationError(f"step {i}: {name!r} needs {missing[0]!r}, which is false")
        blocking = [f for f in action.pre_not if f in state]
        if blocking:
            raise PlanValidationError(f"step {i}: {name!r} needs {blocking[0]!r} false, but it holds")
        state = (state - set(action.delete)) | set(action.add)
        check_step_cost(i, claimed, action.cost)
        check_state(i, listed, state)
        costs.append(action.cost)
    check_goal(state, problem.goal, problem.goal_not)
    return check_total(steps, math.fsum(costs))
