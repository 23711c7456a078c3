"""The sliding-tile domain: slide numbered tiles into the blank until the board matches the goal.

Problem fields::

    {"domain": "sliding-tile",
     "width": 3, "height": 3,          # give both, or neither for a square board
     "tiles": [3, 4, 7, 1, 0, 2, 6, 8, 5],   # row-major, 0 is the blank
     "goal": [0, 1, 2, 3, 4, 5, 6, 7, 8]}    # optional; default: blank first, then 1, 2, ...

Every move costs 1. An action names the direction the BLANK moves ("up",
"down", "left", "right"), and successors come in that fixed order, which a
compiled kernel must reproduce. A rendered step's ``state`` is the tile list
after the move.

The heuristic is Manhattan distance plus linear conflicts: in each row, the
tiles whose goal row it is must end in goal order; the fewest of them that
must leave the row (their count minus the longest run already in goal order)
each cost two extra vertical moves, and the same holds for columns with
horizontal moves (Hansson, Mayer & Yung 1992). Counting "+2 per conflicting
pair" instead would overestimate.

State encoding (an int; a compiled kernel must produce the same numbers)::

    state = (board << 24) | (h << 8) | blank

where ``board`` holds the tile of cell i in bits [i*b, (i+1)*b), b = the bit
length of (cells - 1) (at least 1), ``h`` is the heuristic value of the board
and ``blank`` the blank's cell. ``h`` and ``blank`` are functions of the board,
so equal boards give equal states; carrying them makes ``heuristic`` a shift
and lets ``successors`` update h from the parent's value.
"""

from __future__ import annotations

import math
from bisect import bisect_left
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from marshmallow import fields, post_load

from worker.domains.base import DomainKind, Step
from worker.domains.fields import StrictInt, StrictSchema
from worker.exceptions import ProblemError
from worker.validation.tiles import validate_tiles_plan

__all__ = ["KIND", "TilesProblem", "TilesSpace", "MAX_SIDE", "MAX_CELLS", "solvable"]

MAX_SIDE = 16
MAX_CELLS = 256  # the blank's cell must fit in 8 bits of the state
ACTIONS = (("up", -1, 0), ("down", 1, 0), ("left", 0, -1), ("right", 0, 1))  # blank moves, in order
_MEMO_LIMIT = 1 << 20  # line-conflict memo entries per space; beyond it misses are recomputed


@dataclass(frozen=True, slots=True)
class TilesProblem:
    """A loaded sliding-tile problem; ``goal`` is filled in when the request omits it."""

    width: int
    height: int
    tiles: tuple[int, ...]
    goal: tuple[int, ...]


class TilesSchema(StrictSchema):
    width = StrictInt(load_default=None)
    height = StrictInt(load_default=None)
    tiles = fields.List(StrictInt(), required=True)
    goal = fields.List(StrictInt(), load_default=None)

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> TilesProblem:
        tiles = tuple(data["tiles"])
        width, height = data["width"], data["height"]
        n = len(tiles)
        if (width is None) != (height is None):
            missing = "height" if height is None else "width"
            raise ProblemError(missing, "give width and height together, or neither for a square board")
        if width is None:
            side = math.isqrt(n)
            if side * side != n:
                raise ProblemError("tiles", f"has {n} values, not a square number; give width and height")
            width = height = side
        for name, value in (("width", width), ("height", height)):
            if not 2 <= value <= MAX_SIDE:
                raise ProblemError(name, f"must be between 2 and {MAX_SIDE}")
        if width * height > MAX_CELLS:
            raise ProblemError("tiles", f"a board may have at most {MAX_CELLS} cells")
        if n != width * height:
            raise ProblemError("tiles", f"has {n} values; a {width} x {height} board needs {width * height}")
        goal = tuple(data["goal"]) if data["goal"] is not None else tuple(range(n))
        if len(goal) != n:
            raise ProblemError("goal", f"has {len(goal)} values; the board has {n} cells")
        return TilesProblem(width, height, tiles, goal)


def _check_permutation(values: Sequence[int], field: str) -> None:
    n = len(values)
    seen: dict[int, int] = {}
    for i, v in enumerate(values):
        if not 0 <= v < n:
            raise ProblemError(f"{field}.{i}", f"value {v} is outside 0..{n - 1}")
        if v in seen:
            raise ProblemError(f"{field}.{i}", f"value {v} appears twice (also at position {seen[v]})")
        seen[v] = i


