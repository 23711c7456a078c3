"""The graph domain: cheapest route over named places joined by weighted links.

Problem fields::

    {"domain": "graph",
     "nodes": [{"id": "dock", "x": 0, "y": 0}, ...],   # or "lat"/"lon" with "coordinates": "geo"
     "edges": [{"from": "dock", "to": "aisle-1", "cost": 12.5}, ...],   # cost >= 0
     "directed": false,                                # default: links work both ways
     "coordinates": "plane",                           # "plane" (x, y), "geo" (lat, lon), or absent
     "start": "dock", "goals": ["packing"]}            # reach any goal

With coordinates, the heuristic is the straight-line distance to the nearest
goal (great-circle km for "geo") times the smallest ratio of edge cost to the
straight-line length of that edge over all edges. Every path then costs at
least that ratio times its length, which is at least the ratio times the
straight-line distance, so h is admissible whatever units the costs use.
Without coordinates h is 0 (plain Dijkstra order). Coordinates must match the
``coordinates`` setting: every node has them, of the named kind, or none has.

States are node indexes in input order (``dense_size`` is the node count).
Successors follow the order of first appearance in ``edges``; parallel edges
collapse to the cheapest, self-loops are dropped. An action reads
``"to <id>"``; a rendered step's ``state`` is the node id reached.
"""

from __future__ import annotations

import math
from array import array
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

from marshmallow import fields, post_load, validate

from worker.domains.base import DomainKind, Step
from worker.domains.fields import StrictBool, StrictFloat, StrictSchema
from worker.exceptions import ProblemError
from worker.validation.graph import validate_graph_plan

__all__ = ["KIND", "GraphProblem", "GraphSpace", "EARTH_RADIUS_KM", "haversine_km", "EXACT_GOALS"]

EARTH_RADIUS_KM = 6371.0088  # mean Earth radius
# With more goals than this, h measures to a ball around them instead of to each one.
EXACT_GOALS = 32
# Float rounding can break the triangle inequality in the last bits; shaving the
# scale this much keeps h below every path cost.
_SHAVE = 1.0 - 1e-12


@dataclass(frozen=True, slots=True)
class Node:
    """A place: its id and optional coordinates."""

    id: str
    x: float | None = None
    y: float | None = None
    lat: float | None = None
    lon: float | None = None


@dataclass(frozen=True, slots=True)
class Edge:
    """A link between two node ids with its cost."""

    source: str
    target: str
    cost: float


@dataclass(frozen=True, slots=True)
class GraphProblem:
    """A loaded graph problem."""

    nodes: tuple[Node, ...]
    edges: tuple[Edge, ...]
    directed: bool
    coordinates: str | None
    start: str
    goals: tuple[str, ...]


class NodeSchema(StrictSchema):
    id = fields.String(required=True, validate=validate.Length(min=1, error="must not be empty"))
    x = StrictFloat(load_default=None)
    y = StrictFloat(load_default=None)
    lat = StrictFloat(load_default=None, validate=validate.Range(-90.0, 90.0))
    lon = StrictFloat(load_default=None, validate=validate.Range(-180.0, 180.0))

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> Node:
        return Node(**data)


class EdgeSchema(StrictSchema):
    source = fields.String(required=True, data_key="from")
    target = fields.String(required=True, data_key="to")
    cost = StrictFloat(required=True, validate=validate.Range(min=0.0, error="must not be negative"))

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> Edge:
        return Edge(**data)


class GraphSchema(StrictSchema):
    nodes = fields.List(fields.Nested(NodeSchema), required=True,
                        validate=validate.Length(min=1, error="must list at least one node"))
    edges = fields.List(fields.Nested(EdgeSchema), load_default=list)
    directed = StrictBool(load_default=False)
    coordinates = fields.String(load_default=None, validate=validate.OneOf(
        ["plane", "geo"], error="must be 'plane' or 'geo' (or left out)"))
    start = fields.String(required=True)
    goals = fields.List(fields.String(), required=True,
                        validate=validate.Length(min=1, error="must list at least one goal node"))

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> GraphProblem:
        return GraphProblem(tuple(data["nodes"]), tuple(data["edges"]), data["directed"], data["coordinates"],
                            data["start"], tuple(data["goals"]))


