"""A tiny explicit-graph search space for engine tests (not a product domain)."""

from __future__ import annotations

import random
from collections.abc import Iterable, Sequence
from typing import Any

import networkx as nx


class ToySpace:
    """States are node numbers of a weighted digraph; h is given as a table."""

    def __init__(self, n: int, edges: Sequence[tuple[int, int, float]], start: int, goals: Iterable[int],
                 h: Sequence[float] | None = None, dense: bool = True) -> None:
        self.adj: list[list[tuple[int, float, str]]] = [[] for _ in range(n)]
        for u, v, c in edges:
            self.adj[u].append((v, c, f"{u}->{v}"))
        self.start = start
        self.goals = frozenset(goals)
        self.h = list(h) if h is not None else [0.0] * n
        self.guidance = None
        if dense:
            self.dense_size = n
        self.successor_calls = 0

    def initial_state(self) -> int:
        return self.start

    def is_goal(self, s: int) -> bool:
        return s in self.goals

    def successors(self, s: int) -> list[tuple[int, float, str]]:
        self.successor_calls += 1
        return self.adj[s]

    def heuristic(self, s: int) -> float:
        return self.h[s]

    def render_plan(self, states: Sequence[Any], actions: Sequence[Any], costs: Sequence[float]) -> list[dict]:
        return [{"action": a, "cost": c, "state": s} for a, c, s in zip(actions, costs, states[1:])]


def random_instance(rng: random.Random, n: int, p: float, h_kind: str, dense: bool = True,
                    int_costs: bool = False) -> tuple[ToySpace, float | None, nx.DiGraph]:
    """Return a random space, its optimal cost by networkx Dijkstra (None if unreachable), and the graph.

    ``h_kind``: "zero", "perfect" (true distance), "inconsistent" (a random
    share of the true distance per node: admissible, usually not consistent).
    """
    g = nx.DiGraph()
    g.add_nodes_from(range(n))
    edges = []
    for u in range(n):
        for v in range(n):
            if u != v and rng.random() < p:
                c = float(rng.randint(0, 9)) if int_costs else round(rng.uniform(0.0, 10.0), 3)
                edges.append((u, v, c))
                g.add_edge(u, v, weight=c)
    start = 0
    goals = rng.sample(range(1, n), k=min(n - 1, rng.randint(1, 3)))
    # cost-to-go: Dijkstra on the reversed graph from all goals
    rev = g.reverse(copy=True)
    rev.add_node("sink")
    for t in goals:
        rev.add_edge("sink", t, weight=0.0)
    dist = nx.single_source_dijkstra_path_length(rev, "sink")  # source: networkx Dijkstra
    togo = [dist.get(v, float("inf")) for v in range(n)]
    if h_kind == "zero":
        h = [0.0] * n
    elif h_kind == "perfect":
        h = [0.0 if x == float("inf") else x for x in togo]
    else:
        h = [0.0 if x == float("inf") else x * rng.choice([0.0, 0.3, 0.7, 1.0]) for x in togo]
    opt = togo[start] if togo[start] < float("inf") else None
    return ToySpace(n, edges, start, goals, h, dense=dense), opt, g
