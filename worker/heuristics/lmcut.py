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
  reached: the pcf of actions beyond the goal shapes the cut; after the first
  pass the values are brought down incrementally from the cut actions (costs
  only fall), which gives the same fixpoint without redoing every fact;
- costs are exact integers (see ``worker.heuristics.task``), so every round
  brings at least one cut action to exactly zero and the loop ends after at
  most as many rounds as there are actions.
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Sequence

from worker.heuristics.hmax import UNREACHED, HMax
from worker.heuristics.relaxed import RelaxedEstimate, RelaxedTask
from worker.heuristics.task import GroundTask

__all__ = ["LMCut"]


class LMCut(RelaxedEstimate):
    """The LM-cut heuristic of one task; call it on a bitset state."""

    name = "lmcut"

    def __init__(self, task: GroundTask, relaxed: RelaxedTask | None = None) -> None:
        super().__init__(task, relaxed)
        self._hmax = HMax(task, self.relaxed)

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
        add, achievers = r.add, r.achievers
        goal = r.goal_fact
        sources = list(facts)
        sources.append(r.true_fact)
        value, _ = self._hmax.run(facts, cost, pcf=pcf)
        if value[goal] >= UNREACHED:
            return None
        # by_pcf[f]: the actions whose precondition choice is f (the justification graph's out-edges).
        by_pcf: list[list[int]] = [[] for _ in range(n_facts)]
        for a, p in enumerate(pcf):
            if p >= 0:
                by_pcf[p].append(a)
        total = 0
        while value[goal] > 0:
            zone = bytearray(n_facts)
            zone[goal] = 1
            stack = [goal]
            while stack:
                for a in achievers[stack.pop()]:
                    p = pcf[a]
                    if p >= 0 and not cost[a] and not zone[p]:
                        zone[p] = 1
                        stack.append(p)
            seen = bytearray(n_facts)
            for f in sources:
                seen[f] = 1
            stack = list(sources)
            cut: list[int] = []
            in_cut = bytearray(len(cost))
            while stack:
                for a in by_pcf[stack.pop()]:
                    for e in add[a]:
                        if zone[e]:
                            if not in_cut[a]:
                                in_cut[a] = 1
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
            self._lower(value, pcf, by_pcf, cost, cut)
        return total

    def _lower(self, value: list[int], pcf: list[int], by_pcf: list[list[int]], cost: list[int],
               cut: list[int]) -> None:
        """Bring h_max values and precondition choices up to date after the cut actions got cheaper.

        Costs only fall, so values only fall: a decrease-only Dijkstra from the
        cut actions' effects reaches the new fixpoint without redoing the rest.
        Reachability does not depend on costs, so unreachable actions stay so.
        """
        r = self.relaxed
        pre, add = r.pre, r.add
        heap: list[tuple[int, int]] = []
        push, pop = heapq.heappush, heapq.heappop
        for a in cut:
            nv = value[pcf[a]] + cost[a]
            for e in add[a]:
                if nv < value[e]:
                    value[e] = nv
                    push(heap, (nv, e))
        while heap:
            v, f = pop(heap)
            if v != value[f]:
                continue
            # Only actions whose largest precondition was f can get cheaper.
            moved = []
            for a in by_pcf[f]:
                best, bv = f, v
                for q in pre[a]:
                    if value[q] > bv:
                        best, bv = q, value[q]
                if best != f:
                    pcf[a] = best
                    by_pcf[best].append(a)
                    moved.append(a)
                nv = bv + cost[a]
                for e in add[a]:
                    if nv < value[e]:
                        value[e] = nv
                        push(heap, (nv, e))
            if moved:
                keep = set(moved)
                by_pcf[f] = [a for a in by_pcf[f] if a not in keep]
