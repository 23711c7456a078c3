"""Engine benchmark: expansions per second and bytes per stored state, against references in the same run.

Run by hand (not collected by the test command)::

    BOUNDWISE_PURE_PYTHON=1 python3 tests/bench/engine.py            # grid 1024x1024, Korf instances
    BOUNDWISE_PURE_PYTHON=1 python3 tests/bench/engine.py --quick    # smaller grid, fewer instances

This measures the pure-Python engine (without the variable, spaces that have
a compiled kernel use it; ``tests/bench/kernels.py`` compares the two).

Prints, side by side: our engine (weight 1, plain A*), a textbook heapq A*
(tuple states, dict g-values) and networkx's A* (on a smaller grid: building a
networkx graph of a million cells is itself the bottleneck), with ratios; then
the anytime profile on a 15-puzzle instance under a fixed weight with and
without the bound-raising share, and reopen vs defer on the grid.
"""

from __future__ import annotations

import argparse
import csv
import math
import os
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.bench.reference import SQRT2, grid_textbook, peak_bytes, random_grid, timed  # noqa: E402
from worker.engine import Budget, SearchConfig, solve  # noqa: E402
from worker.request import parse_request  # noqa: E402

DATASETS = Path(os.environ.get("BOUNDWISE_DATASETS", Path(__file__).resolve().parents[3] / "shared" / "datasets"))


def grid_space(rows, start, goal, **search):
    doc = {"problem": {"domain": "grid", "rows": rows, "start": list(start), "goals": [list(goal)]}}
    return parse_request(doc).space


def bench_grid(n: int) -> None:
    rows = random_grid(n, 0.20, seed=20261202)
    start, goal = (0, 0), (n - 1, n - 1)
    print(f"\n== grid {n}x{n}, 8-connected, 20% blocked, seed 20261202, corner to corner ==")

    def ours():
        return solve(grid_space(rows, start, goal), SearchConfig(weight=1.0, bound_share=0.0))

    # Expansions per second time the search alone: the space is built (and the
    # problem validated) before the clock starts; the textbook's own small
    # set-up stays inside its time, which only favours it.
    space = grid_space(rows, start, goal)
    (imps, fin), t_ours = timed(lambda: solve(space, SearchConfig(weight=1.0, bound_share=0.0)))
    del space
    (cost_tb, exp_tb, stored_tb), t_tb = timed(lambda: grid_textbook(rows, start, goal))
    assert fin.cost is not None and math.isclose(fin.cost, cost_tb, rel_tol=1e-9), (fin.cost, cost_tb)
    e_ours = fin.counters.expansions / t_ours
    e_tb = exp_tb / t_tb
    print(f"{'':24}{'cost':>12}{'expansions':>12}{'seconds':>10}{'exp/s':>12}{'ratio':>8}")
    print(f"{'boundwise (python)':24}{fin.cost:12.3f}{fin.counters.expansions:12d}{t_ours:10.2f}{e_ours:12.0f}"
          f"{e_ours / e_tb:8.2f}")
    print(f"{'textbook heapq A*':24}{cost_tb:12.3f}{exp_tb:12d}{t_tb:10.2f}{e_tb:12.0f}{1.0:8.2f}")

    (_, peak_ours) = peak_bytes(ours)
    (res_tb, peak_tb) = peak_bytes(lambda: grid_textbook(rows, start, goal))
    print(f"bytes per stored state: boundwise {peak_ours / fin.counters.stored:.0f} "
          f"({fin.counters.stored} stored), textbook {peak_tb / res_tb[2]:.0f} ({res_tb[2]} stored), "
          f"ratio {peak_ours / fin.counters.stored / (peak_tb / res_tb[2]):.2f}")

    small = min(n, 256)
    try:
        import networkx as nx
    except ImportError:
        return
    srows = random_grid(small, 0.20, seed=20261202)
    g = nx.Graph()
    for r in range(small):
        for c in range(small):
            if srows[r][c] == "#":
                continue
            for dr, dc, w in ((0, 1, 1.0), (1, 0, 1.0), (1, 1, SQRT2), (1, -1, SQRT2)):
                nr, nc = r + dr, c + dc
                if 0 <= nr < small and 0 <= nc < small and srows[nr][nc] != "#":
                    if dr and dc and (srows[r + dr][c] == "#" or srows[r][c + dc] == "#"):
                        continue
                    g.add_edge((r, c), (nr, nc), weight=w)
    goal_s = (small - 1, small - 1)

    def hx(a, b):
        dr, dc = abs(a[0] - b[0]), abs(a[1] - b[1])
        return max(dr, dc) + (SQRT2 - 1) * min(dr, dc)

    cost_nx, t_nx = timed(lambda: nx.astar_path_length(g, (0, 0), goal_s, heuristic=hx, weight="weight"))
    (imps_s, fin_s), t_s = timed(lambda: solve(grid_space(srows, (0, 0), goal_s), SearchConfig(weight=1.0)))
    (c_tb_s, e_tb_s, _), t_tb_s = timed(lambda: grid_textbook(srows, (0, 0), goal_s))
    assert math.isclose(cost_nx, fin_s.cost, rel_tol=1e-9)
    print(f"grid {small}x{small} whole search: boundwise {t_s:.3f} s, textbook {t_tb_s:.3f} s, "
          f"networkx astar {t_nx:.3f} s; ratio networkx/boundwise {t_nx / t_s:.2f}")

    print("\n-- proving optimality after a weight-2 first plan (same grid): schedule x reopening policy --")
    for schedule, policy in (("fixed", "reopen"), ("fixed", "defer"), ("decreasing", "reopen"),
                             ("decreasing", "defer")):
        space = grid_space(rows, start, goal)
        cfg = SearchConfig(weight=2.0, schedule=schedule, reopen=policy, bound_share=0.1)
        (imps, fin), t = timed(lambda: solve(space, cfg))
        print(f"{schedule:10} {policy:7} plans {len(imps):3d}  first plan after {imps[0].counters.expansions:9d} exp  "
              f"proof after {fin.counters.expansions:9d} exp, {fin.counters.reopened:9d} reopened, {t:6.2f} s, "
              f"optimal={fin.proven_optimal}")


