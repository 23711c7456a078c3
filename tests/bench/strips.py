"""Action-model benchmark: grounding, estimates per second, expansions to prove optimality, anytime profile.

Run by hand (not collected by the test command)::

    python3 tests/bench/strips.py                 # every shared instance + a generated logistics task
    python3 tests/bench/strips.py --quick         # skip the slowest proofs
    python3 tests/bench/strips.py --time-limit 30 # cap each search (seconds)

For each competition instance in the shared data sets (and one larger
logistics task generated here with a fixed seed) it prints:

- parse + grounding time and the ground size;
- estimate evaluations per second for h_max, LM-cut and h_FF on the same
  sample of reachable states, with LM-cut's and h_FF's rate as a ratio of
  h_max's, measured in the same run;
- expansions and time to prove the optimum (weight 1) with LM-cut and with
  h_max, the ratio between them, and the share of search time spent in the
  estimate (so it says what dominates);
- the anytime profile (time, cost, lower bound, bound) of the default search
  settings with h_FF guidance on the generated task.
"""

from __future__ import annotations

import argparse
import csv
import os
import random
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from worker.domains.strips.space import StripsSpace  # noqa: E402
from worker.engine import Budget, Finished, Improvement, SearchConfig, search, solve  # noqa: E402
from worker.heuristics import HFF, HMax, LMCut, RelaxedTask  # noqa: E402
from worker.pddl import ground, parse_domain, parse_problem  # noqa: E402

DATASETS = Path(os.environ.get("BOUNDWISE_DATASETS", Path(__file__).resolve().parents[3] / "shared" / "datasets"))
IPC = DATASETS / "ipc"
SEED = 20261202


def generated_logistics(cities: int, planes: int, packages: int, seed: int = SEED) -> str:
    """Return a logistics problem for the shared typed domain: one truck, airport and depot per city."""
    rng = random.Random(seed)
    places = [(f"apt{i}", f"pos{i}", f"cit{i}") for i in range(1, cities + 1)]
    every = [p for apt, pos, _ in places for p in (apt, pos)]
    objects = (" ".join(f"apn{k}" for k in range(1, planes + 1)) + " - airplane\n "
               + " ".join(a for a, _, _ in places) + " - airport\n "
               + " ".join(p for _, p, _ in places) + " - location\n "
               + " ".join(c for _, _, c in places) + " - city\n "
               + " ".join(f"tru{i}" for i in range(1, cities + 1)) + " - truck\n "
               + " ".join(f"obj{j}" for j in range(1, packages + 1)) + " - package")
    init = [f"(in-city {apt} {c}) (in-city {pos} {c})" for apt, pos, c in places]
    init += [f"(at tru{i} {pos})" for i, (_, pos, _) in enumerate(places, 1)]
    init += [f"(at apn{k} {rng.choice(places)[0]})" for k in range(1, planes + 1)]
    goal = []
    for j in range(1, packages + 1):
        src, dst = rng.sample(every, 2)
        init.append(f"(at obj{j} {src})")
        goal.append(f"(at obj{j} {dst})")
    return (f"(define (problem generated-{cities}-{planes}-{packages}) (:domain logistics)\n(:objects {objects})\n"
            f"(:init {' '.join(init)})\n(:goal (and {' '.join(goal)})))\n")


def instances(quick: bool) -> list[tuple[str, str, str, float | None]]:
    """Return (label, domain text, problem text, listed optimum) for each benchmark instance."""
    optimum = {}
    lines = [ln for ln in (IPC / "optimal_costs.csv").read_text().splitlines() if ln and not ln.startswith("#")]
    for row in csv.DictReader(lines):
        optimum[(row["domain_dir"], row["problem_file"])] = float(row["optimal_cost"])
    out = []
    for (folder, problem), opt in sorted(optimum.items()):
        out.append((problem.removesuffix(".pddl"), (IPC / folder / "domain.pddl").read_text(),
                    (IPC / folder / problem).read_text(), opt))
    logistics = (IPC / "logistics-ipc2000-strips-typed" / "domain.pddl").read_text()
    size = (3, 1, 4) if quick else (4, 2, 6)
    out.append((f"gen-logistics-{size[0]}-{size[1]}-{size[2]}", logistics, generated_logistics(*size), None))
    return out


