"""Sequencing benchmark: proofs on TSPLIB tours and the anytime profile of a 40-task day with windows.

Run by hand (not collected by the test command)::

    python3 tests/bench/sequencing.py              # proofs, then a 30 s anytime profile
    python3 tests/bench/sequencing.py --quick      # burma14 and ulysses16 only, a 10 s profile

Proofs: time and expansions to prove the published optimum as a closed tour
(objective ``setup``), against two references run here: a textbook Held-Karp
dynamic program over subsets (exact, 2^n memory) and our own search with
the bound's node penalties switched off (the plain MST bound), so the ratio
shows what the penalties buy. Anytime: a seeded 40-task makespan instance with
releases and dues, cost and lower bound over time, against a greedy
nearest-feasible order.
"""

from __future__ import annotations

import argparse
import os
import random
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.worker.domains.tsplib import read_matrix, read_optima, tsp_problem  # noqa: E402
from worker.domains import load_problem  # noqa: E402
from worker.domains.sequencing import heuristic  # noqa: E402
from worker.engine import Budget, Finished, Improvement, Progress, SearchConfig, search, solve  # noqa: E402

DATASETS = Path(os.environ.get("BOUNDWISE_DATASETS", Path(__file__).resolve().parents[3] / "shared" / "datasets"))


def held_karp(m: list[list[int]]) -> int:
    """Return the optimal closed tour by the subset dynamic program (node 0 is the start)."""
    n = len(m) - 1
    full = (1 << n) - 1
    best = [dict() for _ in range(1 << n)]
    for j in range(n):
        best[1 << j][j] = m[0][j + 1]
    for mask in range(1, 1 << n):
        row = best[mask]
        for j, cost in row.items():
            for k in range(n):
                if not mask >> k & 1:
                    nxt = best[mask | 1 << k]
                    c = cost + m[j + 1][k + 1]
                    if c < nxt.get(k, float("inf")):
                        nxt[k] = c
    return min(c + m[j + 1][0] for j, c in best[full].items())


def prove(m: list[list[int]], penalties: bool, time_s: float):
    kind, problem = load_problem(tsp_problem(m))
    saved = heuristic.ChangeoverBound._tune_penalties
    if not penalties:
        heuristic.ChangeoverBound._tune_penalties = lambda self: [0.0] * self.n1
    try:
        t0 = time.perf_counter()
        space = kind.build(problem)
        _, fin = solve(space, SearchConfig(weight=1.0), Budget(time_s=time_s))
        return fin, time.perf_counter() - t0
    finally:
        heuristic.ChangeoverBound._tune_penalties = saved


def bench_proofs(names: list[str], dp_names: set[str], time_s: float) -> None:
    """Print proof time and work per instance; references only where they finish in minutes."""
    optima = read_optima(DATASETS / "tsplib")
    print(f"{'instance':10} {'optimum':>8} {'ours s':>8} {'exp':>7} {'stored':>8} "
          f"{'no-pen s':>9} {'no-pen exp':>10} {'DP s':>8} {'DP/ours':>8}")
    for name in names:
        m = read_matrix(DATASETS / "tsplib" / f"{name}.tsp")
        fin, t_ours = prove(m, True, time_s)
        ok = "" if fin.proven_optimal and fin.cost == optima[name] else " NOT PROVEN"
        if name in dp_names:
            plain, t_plain = prove(m, False, time_s)
            plain_note = (f"{t_plain:9.2f} {plain.counters.expansions:10d}" if plain.proven_optimal
                          else f"{'>' + str(time_s):>9} {'-':>10}")
        else:
            plain_note = f"{'-':>9} {'-':>10}"
        if name in dp_names:
            t0 = time.perf_counter()
            dp = held_karp(m)
            t_dp = time.perf_counter() - t0
            assert dp == optima[name]
            dp_note = f"{t_dp:8.2f} {t_dp / t_ours:8.1f}"
        else:
            dp_note = f"{'-':>8} {'-':>8}"
        print(f"{name:10} {optima[name]:8d} {t_ours:8.2f} {fin.counters.expansions:7d} {fin.counters.stored:8d} "
              f"{plain_note} {dp_note}{ok}", flush=True)


def day_with_windows(n: int, seed: int) -> dict:
    """Return an invented picker day: n stops on a 100 x 100 m floor, some with releases and dues."""
    rng = random.Random(seed)
    tasks = [{"id": f"s{i:02d}", "x": round(rng.uniform(0, 100), 1), "y": round(rng.uniform(0, 100), 1),
              "duration": rng.randint(1, 4)} for i in range(n)]
    order = rng.sample(range(n), n)
    x, y, clock = 50.0, 0.0, 0.0
    for i in order:  # windows around one random route, loosened, so the day is feasible
        t = tasks[i]
        clock += abs(t["x"] - x) + abs(t["y"] - y) + t["duration"]
        x, y = t["x"], t["y"]
        if rng.random() < 0.3:
            t["due"] = round(clock * 1.6 + 20)
        elif rng.random() < 0.2:
            t["release"] = round(clock * 0.5)
    return {"domain": "sequencing", "objective": "makespan", "metric": "manhattan", "return_to_start": True,
            "start": {"x": 50.0, "y": 0.0}, "tasks": tasks}


def greedy(space) -> float | None:
    """Return the makespan of always taking the feasible successor that ends soonest."""
    s, total = space.initial_state(), 0.0
    while not space.is_goal(s):
        options = sorted(space.successors(s), key=lambda t: t[1])
        if not options:
            return None
        s, c, _ = options[0]
        total += c
    return total


def bench_anytime(n: int, seed: int, time_s: float) -> None:
    kind, problem = load_problem(day_with_windows(n, seed))
    ref = greedy(kind.build(problem))
    print(f"\nanytime: {n} tasks with windows (seed {seed}), makespan; greedy nearest-feasible = {ref}")
    for config in (SearchConfig(weight=2.0), SearchConfig(weight=3.0, schedule="decreasing", weight_step=0.25)):
        print(f"\nweight {config.weight} {config.schedule}")
        print(f"{'t s':>7} {'event':>11} {'cost':>9} {'L':>9} {'bound':>7} {'vs greedy':>9} {'expansions':>10}")
        space = kind.build(problem)
        for ev in search(space, config, Budget(time_s=time_s), progress_every_s=time_s / 6):
            if isinstance(ev, (Improvement, Progress, Finished)) and ev.cost is not None:
                label = type(ev).__name__.lower()
                vs = f"{ev.cost / ref:9.3f}" if ref else f"{'-':>9}"
                bound = ev.bound if ev.bound is not None else float("inf")
                print(f"{ev.counters.elapsed_s:7.2f} {label:>11} {ev.cost:9.1f} {ev.lower_bound:9.1f} "
                      f"{bound:7.3f} {vs} {ev.counters.expansions:10d}", flush=True)
            if isinstance(ev, Finished):
                print(f"stop: {ev.stop_reason.value}, proven optimal: {ev.proven_optimal}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--time", type=float, default=None, help="anytime profile seconds")
    args = ap.parse_args()
    names = ["burma14", "ulysses16"] if args.quick else ["burma14", "ulysses16", "gr17", "gr21", "ulysses22",
                                                        "bays29", "dantzig42", "att48", "eil51"]
    bench_proofs(names, {"burma14", "ulysses16"}, 20.0 if args.quick else 60.0)
    bench_anytime(40, 20261202, args.time or (10.0 if args.quick else 30.0))


if __name__ == "__main__":
    main()
