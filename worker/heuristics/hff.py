"""Compute h_FF, the cost of a relaxed plan: an inadmissible estimate that orders the search.

Sources: J. Hoffmann and B. Nebel, "The FF planning system: fast plan
generation through heuristic search", JAIR 14:253-302, 2001 (the relaxed-plan
estimate); E. Keyder and H. Geffner, "Heuristics for planning with action
costs revisited", ECAI 2008 (the cost-sensitive relaxed plan built from the
best supporters of h_add).

h_add(f) is 0 for a fact true in the state, else the least over the actions
adding f of cost(a) + the sum of h_add over a's preconditions. Each fact's
*best supporter* is the action reaching that least value. Going back from the
goal facts through best supporters collects a relaxed plan, each action once;
the estimate is the sum of its costs. It can exceed the real cost, so it is
only ever the space's ``guidance`` (the order of the open list), never the
bound or the pruning test.
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Sequence

from worker.heuristics.hmax import UNREACHED
from worker.heuristics.relaxed import RelaxedEstimate

__all__ = ["HFF"]


class HFF(RelaxedEstimate):
    """The cost-sensitive relaxed-plan estimate of one task; call it on a bitset state."""

    name = "hff"

    def of_facts(self, facts: Sequence[int]) -> float:
        """Return the relaxed plan's cost for the state whose true facts are ``facts``."""
        plan = self.relaxed_plan(facts)
        if plan is None:
            return math.inf
        cost = self.relaxed.cost
        return self.task.to_float(sum(cost[a] for a in plan))

    def relaxed_plan(self, facts: Sequence[int]) -> list[int] | None:
        """Return the action ids of a relaxed plan (goal action excluded), or None if none exists."""
        r = self.relaxed
        value = [UNREACHED] * r.n_facts
        supporter = [-1] * r.n_facts
        unsat = r.npre[:]
        acc = [0] * len(unsat)
        pre_of, add, cost = r.pre_of, r.add, r.cost
        goal = r.goal_fact
        heap = [(0, r.true_fact)]
        value[r.true_fact] = 0
        for f in facts:
            value[f] = 0
            heap.append((0, f))
        heapq.heapify(heap)
        pop, push = heapq.heappop, heapq.heappush
        done = bytearray(r.n_facts)
        while heap:
            v, f = pop(heap)
            if done[f]:
                continue
            done[f] = 1
            if f == goal:
                break
            for a in pre_of[f]:
                acc[a] += v
                left = unsat[a] - 1
                unsat[a] = left
                if left == 0:
                    nv = acc[a] + cost[a]
                    for g in add[a]:
                        if nv < value[g]:
                            value[g] = nv
                            supporter[g] = a
                            push(heap, (nv, g))
        if not done[goal]:
            return None
        plan: list[int] = []
        marked = bytearray(len(unsat))
        pre = r.pre
        stack = list(pre[r.goal_action])
        while stack:
            f = stack.pop()
            a = supporter[f]
            if a < 0 or marked[a]:
                continue  # true in the state (or TRUE), or already in the plan
            marked[a] = 1
            plan.append(a)
            stack.extend(pre[a])
        return plan
