"""Sliding-tile domain: 8-puzzle facts, Korf's 15-puzzle instances, linear-conflict admissibility, bad input."""

from __future__ import annotations

import random
from collections import Counter, deque
from itertools import permutations

import pytest

from worker.domains.tiles import KIND, TilesSchema, TilesSpace, solvable
from worker.engine import Budget, SearchConfig, solve
from worker.exceptions import RequestError
from worker.request import parse_request

GOAL8 = (0, 1, 2, 3, 4, 5, 6, 7, 8)


def bfs(goal, width, height):
    """Return every board reachable from ``goal`` with its move distance (own exhaustive BFS on tuples)."""
    dist = {goal: 0}
    queue = deque([goal])
    while queue:
        s = queue.popleft()
        b = s.index(0)
        r, c = divmod(b, width)
        for dr, dc in ((-1, 0), (1, 0), (0, -1), (0, 1)):
            if 0 <= r + dr < height and 0 <= c + dc < width:
                q = (r + dr) * width + c + dc
                t = list(s)
                t[b], t[q] = t[q], 0
                t = tuple(t)
                if t not in dist:
                    dist[t] = dist[s] + 1
                    queue.append(t)
    return dist


@pytest.fixture(scope="module")
def eight_puzzle():
    return bfs(GOAL8, 3, 3)


def space(tiles, **extra):
    return TilesSpace(TilesSchema().load({"tiles": list(tiles), **extra}))


def korf(datasets):
    """Return {id: (optimal length, tiles)} from the Korf 1985 Table 1 file."""
    out = {}
    for line in (datasets / "korf15" / "korf100.csv").read_text().splitlines():
        if line.startswith("#") or line.startswith("id,"):
            continue
        ident, optimal, _, _, tiles = line.split(",")
        out[int(ident)] = (int(optimal), [int(t) for t in tiles.split()])
    return out


def test_eight_puzzle_state_space_facts(eight_puzzle):
    # source: Reinefeld 1993: 181,440 states reachable; the farthest, two of them, at 31 moves
    assert len(eight_puzzle) == 181440
    by_depth = Counter(eight_puzzle.values())
    assert max(by_depth) == 31 and by_depth[31] == 2
    # the domain's own successor function spans the same space, depth by depth
    sp = space(GOAL8)
    seen = {sp.initial_state(): 0}
    queue = deque(seen)
    while queue:
        s = queue.popleft()
        for t, cost, _ in sp.successors(s):
            assert cost == 1.0
            if t not in seen:
                seen[t] = seen[s] + 1
                queue.append(t)
    assert Counter(seen.values()) == by_depth
    assert {tuple(sp.decode(s)) for s, d in seen.items() if d == 31} == {
        s for s, d in eight_puzzle.items() if d == 31}


def test_engine_solves_the_two_hardest_eight_puzzles(eight_puzzle):
    hardest = [s for s, d in eight_puzzle.items() if d == 31]
    for tiles in hardest:  # source: Reinefeld 1993, the two states at distance 31 (checked by own BFS above)
        sp = space(tiles)
        _, fin = solve(sp, SearchConfig(weight=1.0))
        assert fin.proven_optimal and fin.cost == 31
        steps = sp.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
        assert KIND.validate(sp.problem, steps) == 31


def test_linear_conflict_is_admissible_on_every_eight_puzzle(eight_puzzle):
    sp = space(GOAL8)
    # BFS over the domain's states (h travels inside them), then compare with the own tuple BFS
    seen = {sp.initial_state()}
    queue = deque(seen)
    checked = 0
    while queue:
        s = queue.popleft()
        assert sp.heuristic(s) <= eight_puzzle[tuple(sp.decode(s))]  # source: own exhaustive BFS
        checked += 1
        for t, _, _ in sp.successors(s):
            if t not in seen:
                seen.add(t)
                queue.append(t)
    assert checked == 181440


