"""Compiled-kernel benchmark: expansions per second, bytes per stored state and proof times, same run.

Run by hand (not collected by the test command)::

    python3 tests/bench/kernels.py            # grid 1024x1024, Korf instances, whole-process solve
    python3 tests/bench/kernels.py --quick    # grid 256x256, fewer instances

Compares, in one run: the compiled kernels, the pure-Python core and a
textbook heapq A* (tuple states, dict g-values), on a seeded 8-connected
1024 x 1024 grid with 20% blocked cells and on Korf's 15-puzzle instances;
then the wall time of whole ``boundwise solve`` processes on that grid
(compiled, pure Python, and a process running the textbook A* on the same
request file); then the time the compiled backend takes to prove Korf
instances optimal. Targets: at least 1M expansions/s on both domains, and a
whole ``boundwise solve`` at least 10x faster than the textbook process.
"""

from __future__ import annotations

import argparse
import csv
import itertools
import json
import math
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.bench.reference import grid_textbook, peak_bytes, random_grid, textbook_astar, timed  # noqa: E402
from worker.engine import Budget, SearchConfig, kernels, solve  # noqa: E402
from worker.engine.core import PythonCore  # noqa: E402
from worker.request import parse_request  # noqa: E402

DATASETS = Path(os.environ.get("BOUNDWISE_DATASETS", ROOT.parent / "shared" / "datasets"))
SEED = 20261202
ASTAR = SearchConfig(weight=1.0, bound_share=0.0)
# Instances the compiled A* proves in seconds, from easy to a few million expansions.
PROOF_IDS = [12, 42, 79, 9, 13, 6, 16, 5, 11, 8, 4, 2, 10]


def row(name, cost, expansions, seconds, rate, ref_rate, per_state):
    print(f"{name:22}{cost:12.3f}{expansions:11d}{seconds:9.2f}{rate:12.0f}{rate / ref_rate:8.1f}{per_state:10.0f}")


def header():
    print(f"{'':22}{'cost':>12}{'expanded':>11}{'seconds':>9}{'exp/s':>12}{'x ref':>8}{'B/state':>10}")


def grid_request(rows, n, search):
    return {"problem": {"domain": "grid", "rows": rows, "moves": 8, "start": [0, 0], "goals": [[n - 1, n - 1]]},
            "search": search, "budget": {}}


def bench_grid(n: int) -> None:
    rows = random_grid(n, 0.20, seed=SEED)
    print(f"\n== grid {n}x{n}, 8-connected, 20% blocked, seed {SEED}, corner to corner, plain A* ==")
    space = parse_request(grid_request(rows, n, {"weight": 1.0, "bound_share": 0.0})).space
    core = kernels.make_core(space, ASTAR)
    (_, fin_c), t_c = timed(lambda: solve(space, ASTAR, core=core))
    (_, fin_p), t_p = timed(lambda: solve(space, ASTAR, core=PythonCore(space, ASTAR)))
    (tb, t_tb) = timed(lambda: grid_textbook(rows, (0, 0), (n - 1, n - 1)))
    assert math.isclose(fin_c.cost, tb[0], rel_tol=1e-9) and fin_c.cost == fin_p.cost
    _, peak_p = peak_bytes(lambda: solve(space, ASTAR, core=PythonCore(space, ASTAR)))
    _, peak_tb = peak_bytes(lambda: grid_textbook(rows, (0, 0), (n - 1, n - 1)))
    ref = tb[1] / t_tb
    header()
    row(f"compiled ({fin_c.backend})", fin_c.cost, fin_c.counters.expansions, t_c, fin_c.counters.expansions / t_c,
        ref, core.bytes_per_state())
    row("pure-Python core", fin_p.cost, fin_p.counters.expansions, t_p, fin_p.counters.expansions / t_p, ref,
        peak_p / fin_p.counters.stored)
    row("textbook heapq A*", tb[0], tb[1], t_tb, ref, ref, peak_tb / tb[2])
    print(f"(compiled bytes/state counts its per-cell tables for all {n * n} cells; "
          f"{fin_c.counters.stored} states stored)")


def bench_solve_process(n: int) -> None:
    rows = random_grid(n, 0.20, seed=SEED)
    print(f"\n== whole process: boundwise solve on the {n}x{n} grid (start-up, parsing, search, plan check) ==")
    # plain A* (the textbook's work), then the default anytime search (weight 2, bound share 0.1)
    searches = (("A*", {"weight": 1.0, "bound_share": 0.0}), ("anytime", {}))
    with tempfile.TemporaryDirectory() as tmp:
        results = []
        for name, search in searches:
            path = Path(tmp) / f"grid-{name}.json"
            path.write_text(json.dumps(grid_request(rows, n, search)))
            solve_cmd = [sys.executable, "-m", "service.cli", "solve", str(path), "--json"]
            for label, env in (("compiled", {}), ("pure Python", {"BOUNDWISE_PURE_PYTHON": "1"})):
                out, t = _process(solve_cmd, env)
                result = json.loads(out.splitlines()[-1])
                results.append((f"solve {name} {label}", t, result["cost"], result["backend"]))
            if name == "A*":
                code = ("import json, sys; from tests.bench.reference import grid_textbook; "
                        "d = json.load(open(sys.argv[1]))['problem']; "
                        "print(grid_textbook(d['rows'], tuple(d['start']), tuple(d['goals'][0]))[0])")
                out, t_tb = _process([sys.executable, "-c", code, str(path)], {})
                results.append(("textbook A* process", t_tb, float(out.split()[-1]), "-"))
        _, t_bare = _process([sys.executable, "-c", "pass"], {})
        _, t_imports = _process([sys.executable, "-c", "import service.cli, worker.domains as d; d.kinds()"], {})
    print(f"{'':28}{'seconds':>9}{'cost':>12}{'backend':>10}{'textbook / this':>17}")
    for label, t, cost, backend in results:
        print(f"{label:28}{t:9.2f}{cost:12.3f}{backend:>10}{t_tb / t:17.1f}")
    print(f"(of which start-up: bare interpreter {t_bare:.2f} s, with the CLI and every domain imported "
          f"{t_imports:.2f} s)")


