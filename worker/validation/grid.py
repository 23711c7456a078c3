"""Replay a grid plan on the floor plan: adjacent, in bounds, open, the diagonal rule, the cost."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from worker.exceptions import PlanValidationError
from worker.validation import check_step_cost, check_total, step_parts

__all__ = ["validate_grid_plan"]

# Compass name -> (d_row, d_col); kept apart from the domain's own table on purpose.
_COMPASS = {"N": (-1, 0), "S": (1, 0), "E": (0, 1), "W": (0, -1),
            "NE": (-1, 1), "NW": (-1, -1), "SE": (1, 1), "SW": (1, -1)}


def _cell(index: int, state: Any) -> tuple[int, int]:
    if (not isinstance(state, (list, tuple)) or len(state) != 2
            or not all(isinstance(v, int) and not isinstance(v, bool) for v in state)):
        raise PlanValidationError(f"step {index}: state {state!r} is not [row, col]")
    return state[0], state[1]


def validate_grid_plan(problem: Any, steps: Sequence[Any]) -> float:
    """Replay ``steps`` from the start of a loaded grid problem; return the recomputed cost."""
    terrain = problem.terrain
    height, width, costs = terrain.height, terrain.width, terrain.costs

    def open_cost(r: int, c: int) -> int:
        return costs[r * width + c] if 0 <= r < height and 0 <= c < width else 0

    r, c = problem.start
    step_costs = []
    for i, step in enumerate(steps):
        action, claimed, state = step_parts(i, step)
        if action not in _COMPASS:
            raise PlanValidationError(f"step {i}: unknown action {action!r}")
        dr, dc = _COMPASS[action]
        nr, nc = r + dr, c + dc
        if _cell(i, state) != (nr, nc):
            raise PlanValidationError(f"step {i}: {action} from [{r}, {c}] reaches [{nr}, {nc}], not {state!r}")
        k = open_cost(nr, nc)
        if k == 0:
            raise PlanValidationError(f"step {i}: [{nr}, {nc}] is outside the grid or blocked")
        diagonal = dr != 0 and dc != 0
        if diagonal:
            if problem.moves != 8:
                raise PlanValidationError(f"step {i}: diagonal step {action} with 4 moves")
            if not problem.corner_cutting and (open_cost(r, nc) == 0 or open_cost(nr, c) == 0):
                raise PlanValidationError(f"step {i}: {action} from [{r}, {c}] cuts a blocked corner")
        expected = k * math.sqrt(2.0) if diagonal else float(k)
        check_step_cost(i, claimed, expected)
        step_costs.append(expected)
        r, c = nr, nc
    if (r, c) not in set(problem.goals):
        raise PlanValidationError(f"the plan ends at [{r}, {c}], which is not a goal")
    return check_total(steps, math.fsum(step_costs))
