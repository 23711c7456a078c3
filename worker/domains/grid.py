"""The grid domain: move a robot across a floor plan of blocked cells and terrain costs.

Problem fields::

    {"domain": "grid",
     "rows": ["..#.", ".3#.", "...."],   # or "map": grid-map text (see worker.domains.gridmap)
     "moves": 8,                          # 4 or 8 (default 8)
     "corner_cutting": false,             # default false
     "start": [0, 0], "goals": [[0, 3]]}  # [row, col]; reach any goal

A step INTO a cell costs that cell's cost (``.`` = 1, digits 1-9), times
sqrt(2) for a diagonal step. Without corner cutting a diagonal step needs both
side cells open; with it, only the target cell must be open.

States are ints ``row * width + col`` (the space sets ``dense_size``).
Successors come in a fixed order, which a compiled kernel must reproduce:
N, NE, E, SE, S, SW, W, NW (with 4 moves: N, E, S, W). The heuristic is the
octile distance (Manhattan with 4 moves) to the nearest goal times the
cheapest terrain cost on the map, so it is admissible and consistent. A rendered
step is ``{"action": "NE", "cost": 1.414..., "state": [row, col]}``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

from marshmallow import ValidationError, fields, post_load, validate, validates_schema

from worker.domains.base import DomainKind, Step
from worker.domains.fields import CellField, StrictBool, StrictInt, StrictSchema
from worker.domains.gridmap import Terrain, parse_map, parse_rows
from worker.exceptions import ProblemError
from worker.validation.grid import validate_grid_plan

__all__ = ["KIND", "GridProblem", "GridSpace", "DIRECTIONS", "SQRT2"]

SQRT2 = math.sqrt(2.0)
# (name, d_row, d_col) in successor order (the order is spelled out again in
# ``_successor_function`` for speed; a test keeps the two in step).
DIRECTIONS = (("N", -1, 0), ("NE", -1, 1), ("E", 0, 1), ("SE", 1, 1),
              ("S", 1, 0), ("SW", 1, -1), ("W", 0, -1), ("NW", -1, -1))
# With up to this many goals h takes the exact minimum over them; with more it
# measures to their bounding box, which is cheaper per call and still admissible.
EXACT_GOALS = 8
MAX_GOALS = 1 << 16


@dataclass(frozen=True, slots=True)
class GridProblem:
    """A loaded grid problem; ``start`` and ``goals`` are (row, col) pairs."""

    terrain: Terrain
    moves: int
    corner_cutting: bool
    start: tuple[int, int]
    goals: tuple[tuple[int, int], ...]


class GridSchema(StrictSchema):
    rows = fields.List(fields.String(), load_default=None)
    map = fields.String(load_default=None)
    moves = StrictInt(load_default=8, validate=validate.OneOf([4, 8], error="must be 4 or 8"))
    corner_cutting = StrictBool(load_default=False)
    start = CellField(required=True)
    goals = fields.List(CellField(), required=True, validate=validate.Length(
        min=1, max=MAX_GOALS, error=f"must list at least 1 and at most {MAX_GOALS} goal cells"))

    @validates_schema
    def _one_layout(self, data: dict[str, Any], **kwargs: Any) -> None:
        if (data.get("rows") is None) == (data.get("map") is None):
            raise ValidationError("give exactly one of 'rows' and 'map'", field_name="rows")

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> GridProblem:
        terrain = parse_rows(data["rows"]) if data["rows"] is not None else parse_map(data["map"])
        return GridProblem(terrain, data["moves"], data["corner_cutting"], data["start"], tuple(data["goals"]))


def _check_cell(terrain: Terrain, cell: tuple[int, int], field: str) -> int:
    r, c = cell
    if r >= terrain.height or c >= terrain.width:
        raise ProblemError(field, f"[{r}, {c}] is outside the grid of {terrain.height} rows x {terrain.width} columns")
    if terrain.cost(r, c) == 0:
        raise ProblemError(field, f"[{r}, {c}] is a blocked cell")
    return r * terrain.width + c


class GridSpace:
    """The search space of a grid problem (see the module docstring for its conventions).

    ``successors``, ``heuristic`` and ``is_goal`` are closures over local
    tables, made once per space: the engine calls them millions of times and
    attribute lookups would be most of their cost.
    """

    guidance = None

    def __init__(self, problem: GridProblem) -> None:
        t = problem.terrain
        self.problem = problem
        self.height, self.width = t.height, t.width
        self.dense_size = t.height * t.width
        self._costs = t.costs
        self._start = _check_cell(t, problem.start, "start")
        goal_ids = [_check_cell(t, g, f"goals.{i}") for i, g in enumerate(problem.goals)]
        self._goal_list = sorted(set(goal_ids))
        present = set(t.costs) - {0}
        self.h_scale = float(min(present)) if present else 1.0
        self.goal_set = frozenset(goal_ids)  # lets the engine test goals inline
        self.is_goal = self.goal_set.__contains__
        self.successors = _successor_function(t, problem.moves, problem.corner_cutting)
        self.heuristic = _heuristic_function(self.width, self._goal_list, problem.moves, self.h_scale)

    def initial_state(self) -> int:
        """Return the start cell's index."""
        return self._start

    def render_plan(self, states: Sequence[int], actions: Sequence[str], costs: Sequence[float]) -> list[Step]:
        """Return the steps with ``state`` as ``[row, col]``."""
        w = self.width
        return [{"action": a, "cost": float(k), "state": [s // w, s % w]}
                for a, k, s in zip(actions, costs, states[1:])]

    def kernel_spec(self) -> dict[str, Any]:
        """Return the plain-data description a compiled grid kernel needs."""
        return {
            "kind": "grid",
            "width": self.width,
            "height": self.height,
            "cost": self._costs,
            "moves": self.problem.moves,
            "corner_cutting": self.problem.corner_cutting,
            "start": self._start,
            "goals": list(self._goal_list),
            "h_scale": self.h_scale,
        }


def _successor_function(t: Terrain, moves: int, cut: bool) -> Callable[[int], list[tuple[int, float, str]]]:
    """Return ``successors(cell)``, a fresh list per call.

    Caching the lists per cell was measured slower: A* expands most cells once,
    and a million long-lived lists make the garbage collector rescan them.
    """
    w, h = t.width, t.height
    pw = w + 2
    # A border of blocked cells around the map removes every bounds check.
    padded = bytearray(pw * (h + 2))
    for r in range(h):
        padded[(r + 1) * pw + 1:(r + 1) * pw + 1 + w] = t.costs[r * w:(r + 1) * w]
    straight = [float(k) for k in range(10)]  # shared float objects, one per terrain cost
    diagonal = [k * SQRT2 for k in range(10)]
    shift = pw + 1  # padded index = s + 2 * row + shift

    def four(s: int) -> list[tuple[int, float, str]]:
        p = s + (s // w) * 2 + shift
        out = []
        k = padded[p - pw]
        if k:
            out.append((s - w, straight[k], "N"))
        k = padded[p + 1]
        if k:
            out.append((s + 1, straight[k], "E"))
        k = padded[p + pw]
        if k:
            out.append((s + w, straight[k], "S"))
        k = padded[p - 1]
        if k:
            out.append((s - 1, straight[k], "W"))
        return out

    def eight(s: int) -> list[tuple[int, float, str]]:
        p = s + (s // w) * 2 + shift
        kn, ke, ks, kw = padded[p - pw], padded[p + 1], padded[p + pw], padded[p - 1]
        out = []
        if kn:
            out.append((s - w, straight[kn], "N"))
        k = padded[p - pw + 1]
        if k and (cut or (kn and ke)):
            out.append((s - w + 1, diagonal[k], "NE"))
        if ke:
            out.append((s + 1, straight[ke], "E"))
        k = padded[p + pw + 1]
        if k and (cut or (ks and ke)):
            out.append((s + w + 1, diagonal[k], "SE"))
        if ks:
            out.append((s + w, straight[ks], "S"))
        k = padded[p + pw - 1]
        if k and (cut or (ks and kw)):
            out.append((s + w - 1, diagonal[k], "SW"))
        if kw:
            out.append((s - 1, straight[kw], "W"))
        k = padded[p - pw - 1]
        if k and (cut or (kn and kw)):
            out.append((s - w - 1, diagonal[k], "NW"))
        return out

    return eight if moves == 8 else four


def _heuristic_function(w: int, goals: list[int], moves: int, scale: float) -> Callable[[int], float]:
    """Return ``heuristic(cell)``: octile (8 moves) or Manhattan (4 moves) distance to the nearest goal, scaled."""
    k = (SQRT2 - 1.0) * scale
    octile = moves == 8

    def dist(dr: int, dc: int) -> float:
        if not octile:
            return (dr + dc) * scale
        return dr * scale + dc * k if dr > dc else dc * scale + dr * k

    if len(goals) == 1:
        gr, gc = divmod(goals[0], w)

        def one(s: int) -> float:
            r, c = divmod(s, w)
            dr = r - gr if r > gr else gr - r
            dc = c - gc if c > gc else gc - c
            if not octile:
                return (dr + dc) * scale
            return dr * scale + dc * k if dr > dc else dc * scale + dr * k

        return one
    cells = [divmod(g, w) for g in goals]
    if len(goals) <= EXACT_GOALS:

        def nearest(s: int) -> float:
            r, c = divmod(s, w)
            return min(dist(abs(r - gr), abs(c - gc)) for gr, gc in cells)

        return nearest
    top, bottom = min(r for r, _ in cells), max(r for r, _ in cells)
    left, right = min(c for _, c in cells), max(c for _, c in cells)

    def to_box(s: int) -> float:
        # Every goal lies in the box, so the distance to the box is a lower bound.
        r, c = divmod(s, w)
        dr = top - r if r < top else (r - bottom if r > bottom else 0)
        dc = left - c if c < left else (c - right if c > right else 0)
        return dist(dr, dc)

    return to_box


def _sizes(problem: GridProblem) -> dict[str, int]:
    return {"cells": problem.terrain.height * problem.terrain.width}


EXAMPLE = {
    "domain": "grid",
    # A small parts warehouse: shelving '#', a congested cross aisle (cost 3)
    # and a picker robot going from its charger to the packing station.
    "rows": [
        "..........",
        ".##.##.##.",
        ".##.##.##.",
        "3333333333",
        ".##.##.##.",
        ".##.##.##.",
        "..........",
    ],
    "moves": 8,
    "start": [6, 0],
    "goals": [[0, 9]],
}

KIND = DomainKind(
    name="grid",
    summary="Cheapest route across a floor plan with blocked cells and terrain costs (4 or 8 moves).",
    schema=GridSchema,
    build=GridSpace,
    validate=validate_grid_plan,
    sizes=_sizes,
    example=EXAMPLE,
)
