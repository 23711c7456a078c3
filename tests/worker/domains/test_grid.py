"""Grid domain: the public grid benchmarks, networkx Dijkstra on random floor plans, the rules, bad input."""

from __future__ import annotations

import dataclasses
import math
import random

import pytest

from tests.worker.domains.refs import SQRT2, cost_to_go, free_cells, grid_graph, random_rows
from worker.domains.grid import DIRECTIONS, KIND, GridSchema
from worker.domains.gridmap import parse_map
from worker.engine import Budget, SearchConfig, solve
from worker.engine.core import PythonCore
from worker.exceptions import ProblemError, RequestError
from worker.request import parse_request

# Every line of these files (4585) is run: about 5 s with the compiled kernels,
# about 20 s in pure Python. tests/bench/grid_scenarios.py times the same lines.
SCENARIOS = [
    "maze-32-32-2-random-1.scen",
    "maze-32-32-2-even-1.scen",
    "random-32-32-10-random-1.scen",
    "random-32-32-10-even-1.scen",
    "room-32-32-4-random-1.scen",
    "room-32-32-4-even-1.scen",
    "random-64-64-10-random-1.scen",
    "room-64-64-8-random-1.scen",
    "maze-128-128-2-random-1.scen",
]
# source: Sturtevant 2012 / the data set's notes: scenario lines per file
LINES = {"maze-32-32-2-random-1.scen": 333, "maze-32-32-2-even-1.scen": 230, "random-32-32-10-random-1.scen": 461,
         "random-32-32-10-even-1.scen": 90, "room-32-32-4-random-1.scen": 341, "room-32-32-4-even-1.scen": 130,
         "random-64-64-10-random-1.scen": 1000, "room-64-64-8-random-1.scen": 1000,
         "maze-128-128-2-random-1.scen": 1000}


def read_scenarios(folder, name):
    """Return the map text and [(start, goal, optimal length)] of a scenario file, cells as (row, col)."""
    lines = (folder / "movingai" / name).read_text().splitlines()
    assert lines[0].strip() == "version 1"
    out, map_name = [], None
    for line in lines[1:]:
        if not line.strip():
            continue
        f = line.split("\t")
        map_name = f[1]
        sx, sy, gx, gy = map(int, f[4:8])  # x is the column, y the row
        out.append(((sy, sx), (gy, gx), float(f[8])))
    return (folder / "movingai" / map_name).read_text(), out


def scenario_problem(map_text, start, goal):
    return GridSchema().load({"map": map_text, "start": list(start), "goals": [list(goal)]})


@pytest.mark.parametrize("name", SCENARIOS)
def test_benchmark_scenarios_reach_the_published_optimum(datasets, name):
    # source: Sturtevant 2012 grid benchmarks (MAPF set), column 9 = optimal octile length
    # without corner cutting, compared with a tolerance of 1e-4 as the lengths have 8 decimals
    map_text, scenarios = read_scenarios(datasets, name)
    base = scenario_problem(map_text, scenarios[0][0], scenarios[0][1])
    checked = 0
    for start, goal, optimal in scenarios:
        problem = dataclasses.replace(base, start=start, goals=(goal,))
        space = KIND.build(problem)
        _, fin = solve(space, SearchConfig(weight=1.0))
        assert fin.proven_optimal
        assert abs(fin.cost - optimal) < 1e-4, (name, start, goal)
        steps = space.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
        assert KIND.validate(problem, steps) == pytest.approx(fin.cost, rel=1e-9)
        checked += 1
    assert checked == LINES[name]


@pytest.mark.parametrize("name", SCENARIOS)
def test_benchmark_scenarios_in_pure_python_with_a_weight(datasets, name):
    # source: Sturtevant 2012 grid benchmarks (MAPF set), column 9 optimal lengths.
    # The pure-Python core runs the domain's own successor code whatever backend is built;
    # a weight of 2 with no budget must still end proven optimal.
    map_text, scenarios = read_scenarios(datasets, name)
    base = scenario_problem(map_text, scenarios[0][0], scenarios[0][1])
    config = SearchConfig(weight=2.0)
    for start, goal, optimal in scenarios[::25]:
        space = KIND.build(dataclasses.replace(base, start=start, goals=(goal,)))
        improvements, fin = solve(space, config, core=PythonCore(space, config))
        assert fin.proven_optimal and abs(fin.cost - optimal) < 1e-4
        assert all(imp.cost >= optimal - 1e-4 for imp in improvements)