def solvable(width: int, tiles: Sequence[int], goal: Sequence[int]) -> bool:
    """Return True when ``goal`` is reachable: permutation parity equals the blank's distance parity.

    Each move swaps the blank with a neighbour: one transposition, and the
    blank moves one cell. So the parity of the permutation taking the goal to
    the board always equals the parity of the blank's row + column distance
    from its goal cell; on boards of at least 2 x 2 the converse holds too.
    """
    where = {v: i for i, v in enumerate(goal)}
    perm = [where[v] for v in tiles]
    seen = [False] * len(perm)
    transpositions = 0
    for i in range(len(perm)):
        j, length = i, 0
        while not seen[j]:
            seen[j] = True
            j = perm[j]
            length += 1
        transpositions += max(0, length - 1)
    b, gb = tiles.index(0), goal.index(0)
    blank_distance = abs(b // width - gb // width) + abs(b % width - gb % width)
    return transpositions % 2 == blank_distance % 2


def _removals(seq: list[int]) -> int:
    """Return how many of ``seq`` must go so the rest is increasing: len - longest increasing run."""
    tails: list[int] = []
    for x in seq:
        i = bisect_left(tails, x)
        if i == len(tails):
            tails.append(x)
        else:
            tails[i] = x
    return len(seq) - len(tails)


class TilesSpace:
    """The search space of a sliding-tile problem (see the module docstring for the state encoding)."""

    guidance = None

    def __init__(self, problem: TilesProblem) -> None:
        _check_permutation(problem.tiles, "tiles")
        _check_permutation(problem.goal, "goal")
        if not solvable(problem.width, problem.tiles, problem.goal):
            raise ProblemError("tiles", "the goal cannot be reached from these tiles: the parity of the tile "
                               "order and the blank's distance to its goal cell disagree (swapping any two "
                               "non-blank tiles makes it solvable)")
        self.problem = problem
        w, h = self.width, self.height = problem.width, problem.height
        n = self.cells = w * h
        self.bits = b = max(1, (n - 1).bit_length())
        self.mask = (1 << b) - 1
        cell_row = [i // w for i in range(n)]
        cell_col = [i % w for i in range(n)]
        goal_cell = [0] * n
        for i, v in enumerate(problem.goal):
            goal_cell[v] = i
        self.goal_row = [cell_row[goal_cell[v]] for v in range(n)]
        self.goal_col = [cell_col[goal_cell[v]] for v in range(n)]
        # Manhattan distance of tile v in cell i, at md[v * n + i]; the blank counts 0.
        self.md = [0 if v == 0 else abs(cell_row[i] - self.goal_row[v]) + abs(cell_col[i] - self.goal_col[v])
                   for v in range(n) for i in range(n)]
        self._row_memo: list[dict[int, int]] = [{} for _ in range(h)]
        self._col_memo: list[dict[tuple[int, ...], int]] = [{} for _ in range(w)]
        self._memo_size = 0
        # Per blank cell p: (q, shift of q, action, is the move vertical) for each legal blank move.
        self._moves = [[(q, q * b, name, dr != 0)
                        for name, dr, dc in ACTIONS
                        if 0 <= cell_row[p] + dr < h and 0 <= cell_col[p] + dc < w
                        for q in (p + dr * w + dc,)]
                       for p in range(n)]
        self._start = self.encode(problem.tiles)
        self._goal = self.encode(problem.goal)
        self.successors = self._successor_function(cell_row, cell_col)

    # -- encoding ------------------------------------------------------------------

    def encode(self, tiles: Sequence[int]) -> int:
        """Return the state of a tile list (row-major, 0 = blank)."""
        board = 0
        for i, v in enumerate(tiles):
            board |= v << (i * self.bits)
        return (board << 24) | (self.full_heuristic(tiles) << 8) | list(tiles).index(0)

    def decode(self, state: int) -> list[int]:
        """Return the tile list of a state."""
        board, b, m = state >> 24, self.bits, self.mask
        return [(board >> (i * b)) & m for i in range(self.cells)]

    def full_heuristic(self, tiles: Sequence[int]) -> int:
        """Return Manhattan distance plus linear conflicts of a tile list, computed from scratch."""
        w, h, n = self.width, self.height, self.cells
        total = sum(self.md[v * n + i] for i, v in enumerate(tiles))
        for r in range(h):
            total += 2 * _removals([self.goal_col[v] for v in tiles[r * w:(r + 1) * w]
                                    if v and self.goal_row[v] == r])
        for c in range(w):
            total += 2 * _removals([self.goal_row[v] for v in tiles[c::w] if v and self.goal_col[v] == c])
        return total

    # -- the protocol --------------------------------------------------------------

    def initial_state(self) -> int:
        """Return the start state."""
        return self._start

    def is_goal(self, state: int) -> bool:
        """Return True when the board is the goal board."""
        return state == self._goal

    @staticmethod
    def heuristic(state: int) -> int:
        """Return Manhattan distance plus linear conflicts, carried in the state."""
        return (state >> 8) & 0xFFFF

    def _line_removals(self, memo: dict[Any, int], key: Any, values: Sequence[int], goal_line: list[int],
                       line: int, other: list[int]) -> int:
        """Return the removals of one row or column from its contents (memoised by ``key``)."""
        count = _removals([other[v] for v in values if v and goal_line[v] == line])
        if self._memo_size < _MEMO_LIMIT:
            memo[key] = count
            self._memo_size += 1
        return count

    def _successor_function(self, cell_row: list[int], cell_col: list[int]) -> Any:
        """Return ``successors(state)``; h is updated from the parent's, re-scoring only lines that change.

        A vertical move keeps the order of tiles in every column and moves
        one tile between two rows, so only that tile's goal row can change
        its conflicts, and only when it is one of the two rows; likewise for
        horizontal moves and columns.
        """
        w, h, n, b, m = self.width, self.height, self.cells, self.bits, self.mask
        md, goal_row, goal_col = self.md, self.goal_row, self.goal_col
        row_memo, col_memo, moves = self._row_memo, self._col_memo, self._moves
        row_bits, row_mask = w * b, (1 << (w * b)) - 1
        line = self._line_removals
        col_shifts = [[(r * w + c) * b for r in range(h)] for c in range(w)]

        def row_conflicts(r: int, board: int) -> int:
            key = (board >> (r * row_bits)) & row_mask
            got = row_memo[r].get(key)
            if got is None:
                values = [(key >> (i * b)) & m for i in range(w)]
                got = line(row_memo[r], key, values, goal_row, r, goal_col)
            return got

        def col_conflicts(c: int, board: int) -> int:
            key = tuple([(board >> shift) & m for shift in col_shifts[c]])
            got = col_memo[c].get(key)
            if got is None:
                got = line(col_memo[c], key, key, goal_col, c, goal_row)
            return got

        def successors(s: int) -> list[tuple[int, float, str]]:
            p = s & 0xFF
            h0 = (s >> 8) & 0xFFFF
            board = s >> 24
            ps = p * b
            out = []
            for q, qs, action, vertical in moves[p]:
                v = (board >> qs) & m
                nb = board - (v << qs) + (v << ps)
                nh = h0 - md[v * n + q] + md[v * n + p]
                if vertical:
                    gr = goal_row[v]
                    if gr == cell_row[q] or gr == cell_row[p]:
                        nh += 2 * (row_conflicts(gr, nb) - row_conflicts(gr, board))
                else:
                    gc = goal_col[v]
                    if gc == cell_col[q] or gc == cell_col[p]:
                        nh += 2 * (col_conflicts(gc, nb) - col_conflicts(gc, board))
                out.append(((nb << 24) | (nh << 8) | q, 1.0, action))
            return out

        return successors

    def render_plan(self, states: Sequence[int], actions: Sequence[str], costs: Sequence[float]) -> list[Step]:
        """Return the steps with ``state`` as the tile list after the move."""
        return [{"action": a, "cost": float(c), "state": self.decode(s)}
                for a, c, s in zip(actions, costs, states[1:])]

    def kernel_spec(self) -> dict[str, Any]:
        """Return the plain-data description a compiled sliding-tile kernel needs."""
        p = self.problem
        return {"kind": "tiles", "width": p.width, "height": p.height, "tiles": list(p.tiles), "goal": list(p.goal)}


def _sizes(problem: TilesProblem) -> dict[str, int]:
    return {"tiles": len(problem.tiles)}


EXAMPLE = {
    "domain": "sliding-tile",
    "width": 3,
    "height": 3,
    "tiles": [3, 4, 7, 1, 0, 2, 6, 8, 5],
    "goal": [0, 1, 2, 3, 4, 5, 6, 7, 8],
}

KIND = DomainKind(
    name="sliding-tile",
    summary="Fewest moves to slide numbered tiles into a goal arrangement (8-, 15-puzzle and other sizes).",
    schema=TilesSchema,
    build=TilesSpace,
    validate=validate_tiles_plan,
    sizes=_sizes,
    example=EXAMPLE,
)
