"""Sliding-tile kernel: the same search as the pure-Python core, Korf's instances and 8-puzzle facts."""

from __future__ import annotations

import random

import pytest

from tests.worker.domains.test_tiles import bfs, korf
from tests.worker.kernels.traces import both_traces
from worker.domains.tiles import KIND, TilesSchema, TilesSpace
from worker.engine import Budget, SearchConfig, solve

CONFIGS = [
    SearchConfig(weight=1.0),
    SearchConfig(weight=2.0),
    SearchConfig(weight=3.0, schedule="decreasing", weight_step=0.5),
    SearchConfig(weight=1.5, reopen="defer"),
    SearchConfig(weight=4.0, schedule="decreasing", weight_step=1.0, reopen="defer", bound_share=0.25),
    SearchConfig(weight=2.0, bound_share=0.4),
    SearchConfig(weight=2.5, bound_share=0.0),
]
BOARDS = [(3, 3), (3, 3), (4, 4), (2, 3), (3, 2), (2, 2), (4, 3), (2, 4), (8, 2)]

# source: Korf 1985, Table 1 -- of its 100 instances, the twenty that A* with Manhattan distance
# plus linear conflicts proves with the fewest expansions (about 12,000 to 110,000 each).
KORF_IDS = [12, 42, 48, 79, 86, 55, 9, 47, 97, 71, 31, 19, 85, 61, 30, 73, 94, 13, 45, 93]


def walk(rng: random.Random, goal: list[int], width: int, height: int, steps: int) -> list[int]:
    """Return the board reached from ``goal`` by ``steps`` random blank moves."""
    tiles = list(goal)
    b = tiles.index(0)
    for _ in range(steps):
        r, c = divmod(b, width)
        q = rng.choice([(r + dr) * width + c + dc for dr, dc in ((-1, 0), (1, 0), (0, -1), (0, 1))
                        if 0 <= r + dr < height and 0 <= c + dc < width])
        tiles[b], tiles[q] = tiles[q], 0
        b = q
    return tiles


def board(tiles, width=None, height=None, goal=None) -> TilesSpace:
    body = {"tiles": list(tiles)}
    if width is not None:
        body.update(width=width, height=height)
    if goal is not None:
        body["goal"] = list(goal)
    return TilesSpace(TilesSchema().load(body))


@pytest.mark.parametrize("seed", range(40))
def test_tiles_kernel_matches_the_python_core(compiled, seed):
    rng = random.Random(seed)
    width, height = BOARDS[seed % len(BOARDS)]
    goal = list(range(width * height))
    if rng.random() < 0.4:
        rng.shuffle(goal)
    tiles = walk(rng, goal, width, height, rng.randint(0, 80 if width * height > 9 else 300))
    space = board(tiles, width, height, goal)
    config = CONFIGS[seed % len(CONFIGS)]
    budget = Budget(expansions=rng.choice([20_000, rng.randint(1, 200)]))
    python, native = both_traces(compiled, space, config, budget)
    assert native == python


def test_eight_puzzle_distances_on_the_compiled_backend(compiled):
    # source: exhaustive breadth-first search from the goal (independent of the engine), and
    # Reinefeld 1993: the two farthest 8-puzzle boards lie 31 moves from the goal
    dist = bfs(tuple(range(9)), 3, 3)
    assert len(dist) == 181_440
    farthest = [s for s, d in dist.items() if d == 31]
    assert len(farthest) == 2 and max(dist.values()) == 31
    rng = random.Random(3)
    sample = farthest + rng.sample(sorted(dist), 60)
    for tiles in sample:
        space = board(tiles)
        for config in (SearchConfig(weight=1.0), SearchConfig(weight=3.0, schedule="decreasing")):
            improvements, fin = solve(space, config)
            assert fin.backend == "compiled" and fin.proven_optimal and fin.cost == dist[tiles]
            assert all(imp.lower_bound <= dist[tiles] <= imp.cost for imp in improvements)


@pytest.mark.parametrize("ident", KORF_IDS)
def test_korf_instances_proven_optimal_on_the_compiled_backend(compiled, datasets, ident):
    # source: Korf 1985, Table 1 optimal solution lengths (blank-first goal)
    optimal, tiles = korf(datasets)[ident]
    space = board(tiles)
    _, fin = solve(space, SearchConfig(weight=1.0), Budget(expansions=2_000_000))
    assert fin.backend == "compiled" and fin.proven_optimal and fin.cost == optimal
    steps = space.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
    assert KIND.validate(space.problem, steps) == optimal


@pytest.mark.parametrize("ident", [9, 12, 42, 79])
def test_korf_anytime_search_ends_proven_optimal(compiled, datasets, ident):
    # source: Korf 1985, Table 1 optimal solution lengths
    optimal, tiles = korf(datasets)[ident]
    space = board(tiles)
    improvements, fin = solve(space, SearchConfig(weight=3.0, schedule="decreasing"), Budget(expansions=5_000_000))
    assert fin.proven_optimal and fin.cost == optimal
    assert improvements[0].cost >= optimal and improvements[0].counters.expansions < fin.counters.expansions
    assert all(imp.lower_bound <= optimal <= imp.cost for imp in improvements)


def test_boards_that_do_not_pack_into_64_bits_stay_in_python(compiled):
    # 5 x 5: 25 cells of 5 bits each
    space = board(walk(random.Random(1), list(range(25)), 5, 5, 12))
    assert compiled.make_core(space, SearchConfig()) is None
    _, fin = solve(space, SearchConfig(weight=1.0))
    assert fin.backend == "python" and fin.proven_optimal and fin.cost <= 12


def test_memory_per_stored_state_is_reported(compiled, datasets):
    _, tiles = korf(datasets)[12]
    space = board(tiles)
    core = compiled.make_core(space, SearchConfig(weight=1.0))
    solve(space, SearchConfig(weight=1.0), core=core)
    assert core.stored > 10_000
    # board 8, g 8, h 8, parent 4, closed 1, blank 1 per node; table slots 12 bytes at most 70% full
    assert 30 + 12 / 0.7 <= core.bytes_per_state() < 400
