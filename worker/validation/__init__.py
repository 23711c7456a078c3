"""Independent plan validators: replay a rendered plan on the problem itself.

One module per domain. A validator never calls the search space's successor
code: it re-reads the problem, checks that each step is legal from the state
before it, recomputes each step's cost, checks that the last state is a goal,
and returns the recomputed total. Any failure raises ``PlanValidationError``;
such a plan is a bug and is never published.

This module holds the checks every validator shares.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

from worker.exceptions import PlanValidationError

__all__ = ["COST_TOLERANCE", "step_parts", "check_step_cost", "check_total"]

# Relative tolerance between a claimed and a recomputed cost.
COST_TOLERANCE = 1e-6


def _close(a: float, b: float) -> bool:
    return math.isclose(a, b, rel_tol=COST_TOLERANCE, abs_tol=COST_TOLERANCE)


def step_parts(index: int, step: Any) -> tuple[Any, float, Any]:
    """Return a step's (action, cost, state), or raise if the step is malformed."""
    if not isinstance(step, Mapping):
        raise PlanValidationError(f"step {index}: must be an object with action, cost and state")
    missing = [key for key in ("action", "cost", "state") if key not in step]
    if missing:
        raise PlanValidationError(f"step {index}: missing {', '.join(missing)}")
    cost = step["cost"]
    if isinstance(cost, bool) or not isinstance(cost, (int, float)) or not math.isfinite(cost):
        raise PlanValidationError(f"step {index}: cost {cost!r} is not a finite number")
    return step["action"], float(cost), step["state"]


def check_step_cost(index: int, claimed: float, expected: float) -> None:
    """Raise unless a step's claimed cost matches the recomputed one."""
    if not _close(claimed, expected):
        raise PlanValidationError(f"step {index}: claims cost {claimed!r} but the move costs {expected!r}")


def check_total(steps: Sequence[Any], expected: float) -> float:
    """Raise unless the claimed step costs sum to the recomputed total; return the total."""
    claimed = math.fsum(float(s["cost"]) for s in steps)
    if not _close(claimed, expected):
        raise PlanValidationError(f"the steps' costs add up to {claimed!r} but the plan costs {expected!r}")
    return expected
