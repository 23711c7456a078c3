"""Grid benchmark: every line of the public grid scenario files, against their optimal lengths.

Run by hand (not collected by the test command)::

    python3 tests/bench/grid_scenarios.py              # all 4585 lines, default backend
    python3 tests/bench/grid_scenarios.py --python     # force the pure-Python core
    python3 tests/bench/grid_scenarios.py --every 10   # every 10th line

For each scenario file it prints the lines run, the lines whose cost differs
from column 9 by more than 1e-4 (must be 0), the expansions, and the time of
our search (weight 1) beside a textbook heapq A* run on the same lines in the
same process, with their ratio (above 1: ours is faster).
"""

from __future__ import annotations

import argparse
import dataclasses
import os
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.bench.reference import grid_textbook  # noqa: E402
from worker.domains.grid import KIND, GridSchema  # noqa: E402
from worker.engine import SearchConfig, solve  # noqa: E402
from worker.engine.core import PythonCore  # noqa: E402

DATASETS = Path(os.environ.get("BOUNDWISE_DATASETS", Path(__file__).resolve().parents[3] / "shared" / "datasets"))


def scenarios(path: Path) -> tuple[str, list[tuple[tuple[int, int], tuple[int, int], float]]]:
    """Return the map text and the (start, goal, optimal) lines of a scenario file, cells as (row, col)."""
    lines = path.read_text().splitlines()[1:]
    out, map_name = [], ""
    for line in lines:
        if line.strip():
            f = line.split("\t")
            map_name = f[1]
            out.append(((int(f[5]), int(f[4])), (int(f[7]), int(f[6])), float(f[8])))
    return (path.parent / map_name).read_text(), out


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--every", type=int, default=1, help="run every n-th line")
    parser.add_argument("--python", action="store_true", help="force the pure-Python core")
    parser.add_argument("--no-reference", action="store_true", help="skip the textbook A* runs")
    args = parser.parse_args()
    folder = DATASETS / "movingai"
    if not folder.is_dir():
        print(f"no scenario folder at {folder} (set BOUNDWISE_DATASETS)")
        return 2
    config = SearchConfig(weight=1.0)
    total_bad = total_lines = 0
    total_ours = total_ref = 0.0
    print(f"{'scenario file':34} {'lines':>5} {'wrong':>5} {'expansions':>11} {'ours s':>8} "
          f"{'textbook s':>10} {'ratio':>6}")
    for path in sorted(folder.glob("*.scen")):
        text, lines = scenarios(path)
        lines = lines[::args.every]
        base = GridSchema().load({"map": text, "start": list(lines[0][0]), "goals": [list(lines[0][1])]})
        w = base.terrain.width
        rows = ["".join("." if k else "#" for k in base.terrain.costs[r * w:(r + 1) * w])
                for r in range(base.terrain.height)]
        bad = expansions = 0
        ours = ref = 0.0
        for start, goal, optimal in lines:
            space = KIND.build(dataclasses.replace(base, start=start, goals=(goal,)))
            t0 = time.perf_counter()
            core = PythonCore(space, config) if args.python else None
            _, fin = solve(space, config, core=core)
            ours += time.perf_counter() - t0
            expansions += fin.counters.expansions
            if fin.cost is None or abs(fin.cost - optimal) > 1e-4:
                bad += 1
            if not args.no_reference:
                t0 = time.perf_counter()
                cost, _, _ = grid_textbook(rows, start, goal)
                ref += time.perf_counter() - t0
                if cost is None or abs(cost - optimal) > 1e-4:
                    print(f"  the textbook reference disagrees on {start} -> {goal}")
        ratio = f"{ref / ours:6.2f}" if ref and ours else "     -"
        print(f"{path.name:34} {len(lines):5d} {bad:5d} {expansions:11d} {ours:8.2f} {ref:10.2f} {ratio}")
        total_bad += bad
        total_lines += len(lines)
        total_ours += ours
        total_ref += ref
    ratio = f"{total_ref / total_ours:6.2f}" if total_ref and total_ours else "     -"
    print(f"{'total':34} {total_lines:5d} {total_bad:5d} {'':11} {total_ours:8.2f} {total_ref:10.2f} {ratio}")
    return 1 if total_bad else 0


if __name__ == "__main__":
    raise SystemExit(main())