def sample_states(space: StripsSpace, n: int, seed: int = SEED) -> list[int]:
    """Return up to ``n`` distinct reachable states from random walks of the initial state."""
    rng = random.Random(seed)
    seen = {space.initial_state()}
    out = [space.initial_state()]
    for _ in range(n * 20):
        if len(out) >= n:
            break
        s = space.initial_state()
        for _ in range(rng.randint(1, 30)):
            succ = space.successors(s)
            if not succ:
                break
            s = rng.choice(succ)[0]
        if s not in seen:
            seen.add(s)
            out.append(s)
    return out


def rate(estimate, states: list[int], min_s: float = 0.5) -> float:
    """Return evaluations per second of ``estimate`` over ``states`` (repeated for at least ``min_s``)."""
    done, t0 = 0, time.perf_counter()
    while True:
        for s in states:
            estimate(s)
        done += len(states)
        dt = time.perf_counter() - t0
        if dt >= min_s:
            return done / dt


class Timed:
    """Wrap an estimate and add up the time spent in it."""

    def __init__(self, fn) -> None:
        self.fn, self.seconds, self.calls = fn, 0.0, 0

    def __call__(self, s: int) -> float:
        t0 = time.perf_counter()
        v = self.fn(s)
        self.seconds += time.perf_counter() - t0
        self.calls += 1
        return v


def prove(task, heuristic: str, limit: float) -> tuple[object, float, float]:
    """Run weight-1 A* to a proof (or the time limit); return (finished, seconds, share in the estimate)."""
    space = StripsSpace(task, heuristic, "none")
    timed = Timed(space.heuristic)
    space.heuristic = timed
    t0 = time.perf_counter()
    _, fin = solve(space, SearchConfig(weight=1.0), Budget(time_s=limit))
    dt = time.perf_counter() - t0
    return fin, dt, timed.seconds / dt if dt > 0 else 0.0


def anytime_summary(task, guidance: str, limit: float) -> tuple[float | None, float | None, object, float]:
    """Run the default search settings; return (first plan time, first cost, finished, total time)."""
    space = StripsSpace(task, "lmcut", guidance)
    first_t = first_c = None
    t0 = time.perf_counter()
    for event in search(space, SearchConfig(), Budget(time_s=limit)):
        if isinstance(event, Improvement) and first_t is None:
            first_t, first_c = time.perf_counter() - t0, event.cost
        if isinstance(event, Finished):
            return first_t, first_c, event, time.perf_counter() - t0
    raise AssertionError("search ended without a Finished event")


