"""Admissible lower bounds on what a partial sequence still has to pay.

Nodes are 0 (the start) and 1..n (the tasks); a set of tasks is an int
bitmask with bit i - 1 for task i. From a state "at ``last``, tasks ``mask``
done", the rest of any plan is a path ``last -> r1 -> ... -> rk`` through the
remaining set R (then ``-> 0`` for a closed tour).

The changeover bound is the largest of:

tree bound (Held-Karp 1-tree with node penalties)
    With penalties pi (any real numbers) and c'(i, j) = c_sym(i, j) + pi_i +
    pi_j where c_sym(i, j) = min(c[i][j], c[j][i]), the rest of a plan
    costs c'(path) - sum(deg_v * pi_v). Its middle part r1 .. rk is a spanning
    tree of R, so c'(path) >= min_r c'(last, r) + MST'(R) (+ min_r c'(r, 0)
    when the tour closes), and the degrees are fixed: 2 for every r in R, 1
    for ``last`` and 0; an open path ends at some r of degree 1, which
    contributes at most min_R pi. Every choice of pi gives a valid bound, so
    pi is tuned once at the root by subgradient ascent (Held & Karp 1970)
    and reused everywhere; the MST part depends on the mask alone and is
    memoized. Asymmetric matrices lose only the min over directions.
in-edge bound (asymmetric matrices)
    every r in R is entered once, from ``last`` or another member of R; the
    closing changeover leaves some r in R. Summing the cheapest entries is
    a relaxation of the assignment problem and catches asymmetry the tree
    bound smooths away.

The exact tree bound costs one MST (quadratic in |R|) per new set, that is
one per successor. With more than ``EXACT_MAX_LEFT`` tasks left it is
loosened to one MST per expansion: any spanning tree of R plus one edge to
``last`` spans R + {last}, so MST'(R) >= MST'(R + {last}) - min_v w'(last, v),
and R + {last} is the same set for all successors of one state.

``node_cost`` adds a fixed amount per remaining task (durations, under
``makespan``) to every bound.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

__all__ = ["EXACT_MAX_LEFT", "ChangeoverBound", "all_pairs_shortest"]

EXACT_MAX_LEFT = 40
# memo entries hold a list of the remaining tasks: cap their total length
_MEMO_CELLS = 1 << 21
INF = math.inf


def all_pairs_shortest(matrix: Sequence[Sequence[float]]) -> list[list[float]]:
    """Return the least changeover chain between every pair of nodes (Floyd-Warshall)."""
    d = [list(row) for row in matrix]
    n = len(d)
    for i in range(n):
        d[i][i] = 0.0
    for k in range(n):
        dk = d[k]
        for i in range(n):
            dik = d[i][k]
            if dik < INF:
                row = d[i]
                d[i] = list(map(min, row, [dik + x for x in dk]))
    return d


def _prim(nodes: Sequence[int], w: Sequence[Sequence[float]]) -> float:
    """Return the weight of a minimum spanning tree over ``nodes`` (dense Prim)."""
    if len(nodes) <= 1:
        return 0.0
    rest = list(nodes[1:])
    row = w[nodes[0]]
    key = [row[v] for v in rest]
    total = 0.0
    while rest:
        m = min(key)
        j = key.index(m)
        total += m
        u = rest[j]
        rest[j] = rest[-1]
        rest.pop()
        key[j] = key[-1]
        key.pop()
        wu = w[u]
        key = list(map(min, key, [wu[v] for v in rest]))
    return total


def _prim_degrees(nodes: Sequence[int], w: Sequence[Sequence[float]], deg: list[int]) -> float:
    """Like ``_prim`` but add each node's tree degree into ``deg``."""
    if len(nodes) <= 1:
        return 0.0
    rest = list(nodes[1:])
    row = w[nodes[0]]
    key = [row[v] for v in rest]
    par = [nodes[0]] * len(rest)
    total = 0.0
    while rest:
        m = min(key)
        j = key.index(m)
        total += m
        u = rest[j]
        deg[u] += 1
        deg[par[j]] += 1
        for seq in (rest, key, par):
            seq[j] = seq[-1]
            seq.pop()
        wu = w[u]
        fresh = [wu[v] for v in rest]
        for idx in [i for i, (a, b) in enumerate(zip(fresh, key)) if a < b]:
            key[idx] = fresh[idx]
            par[idx] = u
    return total


