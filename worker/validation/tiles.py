"""Replay a sliding-tile plan: each action moves the blank one cell on the board, every move costs 1."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from worker.exceptions import PlanValidationError
from worker.validation import check_step_cost, check_total, step_parts

__all__ = ["validate_tiles_plan"]

# The direction the blank moves -> (d_row, d_col); kept apart from the domain's table on purpose.
_BLANK_MOVES = {"up": (-1, 0), "down": (1, 0), "left": (0, -1), "right": (0, 1)}


def validate_tiles_plan(problem: Any, steps: Sequence[Any]) -> float:
    """Replay ``steps`` from the start board of a loaded sliding-tile problem; return the move count."""
    width, height = problem.width, problem.height
    board = list(problem.tiles)
    blank = board.index(0)
    for i, step in enumerate(steps):
        action, claimed, state = step_parts(i, step)
        if action not in _BLANK_MOVES:
            raise PlanValidationError(f"step {i}: unknown action {action!r}")
        dr, dc = _BLANK_MOVES[action]
        r, c = blank // width + dr, blank % width + dc
        if not (0 <= r < height and 0 <= c < width):
            raise PlanValidationError(f"step {i}: the blank cannot move {action} from cell {blank}")
        target = r * width + c
        board[blank], board[target] = board[target], 0
        blank = target
        if not isinstance(state, (list, tuple)) or list(state) != board:
            raise PlanValidationError(f"step {i}: state {state!r} is not the board after the move, {board!r}")
        check_step_cost(i, claimed, 1.0)
    if board != list(problem.goal):
        raise PlanValidationError(f"the plan ends on {board!r}, not the goal {list(problem.goal)!r}")
    return check_total(steps, math.fsum(1.0 for _ in steps))
