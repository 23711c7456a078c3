"""Read TSPLIB instance files into integer distance matrices (test helper).

Only what the reference instances need: GEO, EUC_2D, ATT and EXPLICIT weights
in FULL_MATRIX, UPPER_ROW, LOWER_ROW, UPPER_DIAG_ROW and LOWER_DIAG_ROW.
source: Reinelt, "TSPLIB 95" (1995), section 2, the distance functions; GEO
truncates the degree part (see SOURCES.md of the data sets, section 3).
"""

from __future__ import annotations

import math
from pathlib import Path

__all__ = ["read_matrix", "read_optima", "read_tour", "tsp_problem"]

_PI = 3.141592  # sic: the value TSPLIB 95 prescribes for GEO
_RRR = 6378.388


def _geo_rad(v: float) -> float:
    deg = int(v)  # truncation toward zero, not nint: it reproduces the published optima
    return _PI * (deg + 5.0 * (v - deg) / 3.0) / 180.0


def _geo(a: tuple[float, float], b: tuple[float, float]) -> int:
    lat1, lon1, lat2, lon2 = _geo_rad(a[0]), _geo_rad(a[1]), _geo_rad(b[0]), _geo_rad(b[1])
    q1 = math.cos(lon1 - lon2)
    q2 = math.cos(lat1 - lat2)
    q3 = math.cos(lat1 + lat2)
    return int(_RRR * math.acos(0.5 * ((1.0 + q1) * q2 - (1.0 - q1) * q3)) + 1.0)


def _euc(a: tuple[float, float], b: tuple[float, float]) -> int:
    return int(math.sqrt((a[0] - b[0]) ** 2 + (a[1] - b[1]) ** 2) + 0.5)


def _att(a: tuple[float, float], b: tuple[float, float]) -> int:
    r = math.sqrt(((a[0] - b[0]) ** 2 + (a[1] - b[1]) ** 2) / 10.0)
    t = int(r + 0.5)
    return t + 1 if t < r else t


def _sections(path: Path) -> tuple[dict[str, str], dict[str, list[str]]]:
    head: dict[str, str] = {}
    body: dict[str, list[str]] = {}
    current: str | None = None
    for raw in path.read_text(encoding="ascii").splitlines():
        line = raw.strip()
        if not line or line == "EOF":
            continue
        if ":" in line and not line[0].isdigit() and not line[0] == "-":
            key, _, value = line.partition(":")
            head[key.strip()] = value.strip()
            current = None
        elif line.endswith("_SECTION"):
            current = line
            body[current] = []
        elif current is not None:
            body[current].extend(line.split())
    return head, body


def read_matrix(path: Path) -> list[list[int]]:
    """Return the full symmetric distance matrix of a TSPLIB ``.tsp`` file."""
    head, body = _sections(path)
    n = int(head["DIMENSION"])
    kind = head["EDGE_WEIGHT_TYPE"]
    if kind == "EXPLICIT":
        return _explicit(head["EDGE_WEIGHT_FORMAT"], n, [int(v) for v in body["EDGE_WEIGHT_SECTION"]])
    nums = body["NODE_COORD_SECTION"]
    pts = [(float(nums[i + 1]), float(nums[i + 2])) for i in range(0, 3 * n, 3)]
    dist = {"GEO": _geo, "EUC_2D": _euc, "ATT": _att}[kind]
    return [[0 if i == j else dist(pts[i], pts[j]) for j in range(n)] for i in range(n)]


def _explicit(fmt: str, n: int, vals: list[int]) -> list[list[int]]:
    m = [[0] * n for _ in range(n)]
    it = iter(vals)
    if fmt == "FULL_MATRIX":
        return [[next(it) for _ in range(n)] for _ in range(n)]
    for i in range(n):
        if fmt == "UPPER_ROW":
            cols = range(i + 1, n)
        elif fmt == "UPPER_DIAG_ROW":
            cols = range(i, n)
        elif fmt == "LOWER_ROW":
            cols = range(i)
        elif fmt == "LOWER_DIAG_ROW":
            cols = range(i + 1)
        else:
            raise ValueError(f"unsupported EDGE_WEIGHT_FORMAT {fmt}")
        for j in cols:
            m[i][j] = m[j][i] = next(it)
    return m


def read_tour(path: Path) -> list[int]:
    """Return the 0-based node order of a TSPLIB ``.opt.tour`` file."""
    _, body = _sections(path)
    nodes = [int(v) for v in body["TOUR_SECTION"]]
    return [v - 1 for v in nodes[: nodes.index(-1)]]


def read_optima(folder: Path) -> dict[str, int]:
    """Return the published optimal tour lengths from the ``solutions`` list."""
    out: dict[str, int] = {}
    for line in (folder / "solutions").read_text(encoding="ascii").splitlines():
        name, sep, value = line.partition(":")
        if sep and value.strip().split()[0].isdigit():
            out[name.strip()] = int(value.strip().split()[0])
    return out


def tsp_problem(matrix: list[list[int]]) -> dict:
    """Return a closed-tour ``sequencing`` problem: node 1 is the start, the others are tasks."""
    return {
        "domain": "sequencing",
        "objective": "setup",
        "return_to_start": True,
        "tasks": [{"id": f"c{i + 1}"} for i in range(1, len(matrix))],
        "setup": matrix,
    }
