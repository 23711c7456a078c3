"""Sequencing search against exhaustive enumeration of every order, on seeded random instances.

The reference below is written apart from the domain: it walks every order
that precedence allows, under the timing rule as documented (changeover
starts when the previous task ends, a task starts at max(arrival, release),
must end by its due, the return is added for a closed tour).
"""

from __future__ import annotations

import math
import random

import networkx as nx
import pytest

from worker.domains import load_problem
from worker.domains.sequencing import heuristic
from worker.domains.sequencing.heuristic import _prim, all_pairs_shortest
from worker.engine import Budget, SearchConfig, solve
from worker.exceptions import PlanValidationError, ProblemError

INF = math.inf


def random_doc(rng, n, *, objective, closed, windows, precedence, floats=False):
    """Return a random problem document; windows are set around a random order so most are feasible."""
    m = [[0.0 if i == j else (round(rng.uniform(0, 20), 2) if floats else rng.randint(0, 20))
          for j in range(n + 1)] for i in range(n + 1)]
    tasks = [{"id": f"j{i}", "duration": rng.randint(0, 6)} for i in range(n)]
    if windows:
        order = rng.sample(range(n), n)
        clock, last = 0, 0
        for i in order:
            clock += m[last][i + 1] + tasks[i]["duration"]
            last = i + 1
            if rng.random() < 0.4:
                tasks[i]["due"] = clock + rng.randint(-4, 12)
            if rng.random() < 0.3:
                tasks[i]["release"] = max(0, clock - tasks[i]["duration"] - rng.randint(0, 15))
    pairs = []
    if precedence:
        order = rng.sample(range(n), n)
        for _ in range(rng.randint(1, 3)):
            a, b = sorted(rng.sample(range(n), 2))
            pairs.append([f"j{order[a]}", f"j{order[b]}"])
    return {"domain": "sequencing", "objective": objective, "return_to_start": closed,
            "tasks": tasks, "setup": m, "precedence": pairs}


class Reference:
    """Exhaustive search over orders; cost-to-go memoized on (last, done, clock)."""

    def __init__(self, doc, matrix=None):
        self.doc = doc
        self.n = len(doc["tasks"])
        self.m = doc["setup"] if matrix is None else matrix
        self.before = {i: set() for i in range(self.n)}
        ids = [t["id"] for t in doc["tasks"]]
        for a, b in doc.get("precedence", ()):
            self.before[ids.index(b)].add(ids.index(a))
        self.makespan = doc["objective"] == "makespan"
        self.memo = {}

    def to_go(self, last, done, clock):
        """Return the least objective still to pay from here (INF when nothing is feasible)."""
        key = (last, done, clock)
        if key in self.memo:
            return self.memo[key]
        if len(done) == self.n:
            back = self.m[last][0] if self.doc["return_to_start"] else 0.0
            return back
        best = INF
        for i in range(self.n):
            if i in done or not self.before[i] <= done:
                continue
            t = self.doc["tasks"][i]
            change = self.m[last][i + 1]
            end = max(clock + change, t.get("release", 0)) + t["duration"]
            if "due" in t and end > t["due"] + 1e-9:
                continue
            rest = self.to_go(i + 1, done | {i}, end)
            step = end - clock if self.makespan else change
            best = min(best, step + rest)
        self.memo[key] = best
        return best

    def optimum(self):
        v = self.to_go(0, frozenset(), 0.0)
        return None if v == INF else v


def loaded(doc):
    kind, problem = load_problem(doc)
    return kind, problem, kind.build(problem)


def state_of(space, last, done, clock, cost):
    """Encode a reference state the way the space documents it (mask bit i - 1 for task i)."""
    mask = sum(1 << i for i in done)
    code = mask * space.n1 + last
    if not space.timed:
        return code
    return (code, clock) if space.makespan else (code, clock, cost)


CASES = [
    dict(objective=o, closed=c, windows=w, precedence=p)
    for o in ("setup", "makespan") for c in (False, True) for w in (False, True) for p in (False, True)
]


def instances(seed, count, n_range, **kw):
    """Yield (doc, reference optimum) for random documents the model accepts."""
    rng = random.Random(seed)
    made = 0
    while made < count:
        doc = random_doc(rng, rng.randint(*n_range), **kw)
        try:
            load_problem(doc)
        except ProblemError as err:  # a random window may be impossible alone: the model refuses it
            assert err.field.endswith(".due")
            continue
        made += 1
        yield doc, Reference(doc).optimum()


