"""A stub domain for the service tests: a search that finds a plan at once and then never ends.

From the start there is a direct, dear edge to the goal (cost 1e9) and an
endless chain of cheap states; with a zero heuristic the engine publishes the
dear plan at once and then walks the chain until it is stopped. It exercises
the service's running-job paths (cancel, budgets) independently of how fast
the real domains are.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

from marshmallow import Schema, fields

from worker.domains import kinds
from worker.domains.base import DomainKind
from worker.exceptions import PlanValidationError

GOAL = -1
DEAR = 1e9  # the chain would need this many expansions to prove the dear plan optimal


class _Schema(Schema):
    width = fields.Integer(load_default=1)


class EndlessSpace:
    guidance = None

    def __init__(self, problem: dict) -> None:
        self.width = problem["width"]

    def initial_state(self) -> int:
        return 0

    def is_goal(self, state: int) -> bool:
        return state == GOAL

    def successors(self, state: int) -> Iterator[tuple[int, float, str]]:
        if state == 0:
            yield GOAL, DEAR, "direct"
        for k in range(self.width):
            yield state + 1 + k, 1.0, "step"

    def heuristic(self, state: int) -> float:
        return 0.0

    def render_plan(self, states, actions, costs):
        return [{"action": a, "cost": c, "state": s} for s, a, c in zip(states[1:], actions, costs)]


def _validate(problem: dict, steps: list[dict]) -> float:
    if not steps or steps[-1]["state"] != GOAL:
        raise PlanValidationError("the plan does not reach the goal")
    return sum(s["cost"] for s in steps)


KIND = DomainKind(name="endless", summary="test stub", schema=_Schema, build=EndlessSpace, validate=_validate,
                  example={"domain": "endless", "width": 1})


@contextmanager
def registered() -> Iterator[DomainKind]:
    """Register the stub domain for the duration of a test."""
    registry = kinds()
    registry[KIND.name] = KIND
    try:
        yield KIND
    finally:
        registry.pop(KIND.name, None)
