"""Sequencing domain: loading, the coordinate metrics, the demo, and every bad input naming its field."""

from __future__ import annotations

import copy
import math

import networkx as nx
import pytest

from worker.domains import load_problem
from worker.domains.sequencing import KIND, MAX_TASKS
from worker.domains.sequencing.model import shortest_from
from worker.engine import Budget, SearchConfig, solve
from worker.exceptions import ProblemError, RequestError
from worker.request import parse_request


def base(n=3, **extra):
    """A valid open problem over ``n`` tasks with a setup matrix (invented numbers)."""
    doc = {
        "domain": "sequencing",
        "tasks": [{"id": f"t{i}", "duration": 1} for i in range(n)],
        "setup": [[0 if i == j else 2 + i + j for j in range(n + 1)] for i in range(n + 1)],
    }
    doc.update(extra)
    return doc


def field_of(doc):
    with pytest.raises(ProblemError) as err:
        kind, problem = load_problem(doc)
        kind.build(problem)
    return err.value.field, err.value.message


def test_loads_the_setup_form_with_defaults():
    kind, p = load_problem(base())
    assert kind is KIND
    assert p.objective.value == "setup" and p.return_to_start is False and p.precedence == ()
    assert p.matrix[1][2] == 5.0
    assert KIND.sizes(p) == {"tasks": 3}


@pytest.mark.parametrize(
    "mutate, field, words",
    [
        (lambda d: d["tasks"][2].update(id="t0"), "tasks.2.id", "duplicate"),
        (lambda d: d["tasks"][1].update(id="return"), "tasks.1.id", "reserved"),
        (lambda d: d.update(precedence=[["t0", "t1"], ["t1", "t2"], ["t2", "zz"]]), "precedence.2.1", "unknown"),
        (lambda d: d.update(precedence=[["t0"]]), "precedence.0", "pair"),
        (lambda d: d.update(precedence=[["t0", "t1"], ["t1", "t2"], ["t2", "t0"]]), "precedence", "cycle"),
        (lambda d: d.update(precedence=[["t1", "t1"]]), "precedence", "t1 -> t1"),
        (lambda d: d["setup"].pop(), "setup", "square"),
        (lambda d: d["setup"][2].append(1), "setup.2", "entries"),
        (lambda d: d["setup"][1].__setitem__(3, -1), "setup.1.3", "negative"),
        (lambda d: d["setup"][1].__setitem__(3, "5"), "setup.1.3", "number"),
        (lambda d: d.pop("setup"), "setup", "required"),
        (lambda d: d["tasks"][0].update(x=1, y=2), "tasks.0.x", "not both"),
        (lambda d: d.update(metric="euclidean"), "metric", "coordinates"),
        (lambda d: d.update(objective="cheapest"), "objective", "Must be one of"),
        (lambda d: d.update(return_to_start="yes"), "return_to_start", "true or false"),
        (lambda d: d["tasks"][1].update(duration=-2), "tasks.1.duration", "greater than or equal"),
        (lambda d: d["tasks"][1].update(release=4, due=4.5), "tasks.1.due", "release 4 + duration 1"),
        (lambda d: d["tasks"][2].update(due=3), "tasks.2.due", "any order"),
        (lambda d: d.update(colour="red"), "colour", "Unknown"),
        (lambda d: d.update(tasks=[]), "tasks", "Length"),
    ],
)
def test_bad_input_names_the_field(mutate, field, words):
    doc = base()
    mutate(doc)
    got, message = field_of(doc)
    assert got == field
    assert words.lower() in message.lower()


def test_a_cycle_message_names_one_cycle():
    doc = base(4, precedence=[["t0", "t1"], ["t1", "t2"], ["t2", "t3"], ["t3", "t1"]])
    _, message = field_of(doc)
    cycle = message.split(": ", 1)[1].split(" -> ")
    assert cycle[0] == cycle[-1] and set(cycle) == {"t1", "t2", "t3"}


def test_the_task_cap_is_a_problem_error():
    doc = base(1)
    doc["tasks"] = [{"id": f"t{i}"} for i in range(MAX_TASKS + 1)]
    assert field_of(doc)[0] == "tasks"


def test_the_request_edge_prefixes_the_problem_path():
    with pytest.raises(RequestError) as err:
        parse_request({"problem": base(precedence=[["t0", "nope"]])})
    assert err.value.field == "problem.precedence.0.1"


