"""Graph domain: random graphs against networkx shortest paths, the heuristic's scale, bad input."""

from __future__ import annotations

import math
import random

import pytest

from tests.worker.domains.refs import graph_cost_to_go as cost_to_go
from tests.worker.domains.refs import random_graph_body as random_problem
from worker.domains.graph import EARTH_RADIUS_KM, EXACT_GOALS, KIND, GraphSchema, GraphSpace, haversine_km
from worker.engine import SearchConfig, solve
from worker.exceptions import RequestError
from worker.request import parse_request


def build(body: dict) -> GraphSpace:
    return KIND.build(GraphSchema().load(body))


@pytest.mark.parametrize("seed", range(60))
def test_random_graphs_match_networkx(seed):
    rng = random.Random(seed)
    coordinates = [None, "plane", "geo"][seed % 3]
    body = random_problem(rng, rng.randint(1, 30), coordinates, directed=seed % 2 == 0)
    problem = GraphSchema().load(body)
    space = KIND.build(problem)
    togo = cost_to_go(body)  # source: networkx dijkstra
    for i, node in enumerate(body["nodes"]):
        if node["id"] in togo:
            assert space.heuristic(i) <= togo[node["id"]] + 1e-9
    _, fin = solve(space, SearchConfig(weight=rng.choice([1.0, 2.0, 4.0])))
    if "n0" not in togo:
        assert fin.proven_infeasible and fin.cost is None
        return
    assert fin.proven_optimal
    assert fin.cost == pytest.approx(togo["n0"], rel=1e-9, abs=1e-9)
    steps = space.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
    assert KIND.validate(problem, steps) == pytest.approx(togo["n0"], rel=1e-9, abs=1e-9)


@pytest.mark.parametrize("coordinates", ["plane", "geo"])
def test_many_goals_keep_the_heuristic_admissible(coordinates):
    rng = random.Random(7)
    body = random_problem(rng, 80, coordinates, directed=False, goals=EXACT_GOALS + 8)
    space = build(body)
    togo = cost_to_go(body)  # source: networkx dijkstra
    assert any(space.heuristic(i) > 0 for i in range(80)) or space.scale == 0
    for i, node in enumerate(body["nodes"]):
        if node["id"] in togo:
            assert space.heuristic(i) <= togo[node["id"]] + 1e-9


def test_heuristic_scale_is_the_least_cost_per_length():
    body = {"coordinates": "plane", "start": "a", "goals": ["c"],
            "nodes": [{"id": "a", "x": 0, "y": 0}, {"id": "b", "x": 3, "y": 4}, {"id": "c", "x": 6, "y": 8},
                      {"id": "d", "x": 6, "y": 8}],
            "edges": [{"from": "a", "to": "b", "cost": 10}, {"from": "b", "to": "c", "cost": 20},
                      {"from": "c", "to": "d", "cost": 0}]}
    space = build(body)
    # a-b: 10 / 5 = 2, b-c: 20 / 5 = 4; the zero-length c-d link constrains nothing
    assert space.scale == pytest.approx(2.0, rel=1e-9)
    assert space.heuristic(0) == pytest.approx(20.0, rel=1e-9)  # 2 x distance 10
    body["edges"].append({"from": "a", "to": "d", "cost": 0})  # a free link of length 10: h must vanish
    assert build(body).heuristic(0) == 0.0


def test_haversine_quarter_meridian():
    # from the definition: a quarter of a great circle is pi * R / 2
    assert haversine_km(0.0, 0.0, 90.0, 0.0) == pytest.approx(math.pi * EARTH_RADIUS_KM / 2, rel=1e-12)
    assert haversine_km(0.0, 179.0, 0.0, -179.0) == pytest.approx(2 * math.pi * EARTH_RADIUS_KM / 180, rel=1e-9)


