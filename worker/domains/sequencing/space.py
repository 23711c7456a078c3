"""The search space of a sequencing problem: states, successors, dominance and the bound.

States. Tasks are numbered 1..n (0 is the start); ``mask`` has bit i - 1 set
for each task i done, and ``code = mask * (n + 1) + last``.

- Without binding windows (no due, and no release under ``makespan``) the
  clock cannot change what is allowed or what it costs, so the state is the
  int ``code`` and the engine's g does the rest (plain Held-Karp states).
- ``makespan`` with windows: ``(code, clock)``. The step cost is the time
  the clock advances, so g equals the clock on every path.
- ``setup`` with dues: ``(code, clock, cost)``: g equals ``cost``.

A closed tour ends in the state with every task done and ``last`` = 0 (the
start), reached by the ``"return"`` action; an open sequence ends as soon as
every task is done.

Dominance. The engine merges equal states only. Of two timed states with
the same ``code``, one with cost <= and clock <= the other's (one strictly)
*dominates* it (under ``makespan`` cost and clock coincide, so the
earlier clock wins): every completion of the dominated one is also feasible from
the dominating one (tasks start at max(arrival, release), so an earlier
clock never starts anything later, and no window is missed that the later
clock meets) and costs no more. So ``successors`` keeps, per ``code``, the
Pareto front of (cost, clock) of what it has yielded, and drops a new state
that an entry strictly dominates. This is safe: the dominating state was
yielded, hence either stored by the engine (and then expanded, or pruned
because g + h reaches the incumbent, in which case, h being admissible, no
completion of it, and so none of the dominated state, beats the incumbent),
or dropped as a duplicate of an equal state, or itself dominated later by a
state that inherits the same argument. The lower bound stays sound for the
same reason: the best completion of a dropped state is matched by one that
stays represented on open. States that were yielded and only later
dominated are remembered, so replaying a stored path (the engine does that
to rebuild a plan) sees the same successors again.

Guidance. The tree bound knows nothing of windows, so with windows the open
list is ordered by a pilot instead (``guidance``, inadmissible, ordering
only): the cost of finishing from the state by always starting next the task
that can start soonest. Without windows the tree bound orders better and
the pilot is not used (measured on TSPLIB instances of 48 to 70 cities).

A state that can no longer meet some remaining due (even by the quickest
changeover chain) is never yielded, so a problem whose windows or
precedence admit no order ends with the open list exhausted: proven
infeasible. A cheap check over the precedence graph catches many such
problems before the first expansion.
"""

from __future__ import annotations

import logging
import math
from collections.abc import Iterator, Sequence
from typing import Any

from worker.domains.sequencing.heuristic import ChangeoverBound, all_pairs_shortest
from worker.domains.sequencing.model import RETURN, Objective, SequencingProblem, due_slack

__all__ = ["SequencingSpace", "DENSE_MAX_TASKS"]

logger = logging.getLogger(__name__)

# Up to this many tasks (without windows) the engine may keep its tables in
# flat arrays of (n + 1) * 2**n slots: 53 k slots at 12; above that the few
# states a good bound stores do not pay for a table of every possible one.
DENSE_MAX_TASKS = 12
INF = math.inf


