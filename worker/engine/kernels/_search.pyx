# cython: language_level=3, boundscheck=False, wraparound=False, cdivision=True, initializedcheck=False
"""Run anytime weighted A* over a domain kernel's node tables, without the GIL.

``SearchKernel`` is the compiled twin of ``worker.engine.core.PythonCore``: the
same open-list order, staleness tests, pruning, goal test at generation,
reopening or deferral, bound-raising share, f-heap for the lower bound and
weight schedule, step for step, so both backends expand the same nodes in the
same order and report the same improvements. Only the plan rebuild goes back
to Python (with the GIL), once per improvement, through the space's own
successors, exactly as the pure-Python core does it.
"""

import builtins

from libc.math cimport INFINITY, fabs
from libc.stdint cimport int32_t, int64_t

from worker.engine.kernels._heap cimport (
    FItem, OpenItem, f_heapify, f_pop, f_push, f_reserve, open_heapify, open_pop, open_push,
)
from worker.engine.kernels._incons cimport incons_add, incons_at, incons_clear, incons_has, incons_remove

from worker.engine.paths import rebuild_path
from worker.engine.types import Path, StepStatus
from worker.exceptions import SearchError

cdef double INF = INFINITY
# The f-heap is swept of stale entries when it has doubled since the last sweep
# and holds at least this many.
cdef Py_ssize_t F_COMPACT_MIN = 1 << 16


