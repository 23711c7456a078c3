"""Replay a graph plan: each step follows a link from the previous node at that link's cost."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from worker.exceptions import PlanValidationError
from worker.validation import check_step_cost, check_total, step_parts

__all__ = ["validate_graph_plan"]


def _cheapest_links(problem: Any) -> dict[tuple[str, str], float]:
    """Return the cheapest cost of each (from, to) pair the problem's edges allow."""
    links: dict[tuple[str, str], float] = {}
    for e in problem.edges:
        pairs = [(e.source, e.target)] if problem.directed else [(e.source, e.target), (e.target, e.source)]
        for pair in pairs:
            if e.cost < links.get(pair, math.inf):
                links[pair] = e.cost
    return links


def validate_graph_plan(problem: Any, steps: Sequence[Any]) -> float:
    """Replay ``steps`` from the start node of a loaded graph problem; return the recomputed cost."""
    links = _cheapest_links(problem)
    here = problem.start
    step_costs = []
    for i, step in enumerate(steps):
        action, claimed, state = step_parts(i, step)
        if not isinstance(state, str):
            raise PlanValidationError(f"step {i}: state {state!r} is not a node id")
        if action != f"to {state}":
            raise PlanValidationError(f"step {i}: action {action!r} does not name the node reached, {state!r}")
        cost = links.get((here, state))
        if cost is None:
            raise PlanValidationError(f"step {i}: no link from {here!r} to {state!r}")
        check_step_cost(i, claimed, cost)
        step_costs.append(cost)
        here = state
    if here not in set(problem.goals):
        raise PlanValidationError(f"the plan ends at {here!r}, which is not a goal")
    return check_total(steps, math.fsum(step_costs))
