"""The pure-Python search core: anytime weighted A* with a resumable ``step(n)``.

One ``PythonCore`` holds a whole search. ``step(n)`` expands at most ``n``
nodes and returns early on an improvement or completion, so a driver can
interleave budgets, cancellation and events, and a compiled core with the same
surface can replace it (see ``worker.engine.driver.open_core``).

Semantics (a compiled core must reproduce them exactly):

- open list: a heap of ``(g + w*h', -g, counter, state, h)`` where ``h'`` is the
  guidance estimate when the space has one, else ``h``; ties go to larger g,
  then to the earlier push. States are never compared.
- a popped entry is stale when its state is closed or its g is above the
  state's best g; a node with ``g + h >= cutoff`` is dropped unexpanded, where
  ``cutoff`` is the incumbent cost less a relative tolerance;
- successors are generated in the space's order; a goal is tested at
  generation and never stored; a successor is a duplicate unless its g beats
  the stored one by more than the tolerance; it is dropped when
  ``g + h >= cutoff``; a closed state reached more cheaply is reopened
  ("reopen", AWA*) or put on INCONS ("defer", ARA*), merged into open at the
  next weight change or when open runs empty;
- the lower bound L = min(incumbent, min g + h over OPEN and INCONS) comes from
  a second, f-ordered heap with lazy deletion, heapified once when the first
  plan arrives (before that, ``lower_bound()`` scans open, or builds the heap
  early once open outgrows a scan);
- once a plan exists, every k-th expansion (k = round(1/bound_share)) takes the
  open node of least g + h, which is what raises L under a large weight;
- schedule "decreasing": after each improvement w := max(1, w - weight_step),
  open re-keyed, INCONS merged.
"""

from __future__ import annotations

import heapq
import math
from array import array
from typing import Any

from worker.engine.paths import rebuild_path
from worker.engine.types import Path, SearchConfig, StepStatus
from worker.exceptions import SearchError

INF = math.inf
# Before the first plan, L is found by scanning the open list while it is at
# most this long; past it the f-ordered heap is built and kept instead.
_SCAN_LIMIT = 100_000


class _DefaultDict(dict):
    """A dict that answers a default for missing keys without storing it."""

    __slots__ = ("default",)

    def __init__(self, default: Any) -> None:
        super().__init__()
        self.default = default

    def __missing__(self, key: Any) -> Any:
        return self.default


class _GoalTest:
    """Make ``state in goals`` call the space's ``is_goal`` when it has no goal set."""

    __slots__ = ("is_goal",)

    def __init__(self, is_goal: Any) -> None:
        self.is_goal = is_goal

    def __contains__(self, state: Any) -> bool:
        return bool(self.is_goal(state))