@pytest.mark.parametrize("seed", range(40))
def test_random_floor_plans_match_networkx(seed):
    rng = random.Random(seed)
    h, w = rng.randint(1, 12), rng.randint(2, 14)
    moves, cut = rng.choice([4, 8]), rng.random() < 0.3
    cells: list = []
    while len(cells) < 2:
        rows = random_rows(rng, h, w, rng.choice([0.0, 0.2, 0.35]), terrain=rng.random() < 0.7)
        cells = free_cells(rows)
    start = rng.choice(cells)
    goals = rng.sample(cells, k=min(len(cells), rng.choice([1, 2, 3, 12])))
    problem = GridSchema().load({"rows": rows, "moves": moves, "corner_cutting": cut,
                                 "start": list(start), "goals": [list(g) for g in goals]})
    space = KIND.build(problem)
    togo = cost_to_go(grid_graph(rows, moves, cut), goals)  # source: networkx dijkstra
    config = SearchConfig(weight=rng.choice([1.0, 1.5, 3.0]))
    _, fin = solve(space, config)
    if start not in togo:
        assert fin.proven_infeasible and fin.cost is None
        return
    assert fin.proven_optimal
    assert fin.cost == pytest.approx(togo[start], rel=1e-9, abs=1e-9)
    steps = space.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
    assert KIND.validate(problem, steps) == pytest.approx(togo[start], rel=1e-9, abs=1e-9)


@pytest.mark.parametrize("seed", range(12))
def test_heuristic_is_admissible_and_consistent(seed):
    rng = random.Random(100 + seed)
    moves = 8 if seed % 2 else 4
    rows = random_rows(rng, 10, 11, 0.25, terrain=seed % 3 != 0)
    cells = free_cells(rows)
    goals = rng.sample(cells, k=[1, 3, 12][seed % 3])
    problem = GridSchema().load({"rows": rows, "moves": moves, "start": list(cells[0]),
                                 "goals": [list(g) for g in goals]})
    space = KIND.build(problem)
    togo = cost_to_go(grid_graph(rows, moves), goals)  # source: networkx dijkstra
    w = len(rows[0])
    for (r, c), d in togo.items():
        s = r * w + c
        hs = space.heuristic(s)
        assert hs <= d + 1e-9
        for t, cost, _ in space.successors(s):
            assert hs <= cost + space.heuristic(t) + 1e-9


def test_successor_order_costs_and_corner_rule():
    open_plan = GridSchema().load({"rows": ["...", "...", "..."], "start": [1, 1], "goals": [[0, 0]]})
    space = KIND.build(open_plan)
    succ = space.successors(4)
    assert [a for _, _, a in succ] == [d[0] for d in DIRECTIONS]
    assert [t for t, _, _ in succ] == [(1 + dr) * 3 + 1 + dc for _, dr, dc in DIRECTIONS]
    assert [c for _, c, _ in succ] == [SQRT2 if len(a) == 2 else 1.0 for _, _, a in succ]
    four = KIND.build(dataclasses.replace(open_plan, moves=4))
    assert [a for _, _, a in four.successors(4)] == ["N", "E", "S", "W"]
    walled = GridSchema().load({"rows": [".#.", "...", "..5"], "start": [1, 1], "goals": [[0, 0]]})
    assert [a for _, _, a in KIND.build(walled).successors(4)] == ["E", "SE", "S", "SW", "W"]
    cutting = KIND.build(dataclasses.replace(walled, corner_cutting=True))
    assert [(a, c) for _, c, a in cutting.successors(4)] == [
        ("NE", SQRT2), ("E", 1.0), ("SE", 5 * SQRT2), ("S", 1.0), ("SW", SQRT2), ("W", 1.0), ("NW", SQRT2)]
    corner = KIND.build(walled)
    assert [a for _, _, a in corner.successors(0)] == ["S"]  # from the top-left corner, E is blocked


def test_example_solves_and_renders():
    req = parse_request({"problem": dict(KIND.example), "budget": {}})
    _, fin = solve(req.space, SearchConfig(weight=1.0))
    rows = KIND.example["rows"]
    togo = cost_to_go(grid_graph(rows), [tuple(g) for g in KIND.example["goals"]])  # source: networkx dijkstra
    assert fin.cost == pytest.approx(togo[tuple(KIND.example["start"])])
    steps = req.space.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
    assert steps[-1]["state"] == KIND.example["goals"][0]
    assert all(set(s) == {"action", "cost", "state"} for s in steps)
    assert KIND.sizes(req.problem) == {"cells": len(rows) * len(rows[0])}


