"""Replay a sequencing plan on the problem: each task once, precedence, timing, windows, cost."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

from worker.exceptions import PlanValidationError
from worker.validation import check_step_cost, check_total, step_parts

__all__ = ["validate_sequencing_plan"]

_RETURN = "return"
_EARTH_KM = 6371.0
_TOL = 1e-6


def _close(a: float, b: float) -> bool:
    return math.isclose(a, b, rel_tol=_TOL, abs_tol=_TOL)


def _travel(problem: Any, a: tuple[float, float] | None, b: tuple[float, float] | None) -> float:
    """Recompute a changeover from the coordinates (kept apart from the domain's own code)."""
    if a is None or b is None:
        return 0.0
    if problem.metric == "manhattan":
        d = abs(a[0] - b[0]) + abs(a[1] - b[1])
    elif problem.metric == "euclidean":
        d = math.sqrt((a[0] - b[0]) ** 2 + (a[1] - b[1]) ** 2)
    else:
        p1, p2 = math.radians(a[0]), math.radians(b[0])
        dp, dl = p2 - p1, math.radians(b[1] - a[1])
        s = math.sin(dp / 2) ** 2 + math.cos(p1) * math.cos(p2) * math.sin(dl / 2) ** 2
        d = 2 * _EARTH_KM * math.asin(min(1.0, math.sqrt(s)))
    return d / problem.speed


def _changeover(problem: Any, frm: int, to: int) -> float:
    """Return the changeover between nodes (0 = the start, i = task i - 1)."""
    if frm == to:
        return 0.0 if problem.setup is None else float(problem.setup[frm][to])
    if problem.setup is not None:
        return float(problem.setup[frm][to])
    where = [problem.start] + [t.at for t in problem.tasks]
    return _travel(problem, where[frm], where[to])


def _number(i: int, state: Mapping[str, Any], key: str) -> float:
    v = state.get(key)
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise PlanValidationError(f"step {i}: state.{key} {v!r} is not a finite number")
    return float(v)


def validate_sequencing_plan(problem: Any, steps: Sequence[Any]) -> float:
    """Replay ``steps`` on a loaded sequencing problem; return the recomputed objective value."""
    tasks = problem.tasks
    index = {t.id: i + 1 for i, t in enumerate(tasks)}
    before: dict[str, list[str]] = {}
    for a, b in problem.precedence:
        before.setdefault(b, []).append(a)
    done: set[str] = set()
    clock, at = 0.0, 0
    returned = False
    costs: list[float] = []
    for i, step in enumerate(steps):
        action, claimed, state = step_parts(i, step)
        if returned:
            raise PlanValidationError(f"step {i}: nothing may follow the return to the start")
        if not isinstance(state, Mapping):
            raise PlanValidationError(f"step {i}: state must be an object")
        if action == _RETURN:
            if not problem.return_to_start:
                raise PlanValidationError(f"step {i}: the problem has no return to the start")
            if len(done) != len(tasks):
                raise PlanValidationError(f"step {i}: returns before every task is done")
            to, returned = 0, True
            task = None
        elif isinstance(action, str) and action in index:
            if action in done:
                raise PlanValidationError(f"step {i}: task {action!r} is done twice")
            missing = [a for a in before.get(action, ()) if a not in done]
            if missing:
                raise PlanValidationError(f"step {i}: task {action!r} comes before {missing[0]!r}")
            to = index[action]
            task = tasks[to - 1]
        else:
            raise PlanValidationError(f"step {i}: unknown task {action!r}")
        change = _changeover(problem, at, to)
        release = 0.0 if task is None or task.release is None else task.release
        start = max(clock + change, release)
        end = start + (0.0 if task is None else task.duration)
        if task is not None and task.due is not None and end > task.due + 1e-9 * max(1.0, abs(task.due)):
            raise PlanValidationError(f"step {i}: task {action!r} ends at {end!r}, after its due {task.due!r}")
        shown = state.get("task")
        if shown != (None if task is None else action):
            raise PlanValidationError(f"step {i}: state.task {shown!r} does not match the action {action!r}")
        for key, value in (("changeover", change), ("start", start), ("end", end)):
            if not _close(_number(i, state, key), value):
                raise PlanValidationError(f"step {i}: state.{key} is {state[key]!r} but the replay gives {value!r}")
        expected = end - clock if problem.objective.value == "makespan" else change
        check_step_cost(i, claimed, expected)
        costs.append(expected)
        if task is not None:
            done.add(action)
        clock, at = end, to
    if len(done) != len(tasks):
        left = [t.id for t in tasks if t.id not in done]
        raise PlanValidationError(f"the plan leaves {len(left)} task(s) undone, e.g. {left[0]!r}")
    if problem.return_to_start and not returned:
        raise PlanValidationError("the plan does not return to the start")
    total = clock if problem.objective.value == "makespan" else math.fsum(costs)
    return check_total(steps, total)