@pytest.mark.parametrize(
    "mutate, field",
    [
        (lambda d: d["tasks"][1].pop("y"), "tasks.1.y"),
        (lambda d: d["tasks"][1].update(lat=3.0), "tasks.1.lat"),
        (lambda d: d.update(metric="haversine"), "metric"),
        (lambda d: d.update(start=None, return_to_start=True), "start"),
        (lambda d: d.update(start={"lat": 1.0, "lon": 2.0}), "start.lat"),
        (lambda d: d.update(speed=0), "speed"),
    ],
)
def test_bad_coordinates_name_the_field(mutate, field):
    doc = {
        "domain": "sequencing",
        "tasks": [{"id": "a", "x": 0, "y": 0}, {"id": "b", "x": 3, "y": 4}],
        "start": {"x": 0, "y": 4},
    }
    mutate(doc)
    assert field_of(doc)[0] == field


def test_planar_metrics_and_speed():
    doc = {
        "domain": "sequencing",
        "tasks": [{"id": "a", "x": 0, "y": 0}, {"id": "b", "x": 3, "y": 4}],
        "start": {"x": 0, "y": 4},
        "speed": 2.0,
    }
    _, p = load_problem(doc)
    assert p.matrix[1][2] == pytest.approx(5.0 / 2)  # common practice: the 3-4-5 right triangle
    doc["metric"] = "manhattan"
    _, p = load_problem(doc)
    assert p.matrix[1][2] == pytest.approx(7.0 / 2)
    assert p.matrix[0][1] == pytest.approx(4.0 / 2)


def test_haversine_uses_the_mean_earth_radius():
    doc = {"domain": "sequencing", "tasks": [{"id": "a", "lat": 10.0, "lon": 20.0}, {"id": "b", "lat": 11.0, "lon": 20.0}]}
    _, p = load_problem(doc)
    assert p.metric == "haversine"
    # common practice: one degree along a meridian is 2 * pi * 6371 / 360 = 111.19 km
    assert p.matrix[1][2] == pytest.approx(2 * math.pi * 6371.0 / 360.0, rel=1e-9)
    # common practice: one degree of longitude on the equator is the same arc
    doc["tasks"] = [{"id": "a", "lat": 0.0, "lon": 0.0}, {"id": "b", "lat": 0.0, "lon": 1.0}]
    _, p = load_problem(doc)
    assert p.matrix[1][2] == pytest.approx(2 * math.pi * 6371.0 / 360.0, rel=1e-9)
    assert p.matrix[0][1] == 0.0  # no start location: the first task has no changeover


def test_shortest_chains_match_networkx():
    matrix = [[0, 9, 2, 7], [1, 0, 8, 3], [6, 1, 0, 9], [2, 2, 2, 0]]
    g = nx.DiGraph()
    for i, row in enumerate(matrix):
        for j, w in enumerate(row):
            if i != j:
                g.add_edge(i, j, weight=w)
    ref = nx.single_source_dijkstra_path_length(g, 0)  # source: networkx Dijkstra
    assert shortest_from(matrix, 0) == [ref[v] for v in range(4)]


def test_a_due_met_only_through_another_task_is_accepted():
    doc = base(2)
    doc["setup"] = [[0, 1, 9], [1, 0, 1], [9, 1, 0]]
    doc["tasks"] = [{"id": "a"}, {"id": "b", "due": 2}]
    kind, p = load_problem(doc)
    imps, fin = solve(kind.build(p), SearchConfig(weight=1.0), Budget(expansions=100))
    assert fin.proven_optimal and [s["action"] for s in kind.build(p).render_plan((), fin.path.actions, ())] == ["a", "b"]


def test_the_demo_is_a_valid_problem_solved_to_optimality():
    doc = copy.deepcopy(KIND.example)
    kind, p = load_problem(doc)
    assert KIND.sizes(p) == {"tasks": 12}
    space = kind.build(p)
    imps, fin = solve(space, SearchConfig(weight=2.0), Budget(expansions=20_000))
    assert fin.proven_optimal
    steps = space.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
    assert kind.validate(p, steps) == pytest.approx(fin.cost)
    ends = {s["action"]: s["state"]["end"] for s in steps}
    assert ends["o07"] <= 30 and ends["o03"] <= 40 and ends["o11"] <= 45
    assert [a for a in ends if a in ("o05", "o06")] == ["o05", "o06"]