def korf_instances(limit: int):
    path = DATASETS / "korf15" / "korf100.csv"
    if not path.exists():
        print(f"(Korf instances not found at {path}; set BOUNDWISE_DATASETS)")
        return []
    with path.open() as f:
        rows = list(csv.DictReader(line for line in f if not line.startswith("#")))
    return rows[:limit]


def bench_korf(limit: int, expansions: int) -> None:
    rows = korf_instances(limit)
    if not rows:
        return
    print(f"\n== Korf 15-puzzle instances (source: Korf 1985, Table 1), weight 1, {expansions} expansions cap ==")
    print(f"{'id':>4}{'optimal':>8}{'cost':>6}{'proven':>8}{'exp/s ours':>12}{'exp/s textbook':>16}{'ratio':>7}")
    for row in rows:
        tiles = [int(x) for x in row["tiles"].split()]
        doc = {"problem": {"domain": "sliding-tile", "width": 4, "height": 4, "tiles": tiles}}
        space = parse_request(doc).space
        (imps, fin), t = timed(lambda: solve(space, SearchConfig(weight=1.0, bound_share=0.0),
                                             Budget(expansions=expansions)))
        tb_rate = _textbook_rate(tiles, expansions)
        ours = fin.counters.expansions / t
        print(f"{row['id']:>4}{row['optimal_length']:>8}{str(fin.cost):>6}{str(fin.proven_optimal):>8}"
              f"{ours:12.0f}{tb_rate:16.0f}{ours / tb_rate:7.2f}")


def _textbook_rate(tiles, expansions: int) -> float:
    """Expansions per second of the textbook A* over its first ``expansions`` expansions."""
    import heapq
    import itertools

    width = 4
    goal = tuple(range(16))
    gpos = [(v // width, v % width) for v in range(16)]

    def h(s):
        return sum(abs(i // width - gpos[v][0]) + abs(i % width - gpos[v][1]) for i, v in enumerate(s) if v)

    counter = itertools.count()
    start = tuple(tiles)
    g = {start: 0}
    closed = set()
    heap = [(h(start), next(counter), start)]
    done = 0
    t0 = time.perf_counter()
    while heap and done < expansions:
        _, _, s = heapq.heappop(heap)
        if s in closed:
            continue
        if s == goal:
            break
        closed.add(s)
        done += 1
        b = s.index(0)
        r, c = divmod(b, width)
        for dr, dc in ((-1, 0), (1, 0), (0, -1), (0, 1)):
            nr, nc = r + dr, c + dc
            if 0 <= nr < width and 0 <= nc < width:
                j = nr * width + nc
                t = list(s)
                t[b], t[j] = t[j], t[b]
                t = tuple(t)
                g2 = g[s] + 1
                if g2 < g.get(t, math.inf):
                    g[t] = g2
                    heapq.heappush(heap, (g2 + h(t), next(counter), t))
    return done / (time.perf_counter() - t0)


def bench_anytime(expansions: int) -> None:
    rows = korf_instances(1)
    if not rows:
        return
    tiles = [int(x) for x in rows[0]["tiles"].split()]
    opt = int(rows[0]["optimal_length"])
    print(f"\n== anytime profile, Korf instance 1 (optimal {opt}; source: Korf 1985, Table 1), "
          f"{expansions} expansions ==")
    print(f"{'weight':>7}{'share':>7}{'schedule':>11}{'plans':>6}{'best':>6}{'L':>8}{'bound':>8}{'seconds':>9}")
    for weight, share, schedule in ((2.0, 0.0, "fixed"), (2.0, 0.1, "fixed"), (2.0, 0.3, "fixed"),
                                    (2.0, 0.1, "decreasing"), (3.0, 0.1, "decreasing")):
        space = parse_request({"problem": {"domain": "sliding-tile", "width": 4, "height": 4,
                                           "tiles": tiles}}).space
        (imps, fin), t = timed(lambda: solve(space, SearchConfig(weight=weight, bound_share=share,
                                                                 schedule=schedule),
                                             Budget(expansions=expansions)))
        print(f"{weight:7.1f}{share:7.2f}{schedule:>11}{len(imps):6d}{str(fin.cost):>6}{fin.lower_bound:8.2f}"
              f"{fin.bound or float('nan'):8.3f}{t:9.2f}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--quick", action="store_true", help="a 256x256 grid and fewer, shorter Korf runs")
    ap.add_argument("--grid", type=int, default=None, help="grid side (default 1024, 256 with --quick)")
    ap.add_argument("--korf", type=int, default=None, help="Korf instances (default 6, 3 with --quick)")
    ap.add_argument("--expansions", type=int, default=None,
                    help="expansions cap per Korf run (default 300000, 100000 with --quick)")
    args = ap.parse_args()
    from worker.engine import kernels

    print(f"python {sys.version.split()[0]}, search backend {kernels.BACKEND}")
    bench_grid(args.grid or (256 if args.quick else 1024))
    cap = args.expansions or (100_000 if args.quick else 300_000)
    bench_korf(args.korf or (3 if args.quick else 6), cap)
    bench_anytime(cap)


if __name__ == "__main__":
    main()