def _fmt_proof(fin, dt: float, share: float) -> str:
    state = "opt" if fin.proven_optimal else f"L={fin.lower_bound:g}"
    cost = "-" if fin.cost is None else f"{fin.cost:g}"
    return f"{cost:>4} {state:>7} {fin.counters.expansions:>7} exp {dt:7.2f}s h {share:4.0%}"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="skip the slowest proofs, smaller generated task")
    ap.add_argument("--time-limit", type=float, default=60.0, help="seconds per search")
    ap.add_argument("--states", type=int, default=200, help="sampled states for the evaluation rates")
    args = ap.parse_args()
    print(f"{'instance':<22} {'facts':>5} {'acts':>5} {'ground':>7} | {'hmax/s':>7} {'lmcut/s':>7} {'ratio':>5}"
          f" {'hff/s':>7} {'ratio':>5} | {'LM-cut proof':<36} | {'h_max proof':<36} | exp h_max/LM-cut")
    totals = {"ground": 0.0, "lmcut": 0.0, "lmcut_h": 0.0}
    generated = None
    for label, domain_text, problem_text, opt in instances(args.quick):
        t0 = time.perf_counter()
        domain = parse_domain(domain_text)
        task = ground(domain, parse_problem(problem_text, domain))
        tg = time.perf_counter() - t0
        relaxed = RelaxedTask.from_task(task)
        states = sample_states(StripsSpace(task, "blind", "none"), args.states)
        hm, lm, ff = (rate(cls(task, relaxed), states) for cls in (HMax, LMCut, HFF))
        slow = args.quick and (label == "prob03" or label.startswith("gen-"))
        if slow:
            lm_txt = hm_txt = "(skipped with --quick)"
            ratio = "-"
        else:
            fin_l, dt_l, share_l = prove(task, "lmcut", args.time_limit)
            fin_h, dt_h, share_h = prove(task, "hmax", args.time_limit)
            lm_txt, hm_txt = _fmt_proof(fin_l, dt_l, share_l), _fmt_proof(fin_h, dt_h, share_h)
            ratio = f"{fin_h.counters.expansions / max(1, fin_l.counters.expansions):.1f}"
            totals["ground"] += tg
            totals["lmcut"] += dt_l
            totals["lmcut_h"] += dt_l * share_l
            if opt is not None and fin_l.proven_optimal and fin_l.cost != opt:
                print(f"!! {label}: proven cost {fin_l.cost} differs from the listed optimum {opt}")
        print(f"{label:<22} {len(task.facts):>5} {len(task.actions):>5} {tg:6.3f}s | {hm:7.0f} {lm:7.0f}"
              f" {lm / hm:5.2f} {ff:7.0f} {ff / hm:5.2f} | {lm_txt:<36} | {hm_txt:<36} | {ratio}", flush=True)
        if label.startswith("gen-"):
            generated = task
    print("\nguidance at the default search settings (weight 2, fixed; LM-cut bound), none vs h_FF:")
    print(f"{'instance':<22} | {'none: first plan':<22} {'proof':>16} | {'hff: first plan':<22} {'proof':>16}"
          f" | proof time hff/none")
    for label, domain_text, problem_text, _ in instances(args.quick):
        if args.quick and (label == "prob03" or label.startswith("gen-")):
            continue
        domain = parse_domain(domain_text)
        task = ground(domain, parse_problem(problem_text, domain))
        cells, times = [], []
        for guidance in ("none", "hff"):
            ft, fc, fin, dt = anytime_summary(task, guidance, args.time_limit)
            first = "-" if ft is None else f"{fc:g} at {ft:6.3f}s"
            proof = f"{fin.counters.expansions} exp {dt:6.2f}s" if fin.proven_optimal else f"open {dt:6.2f}s"
            cells.append(f"{first:<22} {proof:>16}")
            times.append(dt if fin.proven_optimal else float("nan"))
        print(f"{label:<22} | {cells[0]} | {cells[1]} | {times[1] / times[0]:.2f}", flush=True)
    if totals["lmcut"] > 0:
        print(f"\nover the proofs above: grounding {totals['ground']:.2f}s, LM-cut searches {totals['lmcut']:.2f}s, "
              f"of which {totals['lmcut_h'] / totals['lmcut']:.0%} inside the estimate")
    if generated is not None:
        print("\nanytime profile on the generated logistics task (weight 2, fixed schedule, LM-cut bound, h_FF order):")
        space = StripsSpace(generated, "lmcut", "hff")
        for event in search(space, SearchConfig(), Budget(time_s=args.time_limit), progress_every_s=5.0):
            if isinstance(event, (Improvement, Finished)) or event.cost is not None:
                c = event.counters
                bound = "-" if event.bound is None else f"{event.bound:.3f}"
                kind = type(event).__name__.lower()
                print(f"  {c.elapsed_s:7.2f}s {kind:<11} cost {event.cost!s:>5}  L {event.lower_bound:6.2f}"
                      f"  bound {bound:>6}  expansions {c.expansions}")


if __name__ == "__main__":
    main()