@pytest.mark.parametrize("case", CASES, ids=lambda c: "-".join(f"{k}={v}" for k, v in c.items()))
def test_optimum_equals_exhaustive_enumeration(case):
    feasible = infeasible = 0
    for k, (doc, opt) in enumerate(instances(100 + CASES.index(case), 6, (2, 7), **case)):
        kind, problem, space = loaded(doc)
        imps, fin = solve(space, SearchConfig(weight=1.0 + k % 3), Budget(expansions=200_000))
        assert fin.stop_reason.value == "exhausted"
        if opt is None:  # source: exhaustive enumeration found no order meeting every window
            infeasible += 1
            assert fin.proven_infeasible and fin.cost is None and not imps
            continue
        feasible += 1
        assert fin.proven_optimal
        assert fin.cost == pytest.approx(opt, rel=1e-9, abs=1e-9)  # source: exhaustive enumeration
        for imp in imps:  # bound honesty: cost / optimum never above the reported bound
            assert imp.lower_bound <= opt + 1e-9
            assert imp.cost / opt <= imp.bound * (1 + 1e-9) if opt > 0 else imp.cost == 0
            steps = space.render_plan(imp.path.states, imp.path.actions, imp.path.costs)
            assert kind.validate(problem, steps) == pytest.approx(imp.cost, rel=1e-9, abs=1e-9)
    assert feasible >= 1
    if case["windows"]:
        assert feasible + infeasible == 6


@pytest.mark.parametrize("objective", ["setup", "makespan"])
def test_eight_tasks_with_windows_and_a_large_weight(objective):
    for doc, opt in instances(81 + len(objective), 3, (8, 8), objective=objective, closed=True,
                              windows=True, precedence=True, floats=True):
        kind, problem, space = loaded(doc)
        imps, fin = solve(space, SearchConfig(weight=3.0, bound_share=0.2), Budget(expansions=500_000))
        if opt is None:
            assert fin.proven_infeasible
            continue
        assert fin.proven_optimal and fin.cost == pytest.approx(opt)  # source: exhaustive enumeration
        for imp in imps:
            assert imp.cost / opt <= imp.bound * (1 + 1e-9)


@pytest.mark.parametrize("metric", ["euclidean", "manhattan"])
@pytest.mark.parametrize("objective", ["setup", "makespan"])
def test_coordinates_with_windows_match_exhaustive_enumeration(metric, objective):
    rng = random.Random(len(metric) + len(objective))
    checked = 0
    for k in range(10):
        doc = random_doc(rng, rng.randint(3, 7), objective=objective, closed=k % 2 == 0, windows=True,
                         precedence=k % 3 == 0)
        del doc["setup"]
        doc["metric"] = metric
        for t in doc["tasks"]:
            t.update(x=rng.randint(0, 20), y=rng.randint(0, 20))
        if k % 2 == 0 or k % 4 == 1:  # a closed tour needs a start; open ones go both ways
            doc["start"] = {"x": 10, "y": 0}
        try:
            kind, problem = load_problem(doc)
        except ProblemError as err:  # a random due may be impossible alone
            assert err.field.endswith(".due")
            continue
        opt = Reference(doc, problem.matrix).optimum()  # source: exhaustive enumeration
        space = kind.build(problem)
        imps, fin = solve(space, SearchConfig(weight=2.0), Budget(expansions=200_000))
        if opt is None:
            assert fin.proven_infeasible
        else:
            assert fin.proven_optimal and fin.cost == pytest.approx(opt, abs=1e-9)
            steps = space.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
            assert kind.validate(problem, steps) == pytest.approx(opt, abs=1e-9)
        checked += 1
    assert checked >= 5


def walk(space, ref, last, done, clock, cost, out):
    """Compare h with the true cost-to-go at every reachable prefix."""
    true = ref.to_go(last, frozenset(done), clock)
    h = space.heuristic(state_of(space, last, done, clock, cost))
    out.append((h, true))
    if len(done) == ref.n:
        return
    for i in range(ref.n):
        if i in done or not ref.before[i] <= done:
            continue
        t = ref.doc["tasks"][i]
        change = ref.m[last][i + 1]
        end = max(clock + change, t.get("release", 0)) + t["duration"]
        if "due" in t and end > t["due"] + 1e-9:
            continue
        walk(space, ref, i + 1, done | {i}, end, cost + change, out)


@pytest.mark.parametrize("case", CASES[::3], ids=lambda c: "-".join(f"{k}={v}" for k, v in c.items()))
def test_the_bound_is_admissible_at_every_reachable_state(case):
    pairs = []
    for doc, _ in instances(200 + CASES.index(case), 5, (3, 7), floats=True, **case):
        _, _, space = loaded(doc)
        walk(space, Reference(doc), 0, frozenset(), 0.0, 0.0, pairs)
    assert len(pairs) > 20
    assert all(h <= true + 1e-7 for h, true in pairs)  # source: exhaustive enumeration
    assert any(0 < h < INF for h, _ in pairs)