class ChangeoverBound:
    """An admissible lower bound on the changeovers left from (last, mask); see the module doc."""

    def __init__(
        self,
        matrix: Sequence[Sequence[float]],
        closed: bool,
        *,
        node_cost: Sequence[float] | None = None,
    ) -> None:
        n1 = len(matrix)
        # a fixed cost every remaining task adds (its duration under makespan)
        self.node_cost = list(node_cost) if node_cost is not None and any(node_cost) else None
        c = [list(map(float, row)) for row in matrix]
        self.n1 = n1
        self.closed = closed
        self.c = c
        self.symmetric = all(c[i][j] == c[j][i] for i in range(n1) for j in range(i))
        self.assign = not self.symmetric
        self.full = (1 << (n1 - 1)) - 1
        self._memo: dict[int, tuple] = {}
        self._trees: dict[int, tuple[list[int], float]] = {}
        self._memo_max = max(1024, min(1 << 16, _MEMO_CELLS // n1))
        self.sym = [[min(c[i][j], c[j][i]) for j in range(n1)] for i in range(n1)]
        self.pi = self._tune_penalties() if n1 > 2 else [0.0] * n1
        pi = self.pi
        self._wp = [[self.sym[i][j] + pi[i] + pi[j] for j in range(n1)] for i in range(n1)]
        self._lead = [[c[i][j] + pi[j] for j in range(n1)] for i in range(n1)]

    # -- the bound ---------------------------------------------------------

    def remaining(self, mask: int) -> list[int]:
        """Return the tasks not in ``mask``."""
        return [r for r in range(1, self.n1) if not (mask >> (r - 1)) & 1]

    def __call__(self, last: int, mask: int) -> float:
        """Return a lower bound on the changeovers still needed from ``last`` with ``mask`` done."""
        c = self.c
        if mask == self.full:
            return c[last][0] if self.closed else 0.0
        if last and self.n1 - 1 - mask.bit_count() > EXACT_MAX_LEFT:
            return self._inherited(last, mask)
        entry = self._memo.get(mask)
        if entry is None:
            entry = self._per_mask(mask)
        rest, base, enter, ret = entry
        h = base + min(map(self._lead[last].__getitem__, rest))
        if enter is not None:
            h2 = sum(map(min, enter, map(c[last].__getitem__, rest))) + ret
            if h2 > h:
                return h2
        return h

    def _tree_of(self, mask: int) -> tuple[list[int], float]:
        """Return the tasks outside ``mask`` and the weight of their penalized MST (memoized)."""
        entry = self._trees.get(mask)
        if entry is None:
            rest = self.remaining(mask)
            entry = (rest, _prim(rest, self._wp))
            if len(self._trees) >= self._memo_max:
                self._trees.clear()
            self._trees[mask] = entry
        return entry

    def _per_mask(self, mask: int) -> tuple:
        rest, tree = self._tree_of(mask)
        pi, c = self.pi, self.c
        base = tree - 2.0 * math.fsum(pi[r] for r in rest)
        if self.closed:
            base += min(c[r][0] + pi[r] for r in rest)
        else:
            base += min(pi[r] for r in rest)
        fixed = 0.0 if self.node_cost is None else math.fsum(self.node_cost[r] for r in rest)
        base += fixed
        enter = None
        ret = 0.0
        if self.assign:
            enter = [min((c[i][r] for i in rest if i != r), default=INF) for r in rest]
            ret = (min(c[r][0] for r in rest) if self.closed else 0.0) + fixed
        entry = (rest, base, enter, ret)
        if len(self._memo) >= self._memo_max:
            self._memo.clear()
        self._memo[mask] = entry
        return entry

    def _inherited(self, last: int, mask: int) -> float:
        """The tree bound with MST'(R) >= MST'(R + last) - min_v w'(last, v): one tree per expansion."""
        wider, tree = self._tree_of(mask & ~(1 << (last - 1)))
        rest = [r for r in wider if r != last]
        pi, c = self.pi, self.c
        wl, lead = self._wp[last], self._lead[last]
        h = tree - min(map(wl.__getitem__, rest)) + min(map(lead.__getitem__, rest))
        h -= 2.0 * math.fsum(map(pi.__getitem__, rest))
        if self.closed:
            h += min(c[r][0] + pi[r] for r in rest)
        else:
            h += min(map(pi.__getitem__, rest))
        if self.node_cost is not None:
            h += math.fsum(map(self.node_cost.__getitem__, rest))
        return h

    # -- penalties -----------------------------------------------------------

    def _root(self, pi: list[float]) -> tuple[float, list[int]]:
        """Return the tree bound at the start and each node's degree minus its target."""
        n1, c, sym = self.n1, self.c, self.sym
        rest = list(range(1, n1))
        w = [[sym[i][j] + pi[i] + pi[j] for j in range(n1)] for i in range(n1)]
        deg = [0] * n1
        value = _prim_degrees(rest, w, deg) - 2.0 * math.fsum(pi[r] for r in rest)
        first = min(rest, key=lambda r: c[0][r] + pi[r])
        value += c[0][first] + pi[first]
        deg[first] += 1
        if self.closed:
            back = min(rest, key=lambda r: c[r][0] + pi[r])
            value += c[back][0] + pi[back]
            deg[back] += 1
        else:
            end = min(rest, key=pi.__getitem__)
            value += pi[end]
            deg[end] += 1
        return value, [0] + [deg[r] - 2 for r in rest]

    def _upper(self) -> float:
        """Return the cost of a nearest-neighbour order, to scale subgradient steps."""
        c, left, at, total = self.c, set(range(1, self.n1)), 0, 0.0
        while left:
            nxt = min(left, key=lambda r: c[at][r])
            total += c[at][nxt]
            left.discard(nxt)
            at = nxt
        return total + (c[at][0] if self.closed else 0.0)

    def _tune_penalties(self) -> list[float]:
        """Raise the root bound by subgradient ascent on the node penalties."""
        n1 = self.n1
        upper = self._upper()
        pi = [0.0] * n1
        best_val, best_pi = -INF, pi[:]
        step, stall = 2.0, 0
        # each round costs an MST over all tasks: keep the total near 4e6 edge looks
        for _ in range(max(60, min(400, 4_000_000 // (n1 * n1)))):
            value, sub = self._root(pi)
            if value > best_val + 1e-9:
                best_val, best_pi, stall = value, pi[:], 0
            else:
                stall += 1
                if stall >= 8:
                    step, stall = step / 2.0, 0
            norm = sum(g * g for g in sub)
            gap = upper - value
            if norm == 0 or gap <= 1e-9 * max(1.0, abs(upper)) or step < 1e-4:
                break
            t = step * gap / norm
            pi = [p + t * g for p, g in zip(pi, sub)]
        return best_pi