def _process(cmd, env):
    full = {k: v for k, v in os.environ.items() if not k.startswith("BOUNDWISE_")}
    full.update(env)
    t0 = time.perf_counter()
    done = subprocess.run(cmd, cwd=ROOT, env=full, capture_output=True, text=True, check=True)
    return done.stdout, time.perf_counter() - t0


def korf_rows(ids=None, limit=None):
    path = DATASETS / "korf15" / "korf100.csv"
    if not path.exists():
        print(f"(Korf instances not found at {path}; set BOUNDWISE_DATASETS)")
        return []
    with path.open() as f:
        rows = list(csv.DictReader(line for line in f if not line.startswith("#")))
    if ids is not None:
        by_id = {int(r["id"]): r for r in rows}
        return [by_id[i] for i in ids]
    return rows[:limit]


def tiles_space(tiles):
    return parse_request({"problem": {"domain": "sliding-tile", "tiles": tiles}, "budget": {}}).space


def tiles_textbook(tiles, cap):
    """Return the seconds a textbook Manhattan A* takes for its first ``cap`` expansions."""
    goal = tuple(range(16))

    def h(s):
        return sum(abs(i // 4 - v // 4) + abs(i % 4 - v % 4) for i, v in enumerate(s) if v)

    def successors(s):
        b = s.index(0)
        r, c = divmod(b, 4)
        for dr, dc in ((-1, 0), (1, 0), (0, -1), (0, 1)):
            if 0 <= r + dr < 4 and 0 <= c + dc < 4:
                j = (r + dr) * 4 + c + dc
                t = list(s)
                t[b], t[j] = t[j], 0
                yield tuple(t), 1.0

    count = itertools.count()

    def capped(s):
        if next(count) >= cap:
            raise _Capped
        return s == goal

    def run():
        try:
            textbook_astar(tuple(tiles), capped, successors, h)
        except _Capped:
            pass

    return timed(run)[1]


class _Capped(Exception):
    """Raised to stop the textbook A* after its expansions cap."""


def bench_korf(limit: int, cap: int) -> None:
    rows = korf_rows(limit=limit)
    if not rows:
        return
    print(f"\n== Korf 15-puzzle instances (source: Korf 1985, Table 1), plain A*, {cap} expansions cap ==")
    print(f"{'id':>4}{'compiled exp/s':>16}{'python exp/s':>14}{'textbook exp/s':>16}{'x python':>10}"
          f"{'x textbook':>12}{'B/state':>9}")
    for r in rows:
        tiles = [int(x) for x in r["tiles"].split()]
        space = tiles_space(tiles)
        core = kernels.make_core(space, ASTAR)
        (_, fin_c), t_c = timed(lambda: solve(space, ASTAR, Budget(expansions=cap), core=core))
        (_, fin_p), t_p = timed(lambda: solve(space, ASTAR, Budget(expansions=cap), core=PythonCore(space, ASTAR)))
        t_tb = tiles_textbook(tiles, cap)
        rc, rp, rt = fin_c.counters.expansions / t_c, fin_p.counters.expansions / t_p, cap / t_tb
        print(f"{r['id']:>4}{rc:16.0f}{rp:14.0f}{rt:16.0f}{rc / rp:10.1f}{rc / rt:12.1f}{core.bytes_per_state():9.0f}")
    _, peak_p = peak_bytes(lambda: solve(space, ASTAR, Budget(expansions=cap), core=PythonCore(space, ASTAR)))
    print(f"pure-Python core on #{rows[-1]['id']}: {peak_p / fin_p.counters.stored:.0f} bytes per stored state")


def bench_proofs(ids) -> None:
    rows = korf_rows(ids=ids)
    if not rows:
        return
    print("\n== time to prove optimality on the compiled backend, plain A* (source: Korf 1985, Table 1) ==")
    print(f"{'id':>4}{'optimal':>8}{'cost':>6}{'proven':>8}{'expanded':>11}{'stored':>11}{'seconds':>9}"
          f"{'exp/s':>12}{'B/state':>9}")
    for r in rows:
        space = tiles_space([int(x) for x in r["tiles"].split()])
        core = kernels.make_core(space, ASTAR)
        (_, fin), t = timed(lambda: solve(space, ASTAR, core=core))
        c = fin.counters
        assert fin.cost == int(r["optimal_length"]), (r["id"], fin.cost)
        print(f"{r['id']:>4}{r['optimal_length']:>8}{fin.cost:6.0f}{str(fin.proven_optimal):>8}{c.expansions:11d}"
              f"{c.stored:11d}{t:9.2f}{c.expansions / t:12.0f}{core.bytes_per_state():9.0f}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args()
    if not kernels.COMPILED:
        sys.exit(f"the compiled kernels are not in use ({kernels.IMPORT_ERROR}); build them first")
    print(f"python {sys.version.split()[0]}, backend {kernels.BACKEND}, {os.cpu_count()} CPUs")
    n = 256 if args.quick else 1024
    bench_grid(n)
    bench_solve_process(n)
    bench_korf(3 if args.quick else 10, 100_000 if args.quick else 300_000)
    bench_proofs(PROOF_IDS[:5] if args.quick else PROOF_IDS)


if __name__ == "__main__":
    main()