class SequencingSpace:
    """A sequencing problem as a search space (see the module doc for states and dominance)."""

    guidance = None

    def __init__(self, problem: SequencingProblem) -> None:
        tasks = problem.tasks
        n = len(tasks)
        n1 = n + 1
        self.problem = problem
        self.n1 = n1
        self.full = (1 << n) - 1
        self.ids = [RETURN] + [t.id for t in tasks]
        self.index = {t.id: i + 1 for i, t in enumerate(tasks)}
        self.c = [list(row) for row in problem.matrix]
        self.dur = [0.0] + [t.duration for t in tasks]
        self.rel = [0.0] + [t.release or 0.0 for t in tasks]
        self.due_lim = [INF] + [INF if t.due is None else t.due + due_slack(t.due) for t in tasks]
        self.pred = [0] * n1
        for a, b in problem.precedence:
            self.pred[self.index[b]] |= 1 << (self.index[a] - 1)
        self.closed = problem.return_to_start
        self.makespan = problem.objective is Objective.MAKESPAN
        has_due = any(t.due is not None for t in tasks)
        self.has_release = any(t.release for t in tasks)
        self.timed = has_due or (self.makespan and self.has_release)
        self.due_tasks = [i for i in range(1, n1) if self.due_lim[i] < INF]
        self._step_extra = self.dur if self.makespan else [0.0] * n1
        # The bound's penalties and the shortest changeover chains take up to a
        # few seconds at the task cap: they are made on first use, in the
        # worker, not while a request is being accepted.
        self.bound: ChangeoverBound | None = None
        self.dstar: list[list[float]] | None = None
        self._dead = False
        values = [v for row in self.c for v in row]
        if self.makespan:
            values += self.dur + self.rel
        self.integral = all(float(v).is_integer() for v in values)
        self._best: dict[int, float] = {}
        self._fronts: dict[int, list[tuple[float, float]]] = {}
        self._retired: set[Any] = set()
        # a stuck pilot scores worse than any finished one: more than any plan can cost
        self._stuck = sum(map(max, self.c)) + sum(self.dur) + max(self.rel) + 1.0
        self._near: list[list[int]] = []
        self.guidance = self._pilot if self.timed else None
        if not self.timed and n <= DENSE_MAX_TASKS:
            self.dense_size = (1 << n) * n1

    def prepare(self) -> None:
        """Build the lower bound and the shortest changeover chains (idempotent)."""
        if self.bound is not None:
            return
        if self.timed:
            # Travel between points obeys the triangle inequality already (the
            # start without a location is never passed through); a setup matrix
            # need not, and then the quickest chain can beat the direct entry.
            metric = self.problem.setup is None
            self.dstar = self.c if metric else all_pairs_shortest(self.c)
            self._dead = not self._windows_possible()
            tasks = range(1, self.n1)
            self._near = [sorted(tasks, key=row.__getitem__) for row in self.c]
        self.bound = ChangeoverBound(self.c, self.closed, node_cost=self.dur if self.makespan else None)

    # -- the SearchSpace protocol ----------------------------------------------

    def initial_state(self) -> Any:
        """Return the start: nothing done, at the start, clock 0."""
        self.prepare()
        if not self.timed:
            return 0
        return (0, 0.0) if self.makespan else (0, 0.0, 0.0)

    def is_goal(self, state: Any) -> bool:
        """Return True when every task is done (and, for a closed tour, the return made)."""
        code = state if not self.timed else state[0]
        if self.closed:
            return code == self.full * self.n1
        return code // self.n1 == self.full

    def successors(self, state: Any) -> Iterator[tuple[Any, float, str]]:
        """Yield the next tasks that precedence and windows allow, with their step cost."""
        if not self.timed:
            yield from self._plain_successors(state)
        else:
            yield from self._timed_successors(state)

    def heuristic(self, state: Any) -> float:
        """Return an admissible lower bound on the objective still to pay from ``state``."""
        if self.bound is None:
            self.prepare()
        if self._dead:
            return INF
        n1 = self.n1
        code = state if not self.timed else state[0]
        last, mask = code % n1, code // n1
        h = self.bound(last, mask)
        if self.makespan and self.has_release and self.timed:
            h = max(h, self._release_bound(last, mask, state[1]))
        if self.integral:
            h = math.ceil(h - 1e-6)
        return h

    def render_plan(self, states: Sequence[Any], actions: Sequence[Any], costs: Sequence[float]) -> list[dict]:
        """Return the steps of a plan; see ``timeline``."""
        return self.timeline(actions)

    # -- plan timing -----------------------------------------------------------

    def timeline(self, actions: Sequence[str]) -> list[dict]:
        """Replay task ids (and a final ``"return"``) under the timing rule into plan steps.

        Each step is ``{"action": id, "cost": c, "state": {"task": id, "start": t,
        "end": t, "changeover": c}}``: the changeover into the task, when it
        starts (max of arrival and release) and ends. The step cost is the
        changeover under ``setup`` and the time the clock advanced (changeover,
        waiting, duration) under ``makespan``. The return step has
        ``"task": null`` and start = end = the arrival back at the start.
        """
        steps: list[dict] = []
        clock, last = 0.0, 0
        for act in actions:
            r = 0 if act == RETURN else self.index[act]
            change = self.c[last][r]
            start = max(clock + change, self.rel[r])
            end = start + self.dur[r]
            cost = end - clock if self.makespan else change
            steps.append(
                {
                    "action": act,
                    "cost": cost,
                    "state": {"task": None if r == 0 else act, "start": start, "end": end, "changeover": change},
                }
            )
            clock, last = end, r
        return steps

    # -- successors ------------------------------------------------------------

    def _plain_successors(self, code: int) -> Iterator[tuple[int, float, str]]:
        n1 = self.n1
        last, mask = code % n1, code // n1
        row = self.c[last]
        if mask == self.full:
            if self.closed and last:
                yield self.full * n1, row[0], RETURN
            return
        extra, pred, ids = self._step_extra, self.pred, self.ids
        for r in range(1, n1):
            bit = 1 << (r - 1)
            if mask & bit or pred[r] & ~mask:
                continue
            yield (mask | bit) * n1 + r, row[r] + extra[r], ids[r]

    def _timed_successors(self, state: tuple) -> Iterator[tuple[tuple, float, str]]:
        if self.dstar is None:
            self.prepare()
        n1, full = self.n1, self.full
        code, clock = state[0], state[1]
        last, mask = code % n1, code // n1
        row = self.c[last]
        makespan = self.makespan
        if mask == full:
            if self.closed and last:
                back = row[0]
                goal = full * n1
                yield ((goal, clock + back) if makespan else (goal, clock + back, state[2] + back)), back, RETURN
            return
        rel, dur, due_lim, pred, ids = self.rel, self.dur, self.due_lim, self.pred, self.ids
        for r in range(1, n1):
            bit = 1 << (r - 1)
            if mask & bit or pred[r] & ~mask:
                continue
            arrive = clock + row[r]
            end = (rel[r] if rel[r] > arrive else arrive) + dur[r]
            if end > due_lim[r]:
                continue
            nmask = mask | bit
            ncode = nmask * n1 + r
            if makespan:
                nxt: tuple = (ncode, end)
                cost = end - clock
            else:
                cost = row[r]
                nxt = (ncode, end, state[2] + cost)
            if nmask != full:
                if self._misses_a_due(r, end, nmask) or not self._undominated(nxt):
                    continue
            yield nxt, cost, ids[r]

    def _misses_a_due(self, at: int, clock: float, mask: int) -> bool:
        """True when some remaining task can no longer end by its due."""
        reach = self.dstar[at]
        rel, dur, due_lim = self.rel, self.dur, self.due_lim
        for v in self.due_tasks:
            if not (mask >> (v - 1)) & 1:
                arrive = clock + reach[v]
                if (rel[v] if rel[v] > arrive else arrive) + dur[v] > due_lim[v]:
                    return True
        return False

    def _undominated(self, nxt: tuple) -> bool:
        """Record ``nxt`` on its Pareto front; False when an entry strictly dominates it."""
        if self.makespan:
            code, clock = nxt
            best = self._best.get(code)
            if best is None or clock < best:
                if best is not None:
                    self._retired.add((code, best))
                self._best[code] = clock
                return True
            return clock == best or nxt in self._retired
        code, clock, cost = nxt
        front = self._fronts.get(code)
        if front is None:
            self._fronts[code] = [(cost, clock)]
            return True
        for fc, ft in front:
            if fc <= cost and ft <= clock:
                return (fc == cost and ft == clock) or nxt in self._retired
        keep = []
        for fc, ft in front:
            if cost <= fc and clock <= ft:
                self._retired.add((code, ft, fc))
            else:
                keep.append((fc, ft))
        keep.append((cost, clock))
        self._fronts[code] = keep
        return True

    def _pilot(self, state: tuple) -> float:
        """Return the cost of finishing from ``state`` by starting next whatever can start soonest."""
        n1, full, c, rel, dur, due_lim, pred = self.n1, self.full, self.c, self.rel, self.dur, self.due_lim, self.pred
        near = self._near
        code, clock = state[0], state[1]
        last, mask = code % n1, code // n1
        begin, changes = clock, 0.0
        while mask != full:
            row = c[last]
            best, best_start = 0, INF
            # candidates by rising changeover: once arrival alone is no sooner, nothing later is
            for r in near[last]:
                start = clock + row[r]
                if start >= best_start:
                    break
                if mask >> (r - 1) & 1 or pred[r] & ~mask:
                    continue
                if rel[r] > start:
                    start = rel[r]
                if start < best_start and start + dur[r] <= due_lim[r]:
                    best, best_start = r, start
            if not best:
                left = self.n1 - 1 - mask.bit_count()
                return (clock - begin if self.makespan else changes) + self._stuck * left
            changes += row[best]
            clock = best_start + dur[best]
            last = best
            mask |= 1 << (best - 1)
        if self.closed and code != full * n1:
            changes += c[last][0]
            clock += c[last][0]
        return clock - begin if self.makespan else changes

    # -- bounds with time --------------------------------------------------------

    def _release_bound(self, last: int, mask: int, clock: float) -> float:
        """Makespan still to come: no remaining task ends before its release allows."""
        reach = self.dstar[last]
        rel, dur = self.rel, self.dur
        rest = self.bound.remaining(mask)
        if not rest:
            return self.c[last][0] if self.closed else 0.0
        latest = max(max(clock + reach[r], rel[r]) + dur[r] for r in rest)
        if self.closed:
            latest += min(self.dstar[r][0] for r in rest)
        return latest - clock

    def _windows_possible(self) -> bool:
        """Return False when precedence chains alone already make some due unreachable."""
        n1, d = self.n1, self.dstar
        order = self._topological()
        earliest = [0.0] * n1
        for v in order:
            t = max(d[0][v], self.rel[v])
            for u in range(1, n1):
                if self.pred[v] >> (u - 1) & 1:
                    t = max(t, earliest[u] + self.dur[u] + d[u][v], self.rel[v])
            earliest[v] = t
            if t + self.dur[v] > self.due_lim[v]:
                logger.debug("task %s cannot meet its due after its predecessors", self.ids[v])
                return False
        return True

    def _topological(self) -> list[int]:
        left = set(range(1, self.n1))
        order: list[int] = []
        done = 0
        while left:
            ready = [v for v in left if not self.pred[v] & ~done]
            if not ready:  # a cycle; the model refuses those, so only a guard
                break
            for v in sorted(ready):
                order.append(v)
                left.discard(v)
                done |= 1 << (v - 1)
        return order
