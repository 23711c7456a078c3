"""Reference models for the domain tests, written apart from the domain code: graphs for networkx."""

from __future__ import annotations

import math
import random

import networkx as nx

SQRT2 = math.sqrt(2.0)
ROW_COST = {".": 1, "#": 0, **{str(d): d for d in range(1, 10)}}


def random_rows(rng: random.Random, height: int, width: int, blocked: float, terrain: bool) -> list[str]:
    """Return a random floor plan: '#' with probability ``blocked``, else '.' or a digit."""
    rows = []
    for _ in range(height):
        cells = []
        for _ in range(width):
            if rng.random() < blocked:
                cells.append("#")
            elif terrain and rng.random() < 0.4:
                cells.append(str(rng.randint(1, 9)))
            else:
                cells.append(".")
        rows.append("".join(cells))
    return rows


def grid_graph(rows: list[str], moves: int = 8, corner_cutting: bool = False) -> nx.DiGraph:
    """Return the grid as a weighted digraph on (row, col) nodes, built from the rules as documented."""
    h, w = len(rows), len(rows[0])

    def cost(r: int, c: int) -> int:
        return ROW_COST[rows[r][c]] if 0 <= r < h and 0 <= c < w else 0

    g = nx.DiGraph()
    steps = [(-1, 0), (1, 0), (0, -1), (0, 1)]
    if moves == 8:
        steps += [(-1, -1), (-1, 1), (1, -1), (1, 1)]
    for r in range(h):
        for c in range(w):
            if not cost(r, c):
                continue
            g.add_node((r, c))
            for dr, dc in steps:
                k = cost(r + dr, c + dc)
                if not k:
                    continue
                if dr and dc:
                    if not corner_cutting and not (cost(r + dr, c) and cost(r, c + dc)):
                        continue
                    g.add_edge((r, c), (r + dr, c + dc), weight=k * SQRT2)
                else:
                    g.add_edge((r, c), (r + dr, c + dc), weight=float(k))
    return g


def cost_to_go(g: nx.DiGraph, goals: list) -> dict:
    """Return every node's cheapest cost to the nearest goal (networkx Dijkstra on the reversed graph)."""
    return nx.multi_source_dijkstra_path_length(g.reverse(copy=False), [t for t in goals if t in g])


def free_cells(rows: list[str]) -> list[tuple[int, int]]:
    """Return the open cells of a floor plan."""
    return [(r, c) for r, row in enumerate(rows) for c, ch in enumerate(row) if ch != "#"]


def random_graph_body(rng: random.Random, n: int, coordinates: str | None, directed: bool, goals: int = 0) -> dict:
    """Return a random graph problem body (with parallel edges, self-loops and zero costs now and then)."""
    nodes = []
    for i in range(n):
        node = {"id": f"n{i}"}
        if coordinates == "plane":
            node.update(x=rng.uniform(-50, 50), y=rng.uniform(-50, 50))
        elif coordinates == "geo":
            node.update(lat=rng.uniform(40, 50), lon=rng.uniform(-5, 10))
        nodes.append(node)
    edges = []
    for _ in range(rng.randint(0, 4 * n)):
        u, v = rng.randrange(n), rng.randrange(n)
        cost = rng.choice([0.0, round(rng.uniform(0, 100), 3), float(rng.randint(1, 9))])
        edges.append({"from": f"n{u}", "to": f"n{v}", "cost": cost})
    body = {"nodes": nodes, "edges": edges, "directed": directed, "start": "n0",
            "goals": [f"n{i}" for i in rng.sample(range(n), k=goals or rng.randint(1, min(n, 3)))]}
    if coordinates:
        body["coordinates"] = coordinates
    return body


def graph_of_body(body: dict) -> nx.MultiDiGraph:
    g = nx.MultiDiGraph()
    g.add_nodes_from(n["id"] for n in body["nodes"])
    for e in body["edges"]:
        g.add_edge(e["from"], e["to"], weight=e["cost"])
        if not body["directed"]:
            g.add_edge(e["to"], e["from"], weight=e["cost"])
    return g


def graph_cost_to_go(body: dict) -> dict:
    """Every node's cheapest cost to the nearest goal (networkx Dijkstra on the reversed graph)."""
    return nx.multi_source_dijkstra_path_length(graph_of_body(body).reverse(copy=False), body["goals"])