def _naive_pairs(tiles):
    """Manhattan distance + 2 per conflicting pair in a line: the overestimating variant."""
    md = sum(abs(i // 3 - v // 3) + abs(i % 3 - v % 3) for i, v in enumerate(tiles) if v)
    pairs = 0
    for r in range(3):
        line = [v % 3 for v in tiles[r * 3:r * 3 + 3] if v and v // 3 == r]
        pairs += sum(1 for i in range(len(line)) for j in range(i + 1, len(line)) if line[i] > line[j])
    for c in range(3):
        line = [v // 3 for v in tiles[c::3] if v and v % 3 == c]
        pairs += sum(1 for i in range(len(line)) for j in range(i + 1, len(line)) if line[i] > line[j])
    return md + 2 * pairs


@pytest.mark.parametrize("tiles,optimal", [
    ((6, 7, 8, 5, 4, 3, 0, 1, 2), 26),  # source: own exhaustive BFS; the pair count gives 28 here
    ((7, 8, 0, 6, 5, 4, 1, 2, 3), 24),  # source: own exhaustive BFS
])
def test_linear_conflict_regressions(eight_puzzle, tiles, optimal):
    assert eight_puzzle[tiles] == optimal
    sp = space(tiles)
    assert sp.heuristic(sp.initial_state()) <= optimal
    assert sp.full_heuristic(list(tiles)) == sp.heuristic(sp.initial_state())
    _, fin = solve(sp, SearchConfig(weight=1.0))
    assert fin.cost == optimal


def test_pair_count_variant_overestimates_where_ours_does_not(eight_puzzle):
    sp = space(GOAL8)
    over = [s for s, d in eight_puzzle.items() if _naive_pairs(s) > d]
    assert over, "the regression states exist"  # source: own exhaustive BFS
    assert (6, 7, 8, 5, 4, 3, 0, 1, 2) in over
    assert all(sp.full_heuristic(list(s)) <= eight_puzzle[s] for s in over)


def test_linear_conflict_adds_two_per_removed_tile():
    # 2 and 1 swapped in the top row: Manhattan 2, one tile must leave the row: +2
    assert space(GOAL8).full_heuristic([0, 2, 1, 3, 4, 5, 6, 7, 8]) == 4  # from the definition
    # 3 2 1 in the top row of a 4x4: Manhattan 4, two of the three must leave: +4
    assert space(range(16)).full_heuristic([0, 3, 2, 1] + list(range(4, 16))) == 8
    # the same in a column, and both at once (Hansson, Mayer & Yung 1992: rows and columns add up)
    assert space(GOAL8).full_heuristic([0, 1, 2, 6, 4, 5, 3, 7, 8]) == 4
    assert space(GOAL8).full_heuristic([0, 2, 1, 6, 4, 5, 3, 7, 8]) == 8


@pytest.mark.parametrize("width,height,seed", [(4, 4, 1), (3, 4, 2), (5, 2, 3), (2, 3, 4)])
def test_incremental_heuristic_equals_full(width, height, seed):
    rng = random.Random(seed)
    n = width * height
    goal = list(range(n))
    rng.shuffle(goal)
    sp = TilesSpace(TilesSchema().load({"width": width, "height": height, "tiles": goal, "goal": goal}))
    s = sp.initial_state()
    assert sp.is_goal(s) and sp.heuristic(s) == 0
    for _ in range(3000):
        s = rng.choice(sp.successors(s))[0]
        assert sp.heuristic(s) == sp.full_heuristic(sp.decode(s))


@pytest.mark.parametrize("width,height", [(2, 3), (3, 2), (2, 4)])
def test_parity_rule_matches_reachability(width, height):
    n = width * height
    goal = tuple(range(n))
    reachable = bfs(goal, width, height)  # source: own exhaustive BFS
    count = 0
    for perm in permutations(range(n)):
        assert solvable(width, perm, goal) == (perm in reachable)
        count += 1
    assert len(reachable) * 2 == count


def test_rectangular_boards_and_custom_goals_match_bfs():
    rng = random.Random(5)
    goal = (1, 2, 3, 4, 5, 6, 7, 0)
    dist = bfs(goal, 4, 2)  # source: own exhaustive BFS
    for tiles in rng.sample(sorted(dist), 25):
        sp = TilesSpace(TilesSchema().load({"width": 4, "height": 2, "tiles": list(tiles), "goal": list(goal)}))
        _, fin = solve(sp, SearchConfig(weight=rng.choice([1.0, 2.0])))
        assert fin.proven_optimal and fin.cost == dist[tiles]
        steps = sp.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
        assert KIND.validate(sp.problem, steps) == dist[tiles]


@pytest.mark.parametrize("ident", [12, 42, 79])
def test_korf_instances_proven_optimal(datasets, ident):
    # source: Korf 1985, Table 1 (the instances with the fewest IDA* nodes), blank-first goal
    optimal, tiles = korf(datasets)[ident]
    sp = space(tiles)
    _, fin = solve(sp, SearchConfig(weight=1.0), Budget(expansions=60_000))
    assert fin.proven_optimal and fin.cost == optimal
    steps = sp.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
    assert KIND.validate(sp.problem, steps) == optimal


def test_korf_instance_with_the_blank_last_goal(datasets):
    # source: Korf 1985, Table 1 #12 (45 moves); turning the board 180 degrees and mapping
    # v -> 16 - v gives the same puzzle for the goal 1..15 then blank (see the data set's notes)
    optimal, tiles = korf(datasets)[12]
    turned = [0 if v == 0 else 16 - v for v in reversed(tiles)]
    sp = space(turned, goal=list(range(1, 16)) + [0])
    _, fin = solve(sp, SearchConfig(weight=1.0), Budget(expansions=60_000))
    assert fin.proven_optimal and fin.cost == optimal


@pytest.mark.parametrize("ident,weight", [(1, 2.0), (17, 3.0), (60, 1.5), (88, 5.0)])
def test_korf_bounds_are_honest_under_a_budget(datasets, ident, weight):
    # source: Korf 1985, Table 1 optimal lengths: every reported bound must cover cost / optimum
    optimal, tiles = korf(datasets)[ident]
    sp = space(tiles)
    improvements, fin = solve(sp, SearchConfig(weight=weight), Budget(expansions=15_000))
    assert improvements, "a plan is found within the budget"
    for imp in improvements:
        assert imp.cost >= optimal
        assert imp.lower_bound <= optimal
        assert imp.bound >= imp.cost / optimal - 1e-9
    assert fin.lower_bound <= optimal and fin.bound >= fin.cost / optimal - 1e-9
    steps = sp.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
    assert KIND.validate(sp.problem, steps) == fin.cost


def test_example_and_kernel_spec(eight_puzzle):
    req = parse_request({"problem": dict(KIND.example), "budget": {}})
    _, fin = solve(req.space, SearchConfig(weight=1.0))
    assert fin.cost == eight_puzzle[tuple(KIND.example["tiles"])]  # source: own exhaustive BFS
    assert KIND.sizes(req.problem) == {"tiles": 9}
    assert req.space.kernel_spec() == {"kind": "tiles", "width": 3, "height": 3,
                                       "tiles": KIND.example["tiles"], "goal": KIND.example["goal"]}
    steps = req.space.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
    assert steps[-1]["state"] == KIND.example["goal"]
    assert {s["action"] for s in steps} <= {"up", "down", "left", "right"}


def test_successor_order_is_up_down_left_right():
    sp = space((1, 2, 3, 4, 0, 5, 6, 7, 8))
    succ = sp.successors(sp.initial_state())
    assert [a for _, _, a in succ] == ["up", "down", "left", "right"]
    assert [sp.decode(t) for t, _, _ in succ] == [
        [1, 0, 3, 4, 2, 5, 6, 7, 8], [1, 2, 3, 4, 7, 5, 6, 0, 8],
        [1, 2, 3, 0, 4, 5, 6, 7, 8], [1, 2, 3, 4, 5, 0, 6, 7, 8]]
    corner = space(GOAL8)
    assert [a for _, _, a in corner.successors(corner.initial_state())] == ["down", "right"]


def _doc(**problem):
    body = {"domain": "sliding-tile", "tiles": [1, 0, 2, 3, 4, 5, 6, 7, 8]}
    body.update(problem)
    return {"problem": {k: v for k, v in body.items() if v is not None}, "budget": {}}


@pytest.mark.parametrize("change,field,words", [
    ({"tiles": [1, 0, 2, 3, 4, 5, 6, 7]}, "problem.tiles", "not a square"),
    ({"width": 3, "height": 3, "tiles": [1, 0, 2, 3]}, "problem.tiles", "needs 9"),
    ({"tiles": [1, 0, 2, 3, 4, 5, 6, 7, 7]}, "problem.tiles.8", "twice"),
    ({"tiles": [1, 0, 2, 3, 4, 5, 6, 7, 9]}, "problem.tiles.8", "outside"),
    ({"tiles": [0, 2, 1, 3, 4, 5, 6, 7, 8]}, "problem.tiles", "cannot be reached"),
    ({"tiles": ["1", 0, 2, 3, 4, 5, 6, 7, 8]}, "problem.tiles.0", "integer"),
    ({"tiles": None}, "problem.tiles", "required"),
    ({"width": 3}, "problem.height", "together"),
    ({"height": 3}, "problem.width", "together"),
    ({"width": 1, "height": 9}, "problem.width", "between 2"),
    ({"goal": [0, 1, 2]}, "problem.goal", "has 3 values"),
    ({"goal": [0, 1, 2, 3, 4, 5, 6, 8, 8]}, "problem.goal.8", "twice"),
    ({"size": 3}, "problem.size", "unknown"),
])
def test_bad_problems_name_their_field(change, field, words):
    with pytest.raises(RequestError) as err:
        parse_request(_doc(**change))
    assert err.value.field == field
    assert words.lower() in err.value.message.lower()
