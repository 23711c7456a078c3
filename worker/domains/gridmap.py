"""Read grid terrain: our ``rows`` strings and the open grid-map text format.

Both produce a ``Terrain``: one byte per cell, row-major, holding the cost of
stepping INTO that cell (1-9) or 0 for a blocked cell.

``rows`` characters: ``#`` blocked, ``.`` cost 1, ``1``-``9`` that cost.

The grid-map text format (the one of the public grid path-finding
benchmarks) is a header ``type octile`` / ``height H`` / ``width W`` / ``map``
followed by H lines of W characters. ``.`` and ``G`` are open ground; ``@``,
``O`` and ``T`` are blocked. ``S`` (swamp) and ``W`` (water) are read as open
ground of cost 1: the format leaves their meaning to the application, and
treating them as plain ground keeps every cell either open or blocked without
inventing movement rules.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from worker.exceptions import LimitError, ProblemError

__all__ = ["Terrain", "MAX_CELLS", "parse_rows", "parse_map", "ROW_COSTS", "MAP_COSTS"]

# Far above any sensible request; the service caps sizes lower. It only keeps a
# runaway document from allocating gigabytes before the service sees its size.
MAX_CELLS = 1 << 24

_BAD = 255
ROW_COSTS = {"#": 0, ".": 1, **{str(d): d for d in range(1, 10)}}
MAP_COSTS = {".": 1, "G": 1, "S": 1, "W": 1, "@": 0, "O": 0, "T": 0}


def _table(costs: dict[str, int]) -> bytes:
    table = bytearray([_BAD]) * 256
    for ch, cost in costs.items():
        table[ord(ch)] = cost
    return bytes(table)


_ROW_TABLE = _table(ROW_COSTS)
_MAP_TABLE = _table(MAP_COSTS)


@dataclass(frozen=True, slots=True)
class Terrain:
    """A rectangular grid: per-cell step-in costs, row-major, 0 = blocked."""

    height: int
    width: int
    costs: bytes

    def cost(self, row: int, col: int) -> int:
        """Return the cost of stepping into (row, col); 0 when blocked."""
        return self.costs[row * self.width + col]


def _translate(line: str, table: bytes) -> tuple[bytes, int]:
    """Return the line's cost bytes and the column of the first unknown character (-1 if none)."""
    try:
        raw = line.encode("ascii")
    except UnicodeEncodeError as err:
        return b"", err.start
    out = raw.translate(table)
    return out, out.find(_BAD)


def _check_size(height: int, width: int, field: str) -> None:
    if height * width > MAX_CELLS:
        raise LimitError(field, f"{height} x {width} cells is over the limit of {MAX_CELLS}", cap="cells",
                         limit=MAX_CELLS)


def parse_rows(rows: Sequence[str]) -> Terrain:
    """Read ``rows`` strings; raise ProblemError naming ``rows.<i>`` and the column on bad input."""
    if not rows:
        raise ProblemError("rows", "must hold at least one row")
    width = len(rows[0])
    if width == 0:
        raise ProblemError("rows.0", "must not be empty")
    _check_size(len(rows), width, "rows")
    parts = []
    for i, row in enumerate(rows):
        if len(row) != width:
            raise ProblemError(f"rows.{i}", f"has {len(row)} cells; row 0 has {width} (rows must be equally long)")
        out, bad = _translate(row, _ROW_TABLE)
        if bad >= 0:
            raise ProblemError(f"rows.{i}", f"unknown character {row[bad]!r} at column {bad}; "
                               "use '#' (blocked), '.' (cost 1) or a digit 1-9 (that cost)")
        parts.append(out)
    return Terrain(len(rows), width, b"".join(parts))


def _header_int(lines: list[str], index: int, key: str) -> int:
    if index >= len(lines):
        raise ProblemError("map", f"line {index + 1}: missing '{key} <number>'")
    words = lines[index].split()
    if len(words) != 2 or words[0] != key or not words[1].isdigit():
        raise ProblemError("map", f"line {index + 1}: expected '{key} <number>', found {lines[index][:40]!r}")
    return int(words[1])


def parse_map(text: str) -> Terrain:
    """Read the grid-map text format; raise ProblemError("map", ...) naming the line and column."""
    lines = text.splitlines()
    if not lines or lines[0].split() != ["type", "octile"]:
        raise ProblemError("map", "line 1: expected 'type octile'")
    height = _header_int(lines, 1, "height")
    width = _header_int(lines, 2, "width")
    if height < 1 or width < 1:
        raise ProblemError("map", "height and width must be at least 1")
    _check_size(height, width, "map")
    if len(lines) < 4 or lines[3].strip() != "map":
        raise ProblemError("map", "line 4: expected 'map'")
    body = lines[4:]
    while body and not body[-1].strip():
        body.pop()
    if len(body) != height:
        raise ProblemError("map", f"the header says height {height} but {len(body)} map lines follow")
    parts = []
    for i, line in enumerate(body):
        if len(line) != width:
            raise ProblemError("map", f"line {i + 5} (map row {i}): has {len(line)} cells; "
                               f"the header says width {width}")
        out, bad = _translate(line, _MAP_TABLE)
        if bad >= 0:
            raise ProblemError("map", f"line {i + 5} (map row {i}): unknown character {line[bad]!r} at column {bad}; "
                               "known: . G S W (open), @ O T (blocked)")
        parts.append(out)
    return Terrain(height, width, b"".join(parts))
