"""Grid kernel: the same search as the pure-Python core, step for step, and the published benchmark optima."""

from __future__ import annotations

import dataclasses
import random
import sys
import threading
import time

import pytest

from tests.worker.domains.refs import cost_to_go, free_cells, grid_graph, random_rows
from tests.worker.domains.test_grid import read_scenarios, scenario_problem
from tests.worker.kernels.traces import both_traces
from worker.domains.grid import KIND, GridSchema, GridSpace
from worker.engine import Budget, SearchConfig, StepStatus, solve
from worker.engine.core import PythonCore

CONFIGS = [
    SearchConfig(weight=1.0),
    SearchConfig(weight=2.0),
    SearchConfig(weight=3.0, schedule="decreasing", weight_step=0.5),
    SearchConfig(weight=1.5, reopen="defer"),
    SearchConfig(weight=5.0, schedule="decreasing", weight_step=1.0, reopen="defer", bound_share=0.25),
    SearchConfig(weight=2.0, bound_share=0.4),  # 1/0.4 = 2.5 rounds half to even: every 2nd expansion
    SearchConfig(weight=2.0, bound_share=0.0),
    SearchConfig(weight=1.2, bound_share=0.5, g_tolerance=1e-6),
]


def random_space(rng: random.Random, moves: int, corner_cutting: bool, goals: int):
    h, w = rng.randint(2, 36), rng.randint(2, 36)
    rows = random_rows(rng, h, w, rng.choice([0.0, 0.15, 0.3, 0.4]), terrain=rng.random() < 0.6)
    cells = free_cells(rows)
    if len(cells) < 2:
        rows[0] = "." + rows[0][1:]
        rows[-1] = rows[-1][:-1] + "."
        cells = free_cells(rows)
    start = rng.choice(cells)
    targets = [rng.choice(cells) for _ in range(goals)]
    problem = GridSchema().load({"rows": rows, "moves": moves, "corner_cutting": corner_cutting,
                                 "start": list(start), "goals": [list(t) for t in targets]})
    return rows, start, targets, GridSpace(problem)


@pytest.mark.parametrize("seed", range(48))
def test_grid_kernel_matches_the_python_core_and_networkx(compiled, seed):
    rng = random.Random(seed)
    moves, cut = rng.choice([(4, False), (8, False), (8, True)])
    goals = rng.choice([1, 1, 3, 12])  # 12 goals: h is measured to their bounding box
    rows, start, targets, space = random_space(rng, moves, cut, goals)
    config = CONFIGS[seed % len(CONFIGS)]
    budget = Budget(expansions=rng.choice([None, rng.randint(1, 120)]))
    python, native = both_traces(compiled, space, config, budget)
    assert native == python
    fin = native[-1]
    if fin[7].value == "exhausted":
        dist = cost_to_go(grid_graph(rows, moves, cut), targets)  # source: networkx Dijkstra
        if start in dist:
            assert fin[8] and fin[1] == pytest.approx(dist[start], rel=1e-9)
        else:
            assert fin[9] and fin[1] is None


# A floor plan on which the open list runs empty while states still wait on INCONS
# (weight 3, lowered after each plan, deferred reopening): they must go back to open.
DEFER_ROWS = [
    "23#.......333..3...32#", "...3.3.#.3...23..33.3.", "3#3..........#.#2..3..", ".22.3...#.2.3..3....#2",
    "2#3..3....22.2.2..3.3#", ".3.2.......3...#...3.3", ".....2.33#.......2....", "3..2...332........3.3.",
    "33..3....3322.2.#.##..", "...2.#..23.#..2#3.....", "...#..33#..3##323..33.", "...#.......3..#..33..2",
    "..#..3..32...3...#3333", "3..3.#.233.223.#.....3", ".#32.......3......223.", "..2..........#...3....",
    "...2.2..#.......#23..3", "2...223.32...3....#...", "3.3......2.3.3..32..33", "..233...3##.......2#3.",
    ".....#...#3.#2....33.#", "2#3....3#...#..2.33..2", ".3..2#3.2.32..........", "#23..#322..2#..#3.3...",
]


def test_deferred_states_return_when_open_runs_empty(compiled):
    problem = {"rows": DEFER_ROWS, "moves": 4, "corner_cutting": True, "start": [0, 15], "goals": [[21, 14]]}
    space = GridSpace(GridSchema().load(problem))
    config = SearchConfig(weight=3.0, schedule="decreasing", reopen="defer", bound_share=0.0)
    python, native = both_traces(compiled, space, config, Budget())
    assert native == python
    optimal = cost_to_go(grid_graph(DEFER_ROWS, 4, True), [(21, 14)])[(0, 15)]  # source: networkx Dijkstra
    assert len(native) >= 3 and native[-1][8] and native[-1][1] == pytest.approx(optimal, rel=1e-9)


