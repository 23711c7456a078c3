"""Relaxation heuristics for ground STRIPS tasks: h_max, LM-cut (admissible) and h_FF (guidance).

All three read a ``GroundTask`` (``worker.heuristics.task``) through its
delete relaxation (``worker.heuristics.relaxed``) and are called on a bitset
state (bit i set = fact i true). Admissible estimates prune and give the
lower bound; h_FF only orders the open list.

``make_estimate(name, task)`` returns the estimate called ``name``:

- ``"lmcut"``  LM-cut (Helmert & Domshlak 2009), admissible, the default bound;
- ``"hmax"``   h_max (Bonet & Geffner 2001), admissible and consistent;
- ``"blind"``  0 on goal states, else the cheapest action cost: admissible;
- ``"hff"``    the cost-sensitive relaxed plan (Hoffmann & Nebel 2001;
               Keyder & Geffner 2008), inadmissible, guidance only (the default).

The defaults and the measurements behind them are in
``worker.domains.strips.space``.
"""

from __future__ import annotations

from collections.abc import Callable

from worker.heuristics.hff import HFF
from worker.heuristics.hmax import HMax
from worker.heuristics.lmcut import LMCut
from worker.heuristics.relaxed import RelaxedTask, state_facts
from worker.heuristics.task import GroundAction, GroundTask

__all__ = ["ADMISSIBLE", "GUIDANCE", "HFF", "HMax", "LMCut", "Blind", "GroundAction", "GroundTask",
           "RelaxedTask", "make_estimate", "state_facts"]

ADMISSIBLE = ("lmcut", "hmax", "blind")
GUIDANCE = ("hff", "none")


class Blind:
    """0 on goal states, else the cheapest action cost (admissible, no lookahead)."""

    name = "blind"

    def __init__(self, task: GroundTask, relaxed: RelaxedTask | None = None) -> None:
        self.task = task
        g = 0
        for f in task.goal:
            g |= 1 << f
        self._goal = g
        self._neg = sum(1 << f for f in task.goal_not)
        self._step = min((task.cost(a) for a in task.actions), default=0.0)

    def __call__(self, state: int) -> float:
        """Return 0 on a goal state, else the least action cost."""
        if state & self._goal == self._goal and not state & self._neg:
            return 0.0
        return self._step


def make_estimate(name: str, task: GroundTask, relaxed: RelaxedTask | None = None) -> Callable[[int], float]:
    """Return the estimate called ``name`` for ``task`` (a callable on bitset states)."""
    relaxed = relaxed or RelaxedTask.from_task(task)
    table = {"lmcut": LMCut, "hmax": HMax, "blind": Blind, "hff": HFF}
    try:
        cls = table[name]
    except KeyError:
        raise ValueError(f"unknown estimate {name!r}; known: {', '.join(sorted(table))}") from None
    return cls(task, relaxed)
