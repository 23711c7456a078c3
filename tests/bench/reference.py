"""Shared benchmark pieces: a textbook heapq A* (tuple states, dict g-values), seeded grids, timers."""

from __future__ import annotations

import gc
import heapq
import itertools
import math
import random
import time
import tracemalloc
from collections.abc import Callable, Hashable, Iterable

SQRT2 = math.sqrt(2.0)


def textbook_astar(start: Hashable, is_goal: Callable[[Hashable], bool],
                   successors: Callable[[Hashable], Iterable[tuple[Hashable, float]]],
                   h: Callable[[Hashable], float]) -> tuple[float | None, int, int]:
    """Return (cost, expansions, stored) of a plain A* with a closed set and lazy deletion."""
    counter = itertools.count()
    g = {start: 0.0}
    closed = set()
    heap = [(h(start), next(counter), start)]
    expansions = 0
    while heap:
        _, _, s = heapq.heappop(heap)
        if s in closed:
            continue
        if is_goal(s):
            return g[s], expansions, len(g)
        closed.add(s)
        expansions += 1
        gs = g[s]
        for t, c in successors(s):
            g2 = gs + c
            if g2 < g.get(t, math.inf):
                g[t] = g2
                heapq.heappush(heap, (g2 + h(t), next(counter), t))
    return None, expansions, len(g)


def random_grid(n: int, blocked: float, seed: int) -> list[str]:
    """Return n rows of n cells, ``blocked`` share of them '#', with free corners."""
    rng = random.Random(seed)
    rows = []
    for r in range(n):
        rows.append("".join("#" if rng.random() < blocked else "." for _ in range(n)))
    rows[0] = "." + rows[0][1:]
    rows[-1] = rows[-1][:-1] + "."
    return rows


def grid_textbook(rows: list[str], start: tuple[int, int], goal: tuple[int, int]):
    """Return the textbook A*'s (cost, expansions, stored) on an 8-connected grid without corner cutting."""
    h_rows, w = len(rows), len(rows[0])
    free = [[ch != "#" for ch in row] for row in rows]
    moves = [(-1, 0, 1.0), (-1, 1, SQRT2), (0, 1, 1.0), (1, 1, SQRT2), (1, 0, 1.0), (1, -1, SQRT2),
             (0, -1, 1.0), (-1, -1, SQRT2)]
    gr, gc = goal

    def successors(s):
        r, c = s
        for dr, dc, cost in moves:
            nr, nc = r + dr, c + dc
            if 0 <= nr < h_rows and 0 <= nc < w and free[nr][nc]:
                if dr and dc and not (free[r + dr][c] and free[r][c + dc]):
                    continue
                yield (nr, nc), cost

    def h(s):
        dr, dc = abs(s[0] - gr), abs(s[1] - gc)
        return max(dr, dc) + (SQRT2 - 1.0) * min(dr, dc)

    return textbook_astar(start, lambda s: s == goal, successors, h)


def timed(fn):
    """Return ``(fn(), seconds)``, collecting garbage first."""
    gc.collect()
    t0 = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t0


def peak_bytes(fn):
    """Return ``(fn(), peak bytes allocated while it ran)`` as tracemalloc sees them."""
    gc.collect()
    tracemalloc.start()
    out = fn()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return out, peak