def test_start_on_a_goal_is_a_free_plan():
    problem = GridSchema().load({"rows": ["..", ".."], "start": [1, 1], "goals": [[0, 0], [1, 1]]})
    improvements, fin = solve(KIND.build(problem), SearchConfig())
    assert fin.cost == 0.0 and fin.proven_optimal and len(improvements) == 1
    assert KIND.validate(problem, []) == 0.0


def test_kernel_spec_is_plain_data():
    problem = GridSchema().load({"rows": ["2.#", "..9"], "moves": 4, "corner_cutting": True,
                                 "start": [1, 0], "goals": [[0, 1], [1, 2]]})
    spec = KIND.build(problem).kernel_spec()
    assert spec == {"kind": "grid", "width": 3, "height": 2, "cost": bytes([2, 1, 0, 1, 1, 9]), "moves": 4,
                    "corner_cutting": True, "start": 3, "goals": [1, 5], "h_scale": 1.0}


def test_grid_map_characters():
    terrain = parse_map("type octile\nheight 2\nwidth 4\nmap\n.GSW\n@OT.\n\n")
    assert (terrain.height, terrain.width) == (2, 4)
    assert list(terrain.costs) == [1, 1, 1, 1, 0, 0, 0, 1]


@pytest.mark.parametrize("text,words", [
    ("type square\nheight 1\nwidth 1\nmap\n.", "line 1"),
    ("type octile\nheight x\nwidth 1\nmap\n.", "line 2"),
    ("type octile\nheight 1\nwidth 1\n.", "line 4"),
    ("type octile\nheight 2\nwidth 2\nmap\n..\n.", "line 6"),
    ("type octile\nheight 2\nwidth 2\nmap\n..", "height 2"),
    ("type octile\nheight 1\nwidth 3\nmap\n.x.", "column 1"),
])
def test_grid_map_errors_name_the_line(text, words):
    with pytest.raises(ProblemError) as err:
        parse_map(text)
    assert err.value.field == "map" and words in err.value.message


def _doc(**problem):
    body = {"domain": "grid", "rows": ["....", ".#..", "...."], "start": [0, 0], "goals": [[2, 3]]}
    body.update(problem)
    return {"problem": {k: v for k, v in body.items() if v is not None}, "budget": {}}


@pytest.mark.parametrize("change,field,words", [
    ({"rows": ["....", ".#.", "...."]}, "problem.rows.1", "equally long"),
    ({"rows": ["....", ".#x.", "...."]}, "problem.rows.1", "column 2"),
    ({"rows": []}, "problem.rows", "at least one row"),
    ({"rows": None}, "problem.rows", "exactly one"),
    ({"map": "type octile\nheight 1\nwidth 1\nmap\n."}, "problem.rows", "exactly one"),
    ({"start": [3, 0]}, "problem.start", "outside"),
    ({"start": [1, 1]}, "problem.start", "blocked"),
    ({"start": [0, -1]}, "problem.start", "negative"),
    ({"start": [0, 0.5]}, "problem.start", "integer"),
    ({"start": "0,0"}, "problem.start", "[row, col]"),
    ({"goals": [[2, 3], [1, 1]]}, "problem.goals.1", "blocked"),
    ({"goals": [[2, 3], [0, 9]]}, "problem.goals.1", "outside"),
    ({"goals": []}, "problem.goals", "at least"),
    ({"goals": None}, "problem.goals", "required"),
    ({"moves": 6}, "problem.moves", "4 or 8"),
    ({"moves": 8.0}, "problem.moves", "integer"),
    ({"corner_cutting": "yes"}, "problem.corner_cutting", "true or false"),
    ({"goal": [2, 3]}, "problem.goal", "Unknown"),
])
def test_bad_problems_name_their_field(change, field, words):
    with pytest.raises(RequestError) as err:
        parse_request(_doc(**change))
    assert err.value.field == field
    assert words.lower() in err.value.message.lower()


def test_plan_cost_sums_with_terrain_and_diagonals():
    problem = GridSchema().load({"rows": ["3.", ".7"], "start": [0, 0], "goals": [[1, 1]]})
    space = KIND.build(problem)
    _, fin = solve(space, SearchConfig(weight=1.0), Budget())
    # cheapest: E (1) then S (7) = 8, or S (1) then E (7) = 8, or SE (7 * sqrt 2 = 9.9)
    assert fin.cost == pytest.approx(8.0)  # from the cost rule: a step into a cell costs that cell
    assert math.isclose(KIND.validate(problem, space.render_plan(*_path(fin))), 8.0)


def _path(fin):
    return fin.path.states, fin.path.actions, fin.path.costs
