"""Search a ground STRIPS task: bitset states, indexed successors, relaxation heuristics.

A state is a Python int: bit i set means fact i holds. An action applies in
``s`` when ``s & pre == pre and not s & pre_not``; it leads to
``(s & ~delete) | add``. To avoid scanning every action per state, each action
is filed under one of its preconditions (the one the fewest actions need, a
cheap proxy for "rarely true"); a state only looks at the actions filed under
its true facts, plus those with no precondition.

``heuristic`` is the admissible estimate chosen by name (LM-cut by default),
``guidance`` the optional relaxed-plan estimate. When grounding already proved
the goal unreachable, ``heuristic`` is infinite everywhere, so the engine
prunes the start and reports the problem proven infeasible without searching.

An action label is the action's index; ``render_plan`` turns it into the
action's name. A rendered step is ``{"action": name, "cost": c, "state":
[sorted names of the true facts]}``.
"""

from __future__ import annotations

import logging
import math
from collections.abc import Callable, Sequence
from typing import Any

from worker.domains.base import Step
from worker.heuristics import RelaxedTask, make_estimate, state_facts
from worker.heuristics.task import GroundTask

__all__ = ["StripsSpace", "DEFAULT_HEURISTIC", "DEFAULT_GUIDANCE"]

logger = logging.getLogger(__name__)

# Chosen by measurement (tests/bench/strips.py). LM-cut needs 1.1x (gripper) to
# 470x (logistics) fewer expansions than h_max to prove the optimum and is faster
# in wall time wherever a proof takes more than a fraction of a second, except
# gripper, where h_max is about 7x faster. h_FF guidance finds cheaper plans
# sooner on the larger generated logistics tasks (first plan 31 vs 35, 41 vs 45)
# and costs at most a few milliseconds on the small competition instances.
DEFAULT_HEURISTIC = "lmcut"
DEFAULT_GUIDANCE = "hff"
# Estimates remembered per space; past this many states the memo starts over.
CACHE_STATES = 1 << 18


def _mask(facts: Sequence[int]) -> int:
    m = 0
    for f in facts:
        m |= 1 << f
    return m


def _infinite(state: int) -> float:
    return math.inf


class _Cached:
    """Remember an estimate per state.

    The engine evaluates a state again each time it is generated and pruned
    without being stored: a third of LM-cut calls under weight 2.
    """

    __slots__ = ("fn", "memo", "cap")

    def __init__(self, fn: Callable[[int], float], cap: int = CACHE_STATES) -> None:
        self.fn, self.memo, self.cap = fn, {}, cap

    def __call__(self, state: int) -> float:
        memo = self.memo
        v = memo.get(state)
        if v is None:
            if len(memo) >= self.cap:
                memo.clear()
            v = memo[state] = self.fn(state)
        return v


class StripsSpace:
    """The search space of a ground task (see the module docstring)."""

    def __init__(self, task: GroundTask, heuristic: str = DEFAULT_HEURISTIC,
                 guidance: str = DEFAULT_GUIDANCE) -> None:
        self.task = task
        self.heuristic_name = heuristic
        self.guidance_name = guidance
        self._start = _mask(task.init)
        self._goal = _mask(task.goal)
        self._goal_not = _mask(task.goal_not)
        self._build_index()
        relaxed = RelaxedTask.from_task(task)
        if task.infeasible is not None:
            self.heuristic: Callable[[int], float] = _infinite
            self.guidance: Callable[[int], float] | None = None
        else:
            estimate = make_estimate(heuristic, task, relaxed)
            self.heuristic = estimate if heuristic == "blind" else _Cached(estimate)
            self.guidance = _Cached(make_estimate("hff", task, relaxed)) if guidance == "hff" else None
        logger.debug("action model: %d facts, %d actions, bound %s, order %s", len(task.facts), len(task.actions),
                     heuristic, guidance)

    def _build_index(self) -> None:
        task = self.task
        users = [0] * len(task.facts)
        for a in task.actions:
            for f in a.pre:
                users[f] += 1
        buckets: list[list[tuple[int, int, int, int, float, int]]] = [[] for _ in task.facts]
        free: list[tuple[int, int, int, int, float, int]] = []
        full = (1 << len(task.facts)) - 1
        for i, a in enumerate(task.actions):
            entry = (_mask(a.pre), _mask(a.pre_not), full & ~_mask(a.delete), _mask(a.add), task.cost(a), i)
            if a.pre:
                anchor = min(a.pre, key=lambda f: (users[f], f))
                buckets[anchor].append(entry)
            else:
                free.append(entry)
        self._buckets = buckets
        self._free = free

    def initial_state(self) -> int:
        """Return the bitset of the initial facts."""
        return self._start

    def is_goal(self, state: int) -> bool:
        """Return True when every goal fact holds and no negated goal fact does."""
        return state & self._goal == self._goal and not state & self._goal_not

    def successors(self, state: int) -> list[tuple[int, float, int]]:
        """Return ``(next_state, cost, action_index)`` for each applicable action that changes the state."""
        out = []
        buckets = self._buckets
        for f in state_facts(state):
            for pre, neg, keep, add, cost, i in buckets[f]:
                if state & pre == pre and not state & neg:
                    t = (state & keep) | add
                    if t != state:
                        out.append((t, cost, i))
        for pre, neg, keep, add, cost, i in self._free:
            if not state & neg:
                t = (state & keep) | add
                if t != state:
                    out.append((t, cost, i))
        return out

    def facts_of(self, state: int) -> list[str]:
        """Return the sorted names of the facts true in ``state``."""
        names = self.task.facts
        return sorted(names[f] for f in state_facts(state))

    def render_plan(self, states: Sequence[int], actions: Sequence[int], costs: Sequence[float]) -> list[Step]:
        """Return the steps: action name, cost and the sorted true facts after the step."""
        acts = self.task.actions
        return [{"action": acts[a].name, "cost": float(c), "state": self.facts_of(s)}
                for a, c, s in zip(actions, costs, states[1:])]

    def describe(self) -> dict[str, Any]:
        """Return sizes and settings for logs and benchmarks."""
        return {
            "facts": len(self.task.facts),
            "actions": len(self.task.actions),
            "heuristic": self.heuristic_name if self.task.infeasible is None else "infeasible",
            "guidance": self.guidance_name,
        }