def haversine_km(lat1: float, lon1: float, lat2: float, lon2: float) -> float:
    """Return the great-circle distance in km between two points given in degrees."""
    p1, p2 = math.radians(lat1), math.radians(lat2)
    a = math.sin((p2 - p1) / 2) ** 2 + math.cos(p1) * math.cos(p2) * math.sin(math.radians(lon2 - lon1) / 2) ** 2
    return 2.0 * EARTH_RADIUS_KM * math.asin(min(1.0, math.sqrt(a)))


def _points(problem: GraphProblem) -> list[tuple[float, float]] | None:
    """Return each node's coordinate pair, checking they match ``coordinates``; None without coordinates."""
    kind = problem.coordinates
    wanted, unwanted = {"plane": (("x", "y"), ("lat", "lon")), "geo": (("lat", "lon"), ("x", "y")),
                        None: ((), ("x", "y", "lat", "lon"))}[kind]
    for i, node in enumerate(problem.nodes):
        for name in wanted:
            if getattr(node, name) is None:
                raise ProblemError(f"nodes.{i}.{name}", f"required when coordinates is {kind!r}")
        for name in unwanted:
            if getattr(node, name) is not None:
                hint = f"not used with {kind!r} coordinates" if kind else "set coordinates to use it"
                raise ProblemError(f"nodes.{i}.{name}", hint)
    if kind is None:
        return None
    return [(getattr(n, wanted[0]), getattr(n, wanted[1])) for n in problem.nodes]


class GraphSpace:
    """The search space of a graph problem (see the module docstring for its conventions)."""

    guidance = None

    def __init__(self, problem: GraphProblem) -> None:
        self.problem = problem
        index: dict[str, int] = {}
        for i, node in enumerate(problem.nodes):
            if node.id in index:
                raise ProblemError(f"nodes.{i}.id", f"duplicate node id {node.id!r} (also nodes.{index[node.id]})")
            index[node.id] = i
        self.ids = [n.id for n in problem.nodes]
        self.dense_size = len(self.ids)
        points = _points(problem)

        def lookup(name: str, field: str) -> int:
            if name not in index:
                raise ProblemError(field, f"unknown node {name!r}")
            return index[name]

        best: list[dict[int, float]] = [{} for _ in self.ids]
        for i, e in enumerate(problem.edges):
            u, v = lookup(e.source, f"edges.{i}.from"), lookup(e.target, f"edges.{i}.to")
            if u == v:
                continue
            for a, b in ((u, v),) if problem.directed else ((u, v), (v, u)):
                if e.cost < best[a].get(b, math.inf):
                    best[a][b] = e.cost
        self._start = lookup(problem.start, "start")
        goals = [lookup(g, f"goals.{i}") for i, g in enumerate(problem.goals)]
        self.goal_set = frozenset(goals)  # lets the engine test goals inline
        self.is_goal = self.goal_set.__contains__
        actions = [f"to {name}" for name in self.ids]
        self._adj = [[(v, c, actions[v]) for v, c in out.items()] for out in best]
        self.edge_count = sum(len(out) for out in best)
        self.scale = 0.0
        self.heuristic: Callable[[int], float] = _zero
        if points is not None:
            dist = _metric(problem.coordinates)
            self.scale = _cost_per_length(best, points, dist)
            if self.scale > 0.0:
                self.heuristic = _heuristic_function(points, sorted(set(goals)), dist, self.scale)

    def initial_state(self) -> int:
        """Return the start node's index."""
        return self._start

    def successors(self, state: int) -> list[tuple[int, float, str]]:
        """Return ``(node, cost, "to <id>")`` for each link out of ``state``."""
        return self._adj[state]

    def render_plan(self, states: Sequence[int], actions: Sequence[str], costs: Sequence[float]) -> list[Step]:
        """Return the steps with ``state`` as the node id."""
        return [{"action": a, "cost": float(c), "state": self.ids[s]} for a, c, s in zip(actions, costs, states[1:])]


