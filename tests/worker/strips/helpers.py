"""Test helpers: load the shared competition instances, and compute exact costs by brute force.

The brute-force parts here are written apart from the code under test: states
are frozensets of fact names, successors come from the task's action records,
and shortest costs come from networkx's Dijkstra on the reversed graph.
"""

from __future__ import annotations

import csv
import itertools
from pathlib import Path
from typing import Any

import networkx as nx

from worker.heuristics.task import GroundTask

IPC = "ipc"


def ipc_texts(datasets: Path, folder: str, problem: str) -> tuple[str, str]:
    """Return the domain and problem texts of one shared competition instance."""
    base = datasets / IPC / folder
    return (base / "domain.pddl").read_text(encoding="utf-8"), (base / problem).read_text(encoding="utf-8")


def ipc_optimum(datasets: Path, folder: str, problem: str) -> float:
    """Return the optimal cost listed for an instance in the shared optimal_costs.csv."""
    path = datasets / IPC / "optimal_costs.csv"
    lines = [ln for ln in path.read_text(encoding="utf-8").splitlines() if ln and not ln.startswith("#")]
    for row in csv.DictReader(lines):
        if row["domain_dir"] == folder and row["problem_file"] == problem:
            return float(row["optimal_cost"])
    raise KeyError((folder, problem))


def _apply(task: GroundTask, state: frozenset[int], a: Any) -> frozenset[int] | None:
    if not all(f in state for f in a.pre) or any(f in state for f in a.pre_not):
        return None
    return (state - set(a.delete)) | set(a.add)


def state_graph(task: GroundTask) -> tuple[nx.DiGraph, frozenset[int]]:
    """Return the reachable state graph (states are frozensets of fact ids; edge weight = cheapest action)."""
    start = frozenset(task.init)
    graph = nx.DiGraph()
    graph.add_node(start)
    todo = [start]
    while todo:
        s = todo.pop()
        for a in task.actions:
            t = _apply(task, s, a)
            if t is None or t == s:
                continue
            c = task.cost(a)
            if t not in graph:
                graph.add_node(t)
                todo.append(t)
            if not graph.has_edge(s, t) or graph[s][t]["weight"] > c:
                graph.add_edge(s, t, weight=c)
    return graph, start


def is_goal(task: GroundTask, state: frozenset[int]) -> bool:
    """Return True when ``state`` satisfies the task's goal."""
    return all(f in state for f in task.goal) and not any(f in state for f in task.goal_not)


def cost_to_go(task: GroundTask, graph: nx.DiGraph) -> dict[frozenset[int], float]:
    """Return h*(s) for every state with a path to a goal (Dijkstra from the goals on the reversed graph)."""
    goals = [s for s in graph if is_goal(task, s)]
    if not goals:
        return {}
    return nx.multi_source_dijkstra_path_length(graph.reverse(copy=False), goals, weight="weight")


def relaxed_costs(task: GroundTask) -> dict[frozenset[int], float]:
    """Return h+(S), the optimal delete-relaxed cost, for every subset S of the (few) facts."""
    n = len(task.facts)
    graph = nx.DiGraph()
    subsets = [frozenset(c) for k in range(n + 1) for c in itertools.combinations(range(n), k)]
    for s in subsets:
        graph.add_node(s)
        for a in task.actions:
            if all(f in s for f in a.pre):
                t = s | set(a.add)
                if t != s and (not graph.has_edge(s, t) or graph[s][t]["weight"] > task.cost(a)):
                    graph.add_edge(s, t, weight=task.cost(a))
    goals = [s for s in subsets if all(f in s for f in task.goal)]
    return nx.multi_source_dijkstra_path_length(graph.reverse(copy=False), goals, weight="weight")


def bits(state: frozenset[int]) -> int:
    """Return the bitset form of a set of fact ids."""
    out = 0
    for f in state:
        out |= 1 << f
    return out