def test_step_statuses_and_counters_match_slice_by_slice(compiled):
    rng = random.Random(7)
    rows = random_rows(rng, 60, 60, 0.25, terrain=True)
    rows[0] = "." + rows[0][1:]
    rows[-1] = rows[-1][:-1] + "."
    space = GridSpace(GridSchema().load({"rows": rows, "start": [0, 0], "goals": [[59, 59]]}))
    config = SearchConfig(weight=3.0, schedule="decreasing", bound_share=0.2)
    py, native = PythonCore(space, config), compiled.make_core(space, config)
    for n in [1, 5, 50, 1, 500, 37] * 40:
        a, b = py.step(n), native.step(n)
        assert (a, py.expansions, py.generated, py.reopened, py.stored, py.incumbent, py.weight) == \
               (b, native.expansions, native.generated, native.reopened, native.stored, native.incumbent,
                native.weight)
        assert py.lower_bound() == native.lower_bound()
        if a is StepStatus.DONE:
            break
    assert py.finished and native.finished
    assert py.incumbent_path() == native.incumbent_path()


def test_start_on_a_goal_and_a_walled_in_goal(compiled):
    free = GridSpace(GridSchema().load({"rows": ["...", "..."], "start": [0, 0], "goals": [[0, 0]]}))
    imps, fin = solve(free, SearchConfig(), core=compiled.make_core(free, SearchConfig()))
    assert [i.cost for i in imps] == [0.0] and fin.proven_optimal and fin.backend == "compiled"
    walled = GridSpace(GridSchema().load({"rows": ["..#.", "..#."], "start": [0, 0], "goals": [[1, 3]]}))
    imps, fin = solve(walled, SearchConfig(), core=compiled.make_core(walled, SearchConfig()))
    assert not imps and fin.proven_infeasible and fin.counters.stored == 4


@pytest.mark.parametrize("name", ["maze-128-128-2-random-1.scen", "room-64-64-8-random-1.scen",
                                  "random-32-32-10-even-1.scen"])
def test_benchmark_scenarios_on_the_compiled_backend(compiled, datasets, name):
    # source: Sturtevant 2012 grid benchmarks (MAPF set), column 9 = optimal octile length without
    # corner cutting; the lengths have 8 decimals, hence the 1e-4 tolerance
    map_text, scenarios = read_scenarios(datasets, name)
    base = scenario_problem(map_text, scenarios[0][0], scenarios[0][1])
    anytime = SearchConfig(weight=3.0, schedule="decreasing")
    for i, (start, goal, optimal) in enumerate(scenarios):
        problem = dataclasses.replace(base, start=start, goals=(goal,))
        space = KIND.build(problem)
        config = anytime if i % 2 else SearchConfig(weight=1.0)
        improvements, fin = solve(space, config)
        assert fin.backend == "compiled" and fin.proven_optimal
        assert abs(fin.cost - optimal) < 1e-4, (name, start, goal)
        assert all(imp.lower_bound <= optimal + 1e-4 <= imp.cost + 2e-4 for imp in improvements)
        if i % 50 == 0:
            steps = space.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
            assert KIND.validate(problem, steps) == pytest.approx(fin.cost, rel=1e-9)


def test_memory_per_stored_state_is_reported(compiled):
    rows = ["." * 200] * 200
    space = GridSpace(GridSchema().load({"rows": rows, "start": [0, 0], "goals": [[199, 199]]}))
    core = compiled.make_core(space, SearchConfig(weight=1.0))
    solve(space, SearchConfig(weight=1.0), core=core)
    # per cell: g, h (8 bytes each), parent (4), closed, terrain and goal flags; plus the heaps
    assert core.memory_bytes() >= 23 * 200 * 200
    assert core.bytes_per_state() == pytest.approx(core.memory_bytes() / core.stored)


def test_the_search_loop_lets_other_threads_run(compiled):
    # A step holding the GIL would freeze every other Python thread from one switch interval
    # after it starts until it returns, so the main thread could not run in its middle half.
    # The goal is walled in: the whole step is the compiled loop, with no plan to rebuild in Python.
    rows = ["." * 600] * 597 + ["." * 597 + "###", "." * 597 + "#..", "." * 597 + "#.."]
    space = GridSpace(GridSchema().load({"rows": rows, "start": [0, 0], "goals": [[599, 599]]}))
    core = compiled.make_core(space, SearchConfig(weight=1.0, bound_share=0.0))
    window = []

    def search_once():
        t0 = time.perf_counter()
        core.step(10**9)
        window.extend([t0, time.perf_counter()])

    worker = threading.Thread(target=search_once)
    ticks = []
    worker.start()
    while worker.is_alive():
        ticks.append(time.perf_counter())
    worker.join()
    start, end = window
    assert core.finished and core.incumbent_path() is None and end - start > 4 * sys.getswitchinterval()
    middle = [t for t in ticks if start + (end - start) / 4 < t < end - (end - start) / 4]
    assert len(middle) >= 10, f"{len(middle)} main-thread ticks in the middle half of a {end - start:.3f} s step"