@pytest.mark.parametrize("closed", [False, True])
def test_the_inherited_tree_bound_is_admissible_at_every_reachable_state(closed, monkeypatch):
    """With many tasks left the bound takes one MST per expansion; force that path on small sets."""
    monkeypatch.setattr(heuristic, "EXACT_MAX_LEFT", 1)
    pairs = []
    for doc, _ in instances(31, 6, (4, 7), objective="makespan", closed=closed, windows=False,
                            precedence=False, floats=True):
        _, _, space = loaded(doc)
        walk(space, Reference(doc), 0, frozenset(), 0.0, 0.0, pairs)
    assert all(h <= true + 1e-7 for h, true in pairs)  # source: exhaustive enumeration
    assert sum(h > 0 for h, _ in pairs) > 100


def test_prim_matches_networkx():
    rng = random.Random(5)
    for n in (2, 5, 12):
        w = [[0.0] * n for _ in range(n)]
        g = nx.Graph()
        for i in range(n):
            for j in range(i):
                w[i][j] = w[j][i] = rng.uniform(-5, 20)
                g.add_edge(i, j, weight=w[i][j])
        nodes = list(range(n))
        ref = nx.minimum_spanning_tree(g).size(weight="weight")  # source: networkx minimum_spanning_tree
        assert _prim(nodes, w) == pytest.approx(ref)


def test_all_pairs_shortest_matches_networkx():
    rng = random.Random(6)
    n = 9
    m = [[0.0 if i == j else rng.choice([1.0, 3.0, 30.0, 50.0]) for j in range(n)] for i in range(n)]
    g = nx.DiGraph([(i, j, {"weight": m[i][j]}) for i in range(n) for j in range(n) if i != j])
    ref = dict(nx.floyd_warshall(g))  # source: networkx Floyd-Warshall
    got = all_pairs_shortest(m)
    assert all(got[i][j] == ref[i][j] for i in range(n) for j in range(n))


def test_clashing_windows_end_proven_infeasible_before_any_expansion():
    # a and b each fit alone, but b must follow a and both must end by 5
    doc = {"domain": "sequencing", "objective": "makespan",
           "tasks": [{"id": "a", "duration": 3, "due": 5}, {"id": "b", "duration": 3, "due": 5}],
           "setup": [[0, 1, 1], [1, 0, 1], [1, 1, 0]], "precedence": [["a", "b"]]}
    assert Reference(doc).optimum() is None  # source: exhaustive enumeration
    _, _, space = loaded(doc)
    imps, fin = solve(space, SearchConfig(), Budget(expansions=10))
    assert fin.proven_infeasible and fin.counters.expansions == 0 and not imps


def test_windows_no_order_meets_end_proven_infeasible_by_search():
    # three tasks, each fits alone, any two fit, but not all three
    doc = {"domain": "sequencing", "objective": "setup",
           "tasks": [{"id": "a", "duration": 2, "due": 5}, {"id": "b", "duration": 2, "due": 5},
                     {"id": "c", "duration": 2, "due": 5}],
           "setup": [[0, 1, 1, 1], [1, 0, 1, 1], [1, 1, 0, 1], [1, 1, 1, 0]]}
    assert Reference(doc).optimum() is None  # source: exhaustive enumeration
    _, _, space = loaded(doc)
    imps, fin = solve(space, SearchConfig(), Budget(expansions=1000))
    assert fin.proven_infeasible and not imps


def plan_of(doc, weight=1.0):
    kind, problem, space = loaded(doc)
    _, fin = solve(space, SearchConfig(weight=weight), Budget(expansions=50_000))
    return kind, problem, space.render_plan(fin.path.states, fin.path.actions, fin.path.costs)


def swap_first_two(actions):
    i, j = actions.index("j0"), actions.index("j1")
    actions[i], actions[j] = actions[j], actions[i]


@pytest.mark.parametrize(
    "reorder, words",
    [
        (lambda a: (a.remove("j3"), a.pop()), "undone"),
        (lambda a: a.insert(1, a[0]), "twice"),
        (swap_first_two, "comes before"),
        (lambda a: a.insert(0, "zz"), "unknown task"),
        (lambda a: a.pop(), "does not return"),
        (lambda a: a.insert(1, "return"), "before every task"),
        (lambda a: a.append("return"), "follow the return"),
    ],
)
def test_the_validator_rejects_a_wrong_order(reorder, words):
    doc = random_doc(random.Random(3), 5, objective="makespan", closed=True, windows=False, precedence=False)
    doc["precedence"] = [["j0", "j1"], ["j1", "j2"]]
    kind, problem, steps = plan_of(doc)
    assert kind.validate(problem, steps) > 0
    actions = [s["action"] for s in steps]
    reorder(actions)
    steps = retime(loaded(doc)[2], actions)  # timing kept right, so only the order is wrong
    with pytest.raises(PlanValidationError, match=words):
        kind.validate(problem, steps)