cdef class SearchKernel(SearchTables):
    """Hold one whole search; ``step(n)`` resumes it for at most ``n`` expansions."""

    backend = "compiled"

    def __cinit__(self, *args, **kwargs):
        self.fheap_compact_at = F_COMPACT_MIN

    cdef int _init_search(self, object space, object config, int64_t nodes) except -1:
        if config.weight < 1.0:
            raise SearchError("weight must be at least 1")
        self.space = space
        self.config = config
        self.weight = float(config.weight)
        self.weight_step = float(config.weight_step)
        self.tol = float(config.g_tolerance)
        self.keep = 1.0 - self.tol
        self.defer = config.reopen == "defer"
        self.decreasing = config.schedule == "decreasing"
        self.share_every = builtins.round(1.0 / config.bound_share) if config.bound_share > 0 else 0
        self.expansions = self.generated = self.reopened = self.stored = 0
        self.incumbent = INF
        self.cutoff = INF
        self.path = None
        self.done = self.pending = self.has_fheap = False
        self.ticks = self.counter = 0
        self.start_node = -1
        self.incons.len = self.incons.cap = self.incons.live = 0
        if self._grow_nodes(nodes) < 0:
            raise MemoryError("no memory for the search tables")
        return 0

    cdef int _seed(self, object s0) except -1:
        """Seed the search with the start state ``s0``, already in buffer slot 0 (a goal: a cost-0 plan)."""
        cdef int64_t node
        cdef double h0
        self.start_state = s0
        if self.space.is_goal(s0):
            self._set_incumbent(0.0, Path((s0,), (), ()))
            self.done = True
            self.pending = True
            return 0
        h0 = float(self.space.heuristic(s0))
        if h0 < INF:
            self.sh[0] = h0
            node = self._store(0)
            if node < 0:
                raise MemoryError("no memory for the search tables")
            self.start_node = node
            self.g[node] = 0.0
            self.h[node] = h0
            self.stored = 1
            if open_push(&self.open, 0.0 + self.weight * h0, 0.0, 0, node) < 0:
                raise MemoryError("no memory for the open list")
            self.counter = 1
        return 0

    # -- public surface shared with the pure-Python core ------------------------

    def step(self, int64_t n):
        """Expand at most ``n`` nodes; return on budget, improvement or completion."""
        cdef int status
        if self.pending:
            self.pending = False
            return StepStatus.IMPROVED
        if self.done:
            return StepStatus.DONE
        status = self._run(n)
        if status != 2 and self.has_fheap and self.lower_bound() >= self.cutoff:
            self.done = True
            return StepStatus.IMPROVED if status == 1 else StepStatus.DONE
        return (StepStatus.BUDGET, StepStatus.IMPROVED, StepStatus.DONE)[status]

    def lower_bound(self):
        """Return L = min(incumbent, least g + h over OPEN and INCONS)."""
        cdef FItem* top
        if self.done and not self.pending:
            return self.incumbent
        if not self.has_fheap:
            return min(self.incumbent, self._scan_open_min_f())
        while self.fheap.size > 0:
            top = &self.fheap.items[0]
            if self._f_live(top):
                return min(self.incumbent, top.f)
            f_pop(&self.fheap)
        return self.incumbent

    def incumbent_path(self):
        """Return the best plan found so far, or None."""
        return self.path

    @property
    def finished(self):
        """True once nothing is left to search."""
        return self.done

    def bytes_per_state(self):
        """Return memory held per stored state (the domain kernel may add its own tables)."""
        return self.memory_bytes() / max(1, self.stored)

    # -- internals ---------------------------------------------------------------

    cdef void _set_incumbent(self, double cost, object path):
        self.incumbent = cost
        self.cutoff = cost - self.tol * fabs(cost)
        self.path = path

    cdef int _record_goal(self, int64_t s, int i, double g2) except -1:
        """Rebuild the plan ending in successor ``i`` of ``s`` from parent pointers; make it the incumbent."""
        cdef int64_t node = s
        cdef int64_t limit = self.stored + 2
        chain = [self._succ_state(i), self._node_state(s)]
        while node != self.start_node:
            node = self.parent[node]
            if node < 0 or len(chain) > limit:
                raise SearchError("broken parent chain while rebuilding a plan")
            chain.append(self._node_state(node))
        chain.reverse()
        path = rebuild_path(self.space, chain)
        self._set_incumbent(min(g2, path.cost), path)
        return 0

    cdef double _scan_open_min_f(self) noexcept nogil:
        cdef double best = INF
        cdef double f
        cdef int64_t j, s
        cdef OpenItem* it
        for j in range(self.open.size):
            it = &self.open.items[j]
            s = it.node
            if not self.closed[s] and it.g <= self.g[s]:
                f = self.h[s] + it.g
                if f < best:
                    best = f
        if self.defer:
            for j in range(self.incons.len):
                if incons_at(&self.incons, j, &s):
                    f = self.g[s] + self.h[s]
                    if f < best:
                        best = f
        return best

    cdef int _merge_incons(self) noexcept nogil:
        """Move every INCONS node back to open, in INCONS order, under the current weight."""
        cdef int64_t j, s
        cdef double gs
        for j in range(self.incons.len):
            if not incons_at(&self.incons, j, &s):
                continue
            self.closed[s] = 0
            gs = self.g[s]
            if open_push(&self.open, gs + self.weight * self.h[s], gs, self.counter, s) < 0:
                return -1
            if self.has_fheap and f_push(&self.fheap, gs + self.h[s], gs, self.counter, s) < 0:
                return -1
            self.counter += 1
        incons_clear(&self.incons)
        return 0

    cdef bint _f_live(self, FItem* it) noexcept nogil:
        return it.g <= self.g[it.node] and (
            not self.closed[it.node] or incons_has(&self.incons, it.node))

    cdef void _compact_fheap(self) noexcept nogil:
        """Drop the f-heap's stale entries at once instead of popping them one by one.

        An entry goes stale for good: its g is above the node's (g only falls),
        or its node was closed, and a closed node opens again only through a
        lower g. So dropping them changes no later pop and no lower bound.
        """
        cdef Py_ssize_t j, k = 0
        for j in range(self.fheap.size):
            if self._f_live(&self.fheap.items[j]):
                self.fheap.items[k] = self.fheap.items[j]
                k += 1
        self.fheap.size = k
        f_heapify(&self.fheap)
        self.fheap_compact_at = max(2 * k, F_COMPACT_MIN)

    cdef bint _pop_min_f(self, int64_t* s, double* g, double* f) noexcept nogil:
        """Pop the live node of least g + h from the f-heap (a bound-raising expansion)."""
        cdef FItem it
        if self.fheap.size > self.fheap_compact_at:
            self._compact_fheap()
        while self.fheap.size > 0:
            it = f_pop(&self.fheap)
            if it.g <= self.g[it.node]:
                if not self.closed[it.node]:
                    s[0], g[0], f[0] = it.node, it.g, it.f
                    return True
                if incons_has(&self.incons, it.node):
                    incons_remove(&self.incons, it.node)
                    s[0], g[0], f[0] = it.node, it.g, it.f
                    return True
        return False

    cdef int _after_improvement(self) except -1:
        cdef int64_t j, s, k = 0
        cdef OpenItem* it
        cdef double new_w, gs
        if not self.has_fheap:
            if f_reserve(&self.fheap, self.open.size + self.incons.live + 1) < 0:
                raise MemoryError("no memory for the lower-bound heap")
            for j in range(self.open.size):
                it = &self.open.items[j]
                s = it.node
                if not self.closed[s] and it.g <= self.g[s]:
                    self.fheap.items[k].f = self.h[s] + it.g
                    self.fheap.items[k].g = it.g
                    self.fheap.items[k].counter = it.counter
                    self.fheap.items[k].node = s
                    k += 1
            if self.defer:
                for j in range(self.incons.len):
                    if incons_at(&self.incons, j, &s):
                        gs = self.g[s]
                        self.fheap.items[k].f = gs + self.h[s]
                        self.fheap.items[k].g = gs
                        self.fheap.items[k].counter = self.counter
                        self.fheap.items[k].node = s
                        self.counter += 1
                        k += 1
            self.fheap.size = k
            f_heapify(&self.fheap)
            self.has_fheap = True
        if self.decreasing and self.weight > 1.0:
            new_w = max(1.0, self.weight - self.weight_step)
            k = 0  # re-key the live open entries under the new weight
            for j in range(self.open.size):
                it = &self.open.items[j]
                s = it.node
                if self.closed[s] or it.g > self.g[s]:
                    continue
                self.open.items[k] = it[0]
                self.open.items[k].key = it.g + new_w * self.h[s]
                k += 1
            self.open.size = k
            open_heapify(&self.open)
            self.weight = new_w
            if self.defer and self._merge_incons() < 0:
                raise MemoryError("no memory for the open list")
        return 0

    cdef int _run(self, int64_t n) except -1:
        """Expand up to ``n`` nodes; return 0 on budget, 1 on an improvement, 2 when done."""
        cdef int64_t done = 0, generated = 0, s = 0, t
        cdef double g = 0.0, f = 0.0, g2, gold, ht, ft
        cdef double cutoff = self.cutoff, w = self.weight, keep = self.keep
        cdef bint fh = self.has_fheap, defer = self.defer, improved = False, picked
        cdef int64_t share = self.share_every if fh else 0
        cdef int k, i, err = 0
        cdef OpenItem top
        try:
            with nogil:
                while done < n:
                    picked = False
                    if share:
                        self.ticks += 1
                        if self.ticks % share == 0:
                            picked = self._pop_min_f(&s, &g, &f)
                    if not picked:
                        if self.open.size == 0:
                            if self.incons.live > 0:
                                if self._merge_incons() < 0:
                                    err = 1
                                    break
                                continue
                            self.done = True
                            break
                        top = open_pop(&self.open)
                        s = top.node
                        g = top.g
                        if self.closed[s] or g > self.g[s]:
                            continue
                        f = g + self.h[s]
                    if f >= cutoff:
                        continue
                    self.closed[s] = 1
                    done += 1
                    k = self._expand(s)
                    for i in range(k):
                        generated += 1
                        g2 = g + self.scost[i]
                        if g2 >= cutoff:
                            continue
                        t = self.snode[i]
                        gold = self.g[t] if t >= 0 else INF
                        if g2 >= gold * keep:
                            continue
                        if self.sgoal[i]:
                            with gil:
                                self._record_goal(s, i, g2)
                            cutoff = self.cutoff
                            improved = True
                            continue
                        ht = self._heur(i)
                        ft = g2 + ht
                        if ft >= cutoff:
                            continue
                        if gold == INF:
                            self.stored += 1
                            if t < 0:
                                t = self._store(i)
                                if t < 0:
                                    err = 1
                                    break
                        self.g[t] = g2
                        self.parent[t] = <int32_t>s
                        self.h[t] = ht
                        if self.closed[t]:
                            if defer:
                                if incons_add(&self.incons, t) < 0:
                                    err = 1
                                    break
                                if fh:
                                    if f_push(&self.fheap, ft, g2, self.counter, t) < 0:
                                        err = 1
                                        break
                                    self.counter += 1
                                continue
                            self.closed[t] = 0
                            self.reopened += 1
                        if open_push(&self.open, g2 + w * ht, g2, self.counter, t) < 0:
                            err = 1
                            break
                        if fh and f_push(&self.fheap, ft, g2, self.counter, t) < 0:
                            err = 1
                            break
                        self.counter += 1
                    if err or improved:
                        break
        finally:
            self.expansions += done
            self.generated += generated
        if err:
            raise MemoryError("no memory left for the search")
        if improved:
            self._after_improvement()
            return 1
        return 2 if self.done else 0