class PythonCore:
    """Anytime weighted A* over any ``SearchSpace``, resumable in slices."""

    backend = "python"

    def __init__(self, space: Any, config: SearchConfig) -> None:
        if config.weight < 1.0:
            raise SearchError("weight must be at least 1")
        self.space = space
        self.config = config
        self.weight = float(config.weight)
        self.tol = float(config.g_tolerance)
        self.expansions = 0
        self.generated = 0
        self.reopened = 0
        self.stored = 0
        self.incumbent = INF
        self._cutoff = INF
        self._path: Path | None = None
        self._done = False
        self._counter = 0
        self._ticks = 0
        self._share_every = round(1.0 / config.bound_share) if config.bound_share > 0 else 0
        self._fheap: list[tuple[float, int, Any, float]] | None = None
        self._incons: dict[Any, float] = {}
        size = getattr(space, "dense_size", None)
        if isinstance(size, int) and size > 0:
            self._g: Any = array("d", [INF]) * size
            self._parent: Any = array("q", [-1]) * size
            self._closed: Any = bytearray(size)
        else:
            self._g = _DefaultDict(INF)
            self._parent = {}
            self._closed = _DefaultDict(0)
        self._open: list[tuple[float, float, int, Any, float]] = []
        s0 = space.initial_state()
        self._start = s0
        if space.is_goal(s0):
            self._set_incumbent(0.0, Path((s0,), (), ()))
            self._done = True
            self._pending_improvement = True
            return
        self._pending_improvement = False
        h0 = float(space.heuristic(s0))
        if h0 < INF:
            self._g[s0] = 0.0
            self.stored = 1
            self._push(s0, 0.0, h0)

    # -- public surface shared with compiled cores ---------------------------

    def step(self, n: int) -> StepStatus:
        """Expand at most ``n`` nodes; return on budget, improvement or completion."""
        if self._pending_improvement:
            self._pending_improvement = False
            return StepStatus.IMPROVED
        if self._done:
            return StepStatus.DONE
        status = self._run(n)
        if status is not StepStatus.DONE and self._fheap is not None and self.lower_bound() >= self._cutoff:
            self._done = True
            return StepStatus.IMPROVED if status is StepStatus.IMPROVED else StepStatus.DONE
        return status

    def lower_bound(self) -> float:
        """Return L = min(incumbent, least g + h over OPEN and INCONS)."""
        if self._done and not self._pending_improvement:
            return self.incumbent
        fheap = self._fheap
        if fheap is None:
            if len(self._open) <= _SCAN_LIMIT:
                return min(self.incumbent, self._scan_open_min_f())
            # A long wait for the first plan: keep the f-heap from now on
            # rather than scan a huge open list at every report.
            self._build_fheap()
            fheap = self._fheap
        g, closed, incons = self._g, self._closed, self._incons
        while fheap:
            f, _, s, gs = fheap[0]
            if gs <= g[s] and (not closed[s] or s in incons):
                return min(self.incumbent, f)
            heapq.heappop(fheap)
        return self.incumbent

    def incumbent_path(self) -> Path | None:
        """Return the best plan found so far, or None."""
        return self._path

    @property
    def finished(self) -> bool:
        """True once nothing is left to search."""
        return self._done

    # -- internals -------------------------------------------------------------

    def _push(self, s: Any, g: float, h: float) -> None:
        guide = self.space.guidance
        hk = float(guide(s)) if guide is not None else h
        c = self._counter
        self._counter = c + 1
        heapq.heappush(self._open, (g + self.weight * hk, -g, c, s, h))
        if self._fheap is not None:
            heapq.heappush(self._fheap, (g + h, c, s, g))

    def _scan_open_min_f(self) -> float:
        g, closed = self._g, self._closed
        best = INF
        for _, ng, _, s, h in self._open:
            if not closed[s] and -ng <= g[s] and h - ng < best:
                best = h - ng
        for s, h in self._incons.items():
            best = min(best, g[s] + h)
        return best

    def _set_incumbent(self, cost: float, path: Path) -> None:
        self.incumbent = cost
        self._cutoff = cost - self.tol * abs(cost)
        self._path = path

    def _rebuild_path(self, s: Any, t: Any) -> Path:
        """Walk parent pointers from ``s`` back to the start, then add ``t``."""
        parent = self._parent
        chain = [t, s]
        limit = len(parent) + 2
        while s != self._start:
            s = parent[s]
            if (isinstance(s, int) and s < 0 and isinstance(parent, array)) or len(chain) > limit:
                raise SearchError("broken parent chain while rebuilding a plan")
            chain.append(s)
        chain.reverse()
        return rebuild_path(self.space, chain)

    def _build_fheap(self) -> None:
        """Heapify the live OPEN and INCONS entries by g + h, once; pushes keep it current."""
        g, closed = self._g, self._closed
        fheap = [(h - ng, c, s, -ng) for _, ng, c, s, h in self._open if not closed[s] and -ng <= g[s]]
        for s, h in self._incons.items():
            fheap.append((g[s] + h, self._counter, s, g[s]))
            self._counter += 1
        heapq.heapify(fheap)
        self._fheap = fheap

    def _after_improvement(self) -> None:
        if self._fheap is None:
            self._build_fheap()
        cfg = self.config
        if cfg.schedule == "decreasing" and self.weight > 1.0:
            self._reweight(max(1.0, self.weight - cfg.weight_step))

    def _reweight(self, new_w: float) -> None:
        """Change the weight, re-key the open list and merge INCONS into it."""
        old_w, g, closed = self.weight, self._g, self._closed
        guided = self.space.guidance is not None
        entries = []
        for key, ng, c, s, h in self._open:
            if closed[s] or -ng > g[s]:
                continue
            hk = (key + ng) / old_w if guided else h
            entries.append((-ng + new_w * hk, ng, c, s, h))
        self.weight = new_w
        self._open = entries
        heapq.heapify(entries)
        self._merge_incons()

    def _merge_incons(self) -> None:
        closed, g = self._closed, self._g
        # Emptied in place: the search loop holds a reference to this dict.
        items = list(self._incons.items())
        self._incons.clear()
        for s, h in items:
            closed[s] = 0
            self._push(s, g[s], h)

    def _pop_min_f(self) -> tuple[Any, float, float] | None:
        """Pop the live node of least g + h from the f-heap (bound-raising expansion)."""
        fheap, g, closed, incons = self._fheap, self._g, self._closed, self._incons
        assert fheap is not None
        while fheap:
            f, _, s, gs = heapq.heappop(fheap)
            if gs <= g[s]:
                if not closed[s]:
                    return s, gs, f
                if s in incons:
                    del incons[s]
                    return s, gs, f
        return None

    def _run(self, n: int) -> StepStatus:
        space = self.space
        succ, heur, is_goal, guide = space.successors, space.heuristic, space.is_goal, space.guidance
        g_tab, parent, closed = self._g, self._parent, self._closed
        open_ = self._open
        heappush, heappop = heapq.heappush, heapq.heappop
        keep = 1.0 - self.tol
        w = self.weight
        cutoff = self._cutoff
        fheap = self._fheap
        defer = self.config.reopen == "defer"
        incons = self._incons
        share = self._share_every if self.incumbent < INF else 0
        counter = self._counter
        goals = getattr(space, "goal_set", None)
        if goals is None:
            goals = _GoalTest(is_goal)
        ticks = self._ticks
        stored = self.stored
        generated = 0
        done = 0
        improved = False
        try:
            while done < n:
                s = None
                if share:
                    ticks += 1
                    if ticks % share == 0:
                        picked = self._pop_min_f()
                        if picked is not None:
                            s, g, f = picked
                if s is None:
                    if not open_:
                        if incons:
                            self._counter = counter
                            self._merge_incons()
                            counter = self._counter
                            open_ = self._open
                            continue
                        self._done = True
                        break
                    _, ng, _, s, hs = heappop(open_)
                    g = -ng
                    if closed[s] or g > g_tab[s]:
                        continue
                    f = g + hs
                if f >= cutoff:
                    continue
                closed[s] = 1
                done += 1
                for t, c, a in succ(s):
                    generated += 1
                    g2 = g + c
                    if g2 >= cutoff:
                        continue
                    gold = g_tab[t]
                    if g2 >= gold * keep:
                        continue
                    if t in goals:
                        path = self._rebuild_path(s, t)
                        self._set_incumbent(min(g2, path.cost), path)
                        cutoff = self._cutoff
                        improved = True
                        continue
                    ht = heur(t)
                    ft = g2 + ht
                    if ft >= cutoff:
                        continue
                    g_tab[t] = g2
                    parent[t] = s
                    if gold == INF:
                        stored += 1
                    elif closed[t]:
                        if defer:
                            incons[t] = ht
                            if fheap is not None:
                                heappush(fheap, (ft, counter, t, g2))
                                counter += 1
                            continue
                        closed[t] = 0
                        self.reopened += 1
                    if guide is None:
                        heappush(open_, (g2 + w * ht, -g2, counter, t, ht))
                    else:
                        heappush(open_, (g2 + w * guide(t), -g2, counter, t, ht))
                    if fheap is not None:
                        heappush(fheap, (ft, counter, t, g2))
                    counter += 1
                if improved:
                    break
        finally:
            self._counter = counter
            self._ticks = ticks
            self.stored = stored
            self.expansions += done
            self.generated += generated
        if improved:
            self._after_improvement()
            return StepStatus.IMPROVED
        return StepStatus.DONE if self._done else StepStatus.BUDGET