def retime(space, actions):
    """Return steps with the documented timing for ``actions``, any order, unknown ids kept as given."""
    out, clock, last = [], 0.0, 0
    for a in actions:
        r = 0 if a == "return" else space.index.get(a)
        if r is None:
            out.append({"action": a, "cost": 0.0, "state": {"task": a, "start": clock, "end": clock, "changeover": 0}})
            continue
        change = space.c[last][r]
        start = max(clock + change, space.rel[r])
        end = start + space.dur[r]
        out.append({"action": a, "cost": end - clock,
                    "state": {"task": None if r == 0 else a, "start": start, "end": end, "changeover": change}})
        clock, last = end, r
    return out


@pytest.mark.parametrize(
    "tamper, words",
    [
        (lambda s: s[0].update(cost=s[0]["cost"] + 1), "claims cost"),
        (lambda s: s[1]["state"].update(start=s[1]["state"]["start"] - 1), "state.start"),
        (lambda s: s[2]["state"].update(changeover="3"), "state.changeover"),
        (lambda s: s[-1]["state"].update(task="j0"), "state.task"),
        (lambda s: s.__setitem__(0, "nope"), "object"),
        (lambda s: s[1].pop("cost"), "missing cost"),
    ],
)
def test_the_validator_rejects_a_tampered_step(tamper, words):
    doc = random_doc(random.Random(4), 5, objective="setup", closed=True, windows=False, precedence=False)
    kind, problem, steps = plan_of(doc)
    assert kind.validate(problem, steps) > 0
    tamper(steps)
    with pytest.raises(PlanValidationError, match=words):
        kind.validate(problem, steps)


def test_the_validator_rejects_a_missed_due():
    doc = {"domain": "sequencing", "objective": "setup",
           "tasks": [{"id": "a", "duration": 2}, {"id": "b", "duration": 2, "due": 4}],
           "setup": [[0, 1, 1], [1, 0, 1], [1, 1, 0]]}
    kind, problem, steps = plan_of(doc)
    assert [s["action"] for s in steps] == ["b", "a"]  # a first would end b at 6
    late = loaded(doc)[2].timeline(["a", "b"])
    with pytest.raises(PlanValidationError, match="due"):
        kind.validate(problem, late)


def test_coordinates_plan_replays_with_its_own_distances():
    rng = random.Random(11)
    doc = {"domain": "sequencing", "objective": "makespan", "return_to_start": True,
           "start": {"lat": 48.0, "lon": 11.0}, "speed": 40.0,
           "tasks": [{"id": f"s{i}", "lat": 48 + rng.uniform(-0.5, 0.5), "lon": 11 + rng.uniform(-0.5, 0.5),
                      "duration": 0.25} for i in range(7)]}
    kind, problem, steps = plan_of(doc, weight=2.0)
    assert kind.validate(problem, steps) == pytest.approx(steps[-1]["state"]["end"])
    assert steps[-1]["action"] == "return" and steps[-1]["state"]["task"] is None


def moves(space, state):
    return {a: t for t, _, a in space.successors(state)}


@pytest.mark.parametrize("objective", ["makespan", "setup"])
def test_a_dominated_state_is_dropped_unless_it_was_yielded_before(objective):
    # a -> b is slow, b -> a is quick: after {a, b} at c, the order b, a is earlier and cheaper
    doc = {"domain": "sequencing", "objective": objective,
           "tasks": [{"id": "a", "duration": 1}, {"id": "b", "duration": 1}, {"id": "c", "duration": 1},
                     {"id": "d", "duration": 1, "due": 1000}],
           "setup": [[0, 1, 1, 1, 1], [1, 0, 5, 1, 1], [1, 1, 0, 1, 1], [1, 1, 1, 0, 1], [1, 1, 1, 1, 0]]}

    def after(space, *names):
        s = space.initial_state()
        for name in names:
            s = moves(space, s)[name]
        return s

    space = loaded(doc)[2]
    slow = moves(space, after(space, "a", "b"))["c"]
    quick = moves(space, after(space, "b", "a"))["c"]
    assert slow[0] == quick[0] and quick[1] < slow[1] and quick[-1] <= slow[-1]
    # the engine replays stored paths: a state yielded before must be yielded again
    assert moves(space, after(space, "a", "b"))["c"] == slow
    fresh = loaded(doc)[2]
    assert moves(fresh, after(fresh, "b", "a"))["c"] == quick
    assert "c" not in moves(fresh, after(fresh, "a", "b"))  # dominated, never yielded: dropped
