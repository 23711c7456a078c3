"""Compute LM-cut, the admissible landmark-cut estimate of the delete relaxation.

Source: M. Helmert and C. Domshlak, "Landmarks, critical paths and
abstractions: what's the difference anyway?", ICAPS 2009 (Section 5, the
LM-cut procedure).

Each round computes h_max under the current costs, with the precondition
choice function pcf(a) = a precondition of largest h_max. In the
justification graph (an edge pcf(a) -> e for every add effect e of a, weighted
cost(a)) the *goal zone* is the set of facts that reach the goal fact through
zero-cost edges. The *cut* is every action whose pcf is reachable from the
state without entering the goal zone and that adds a goal-zone fact. The cut
is a disjunctive action landmark; the least cost m in it is added to the
estimate and subtracted from every action of the cut. The rounds stop when
h_max of the goal is 0. The sum is admissible, and at least h_max, but not
consistent, so a search using it must reopen closed states.

Two details keep it right and finite:

- each h_max pass runs to its fixpoint, not to the first time the goal is
  reached: the pcf of actions beyond the goal shapes the cut;
- costs are exact integers (see ``worker.heuristics.task``), so every round
  brings at least one cut action to exactly zero and the loop ends after at
  most as many rounds as there are actions.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from worker.heuristics.hmax import UNREACHED, HMax
from worker.heuristics.relaxed import RelaxedTask, state_facts
from worker.heuristics.task import GroundTask

__all__ = ["LMCut"]


class LMCut:
    """The LM-cut heuristic of one task; call it on a bitset state."""

    name = "lmcut"

    def __init__(self, task: GroundTask, relaxed: RelaxedTask | None = None) -> None:
        self.task = task
        self.relaxed = relaxed or RelaxedTask.from_task(task)
        self._hmax = HMax(task, self.relaxed)

    def __call__(self, state: int) -> float:
        """Return LM-cut of ``state`` in real cost units (``inf`` when the goal is unreachable)."""
        return self.of_facts(state_facts(state))

    def of_facts(self, facts: Sequence[int]) -> float:
        """Return LM-cut of the state whose true facts are ``facts``."""
        total = self.cuts(facts, [])
        return math.inf if total is None else self.task.to_float(total)

    def cuts(self, facts: Sequence[int], landmarks: list[tuple[int, list[int]]]) -> int | None:
        """Return the integer estimate (None if the goal is unreachable); append each (m, cut) found."""
        r = self.relaxed
        n_facts = r.n_facts
        cost = list(r.cost)
        pcf = [-1] * len(cost)
        pre_of, add, achievers = r.pre_of, r.add, r.achievers
        goal = r.goal_fact
        sources = list(facts)
        sources.append(r.true_fact)
        run = self._hmax.run
        total = 0
        while True:
            value, _ = run(facts, cost, pcf=pcf)
            hg = value[goal]
            if hg >= UNREACHED:
                return None
            if hg == 0:
                return total
            zone = bytearray(n_facts)
            zone[goal] = 1
            stack = [goal]
            while stack:
                g = stack.pop()
                for a in achievers[g]:
                    p = pcf[a]
                    if p >= 0 and cost[a] == 0 and not zone[p]:
                        zone[p] = 1
                        stack.append(p)
            seen = bytearray(n_facts)
            for f in sources:
                seen[f] = 1
            stack = list(sources)
            cut: list[int] = []
            in_cut = set()
            while stack:
                f = stack.pop()
                for a in pre_of[f]:
                    if pcf[a] != f:
                        continue
                    for e in add[a]:
                        if zone[e]:
                            if a not in in_cut:
                                in_cut.add(a)
                                cut.append(a)
                        elif not seen[e]:
                            seen[e] = 1
                            stack.append(e)
            if not cut:
                raise RuntimeError("LM-cut found an empty cut while h_max of the goal is positive")
            m = min(cost[a] for a in cut)
            for a in cut:
                cost[a] -= m
            total += m
            landmarks.append((m, cut))
