"""Compute h_max, the admissible max-cost estimate of the delete relaxation.

Source: B. Bonet and H. Geffner, "Planning as heuristic search", Artificial
Intelligence 129(1-2):5-33, 2001 (the additive and max costs of Section 4).

h_max(f) = 0 for a fact true in the state, else the least over the actions
adding f of cost(a) + max over a's preconditions of h_max(p). The estimate of
a state is h_max(GOAL), the value of the artificial goal fact (see
``worker.heuristics.relaxed``). It never exceeds the real cost to the goal, and
it is consistent: one real action lowers it by at most its own cost.

The fixpoint is a generalised Dijkstra over facts with exact integer costs:
each action keeps a counter of unreached preconditions; when it hits zero the
fact just popped carries the largest value among them (facts come off the
heap in non-decreasing order), so the action's value is that fact's value
plus its cost. That last fact is the action's *precondition choice*, which
LM-cut needs (``HMax.run`` fills it in for every reachable action).
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Sequence

from worker.heuristics.relaxed import RelaxedEstimate

__all__ = ["HMax", "UNREACHED"]

# A value above any reachable cost; an int so the arithmetic stays exact.
UNREACHED = 1 << 62


class HMax(RelaxedEstimate):
    """The h_max heuristic of one task; call it on a bitset state."""

    name = "hmax"

    def of_facts(self, facts: Sequence[int]) -> float:
        """Return h_max of the state whose true facts are ``facts``."""
        r = self.relaxed
        value, _ = self.run(facts, r.cost, stop_at_goal=True)
        v = value[r.goal_fact]
        return math.inf if v >= UNREACHED else self.task.to_float(v)

    def run(self, facts: Sequence[int], cost: Sequence[int], *, stop_at_goal: bool = False,
            pcf: list[int] | None = None) -> tuple[list[int], list[int] | None]:
        """Return the h_max value of every fact (``UNREACHED`` if unreachable) under ``cost``.

        With ``pcf`` given (a list with one slot per action) the precondition
        choice of every reachable action is written into it and every slot of
        an unreachable action is set to -1; the fixpoint then runs to the end,
        since LM-cut needs the values past the goal too.
        """
        r = self.relaxed
        value = [UNREACHED] * r.n_facts
        unsat = r.npre[:]
        pre_of, add = r.pre_of, r.add
        goal = r.goal_fact
        heap = [(0, r.true_fact)]
        value[r.true_fact] = 0
        for f in facts:
            value[f] = 0
            heap.append((0, f))
        heapq.heapify(heap)
        pop, push = heapq.heappop, heapq.heappush
        done = bytearray(r.n_facts)
        early = stop_at_goal and pcf is None
        if pcf is not None:
            for i in range(len(pcf)):
                pcf[i] = -1
        while heap:
            v, f = pop(heap)
            if done[f]:
                continue
            done[f] = 1
            if early and f == goal:
                break
            for a in pre_of[f]:
                left = unsat[a] - 1
                unsat[a] = left
                if left == 0:
                    if pcf is not None:
                        pcf[a] = f
                    nv = v + cost[a]
                    for g in add[a]:
                        if nv < value[g]:
                            value[g] = nv
                            push(heap, (nv, g))
        return value, pcf