def test_successor_order_parallel_edges_and_loops():
    body = {"start": "a", "goals": ["c"], "nodes": [{"id": "a"}, {"id": "b"}, {"id": "c"}],
            "edges": [{"from": "a", "to": "c", "cost": 9}, {"from": "a", "to": "a", "cost": 1},
                      {"from": "b", "to": "a", "cost": 2}, {"from": "a", "to": "c", "cost": 4}]}
    space = build(body)
    assert space.successors(0) == [(2, 4.0, "to c"), (1, 2.0, "to b")]
    assert build({**body, "directed": True}).successors(0) == [(2, 4.0, "to c")]
    assert space.heuristic(0) == 0.0


def test_example_solves():
    req = parse_request({"problem": dict(KIND.example), "budget": {}})
    _, fin = solve(req.space, SearchConfig(weight=1.0))
    body = {k: v for k, v in KIND.example.items() if k != "domain"}
    body.setdefault("directed", False)
    assert fin.cost == pytest.approx(cost_to_go(body)["charger"])  # source: networkx dijkstra
    steps = req.space.render_plan(fin.path.states, fin.path.actions, fin.path.costs)
    assert steps[-1] == {"action": "to packing", "cost": 4.0, "state": "packing"}
    assert KIND.sizes(req.problem) == {"nodes": 8, "edges": 8}


def _doc(**change):
    body = {"domain": "graph", "coordinates": "plane", "start": "a", "goals": ["b"],
            "nodes": [{"id": "a", "x": 0, "y": 0}, {"id": "b", "x": 1, "y": 0}, {"id": "c", "x": 2, "y": 0}],
            "edges": [{"from": "a", "to": "b", "cost": 1}, {"from": "b", "to": "c", "cost": 1}]}
    body.update(change)
    return {"problem": {k: v for k, v in body.items() if v is not None}, "budget": {}}


def _nodes(*extra):
    return [{"id": "a", "x": 0, "y": 0}, {"id": "b", "x": 1, "y": 0}, *extra]


@pytest.mark.parametrize("change,field,words", [
    ({"nodes": _nodes({"id": "a", "x": 5, "y": 5})}, "problem.nodes.2.id", "duplicate"),
    ({"edges": [{"from": "a", "to": "b", "cost": 1}, {"from": "a", "to": "zz", "cost": 1}]},
     "problem.edges.1.to", "unknown node"),
    ({"edges": [{"from": "q", "to": "b", "cost": 1}]}, "problem.edges.0.from", "unknown node"),
    ({"edges": [{"from": "a", "to": "b", "cost": -1}]}, "problem.edges.0.cost", "negative"),
    ({"edges": [{"from": "a", "to": "b", "cost": "1"}]}, "problem.edges.0.cost", "number"),
    ({"edges": [{"from": "a", "to": "b", "cost": 1, "weight": 2}]}, "problem.edges.0.weight", "unknown"),
    ({"edges": [{"from": "a", "cost": 1}]}, "problem.edges.0.to", "required"),
    ({"start": "x"}, "problem.start", "unknown node"),
    ({"goals": ["b", "x"]}, "problem.goals.1", "unknown node"),
    ({"goals": []}, "problem.goals", "at least one"),
    ({"nodes": []}, "problem.nodes", "at least one"),
    ({"nodes": _nodes({"id": "c", "x": 2})}, "problem.nodes.2.y", "required"),
    ({"nodes": _nodes({"id": "c", "x": 2, "y": 0, "lat": 3})}, "problem.nodes.2.lat", "plane"),
    ({"coordinates": None}, "problem.nodes.0.x", "set coordinates"),
    ({"coordinates": "geo"}, "problem.nodes.0.lat", "required"),
    ({"coordinates": "sphere"}, "problem.coordinates", "plane"),
    ({"nodes": _nodes({"id": "c", "x": 2, "y": math.inf})}, "problem.nodes.2.y", "finite"),
    ({"nodes": [{"id": "a", "lat": 91, "lon": 0}], "coordinates": "geo"}, "problem.nodes.0.lat", "90"),
    ({"directed": 1}, "problem.directed", "true or false"),
])
def test_bad_problems_name_their_field(change, field, words):
    with pytest.raises(RequestError) as err:
        parse_request(_doc(**change))
    assert err.value.field == field
    assert words.lower() in err.value.message.lower()