def _zero(state: int) -> float:
    return 0.0


def _metric(kind: str | None) -> Callable[[tuple[float, float], tuple[float, float]], float]:
    if kind == "geo":
        return lambda p, q: haversine_km(p[0], p[1], q[0], q[1])
    return lambda p, q: math.hypot(p[0] - q[0], p[1] - q[1])


def _cost_per_length(best: list[dict[int, float]], points: list[tuple[float, float]],
                     dist: Callable[[tuple[float, float], tuple[float, float]], float]) -> float:
    """Return the least cost / straight-line length over all links (0 when no link has a length)."""
    scale = math.inf
    for u, out in enumerate(best):
        for v, cost in out.items():
            length = dist(points[u], points[v])
            if length > 0.0:  # a link between coincident points constrains nothing
                scale = min(scale, cost / length)
    return 0.0 if math.isinf(scale) else scale * _SHAVE


def _heuristic_function(points: list[tuple[float, float]], goals: list[int],
                        dist: Callable[[tuple[float, float], tuple[float, float]], float],
                        scale: float) -> Callable[[int], float]:
    """Return a lazily tabled ``heuristic(node)``: scale times the distance to the nearest goal."""
    table = array("d", [-1.0]) * len(points)
    targets = [points[g] for g in goals]
    if len(targets) > EXACT_GOALS:
        # Any centre works: d(v, g) >= d(v, centre) - d(centre, g) >= d(v, centre) - radius.
        centre = (sum(p[0] for p in targets) / len(targets), sum(p[1] for p in targets) / len(targets))
        radius = max(dist(centre, p) for p in targets)

        def compute(p: tuple[float, float]) -> float:
            return max(0.0, dist(p, centre) - radius)
    else:

        def compute(p: tuple[float, float]) -> float:
            return min(dist(p, q) for q in targets)

    def heuristic(s: int) -> float:
        h = table[s]
        if h < 0.0:
            h = table[s] = scale * compute(points[s])
        return h

    return heuristic


def _sizes(problem: GraphProblem) -> dict[str, int]:
    return {"nodes": len(problem.nodes), "edges": len(problem.edges)}


EXAMPLE = {
    "domain": "graph",
    # A picker's route in a small parts warehouse: two aisles joined by front and
    # back cross aisles; costs are metres walked, the back cross aisle is cluttered.
    "coordinates": "plane",
    "nodes": [
        {"id": "charger", "x": 0, "y": 0},
        {"id": "front-1", "x": 4, "y": 0},
        {"id": "front-2", "x": 10, "y": 0},
        {"id": "shelf-1C", "x": 4, "y": 8},
        {"id": "shelf-2C", "x": 10, "y": 8},
        {"id": "back-1", "x": 4, "y": 14},
        {"id": "back-2", "x": 10, "y": 14},
        {"id": "packing", "x": 14, "y": 14},
    ],
    "edges": [
        {"from": "charger", "to": "front-1", "cost": 4},
        {"from": "front-1", "to": "front-2", "cost": 6},
        {"from": "front-1", "to": "shelf-1C", "cost": 8},
        {"from": "shelf-1C", "to": "back-1", "cost": 6},
        {"from": "front-2", "to": "shelf-2C", "cost": 8},
        {"from": "shelf-2C", "to": "back-2", "cost": 6},
        {"from": "back-1", "to": "back-2", "cost": 9},
        {"from": "back-2", "to": "packing", "cost": 4},
    ],
    "start": "charger",
    "goals": ["packing"],
}

KIND = DomainKind(
    name="graph",
    summary="Cheapest route over named places and weighted links, with optional plane or geo coordinates.",
    schema=GraphSchema,
    build=GraphSpace,
    validate=validate_graph_plan,
    sizes=_sizes,
    example=EXAMPLE,
)
