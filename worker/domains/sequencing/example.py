"""The demo problem: a packing station ordering a dozen orders by carton size.

An invented parts warehouse packs outgoing orders at one station. Each order
ships in one carton size (S, M, L, XL, or a long "tube"); switching the
carton feeder between sizes takes minutes, more to go up in size (restacking)
than down, and 8 minutes to or from the tube jig. The station is set up for
M cartons at minute 0. Orders o07, o03 and o11 must be packed by the courier
pick-ups at minutes 30, 40 and 45; o12 only reaches the station at minute 20;
o05 and o06 are one customer's split shipment, main box (o05) first. The goal
is to finish everything as early as possible (makespan, in minutes).

Node order of ``setup``: the start (feeder on M), then o01..o12, whose
cartons are M, S, L, S, XL, XL, M, tube, L, S, M, L.
"""

from __future__ import annotations

from typing import Any

__all__ = ["EXAMPLE"]

EXAMPLE: dict[str, Any] = {
    "domain": "sequencing",
    "objective": "makespan",
    "tasks": [
        {"id": "o01", "duration": 4},
        {"id": "o02", "duration": 3},
        {"id": "o03", "duration": 6, "due": 40},
        {"id": "o04", "duration": 2},
        {"id": "o05", "duration": 8},
        {"id": "o06", "duration": 5},
        {"id": "o07", "duration": 3, "due": 30},
        {"id": "o08", "duration": 4},
        {"id": "o09", "duration": 5},
        {"id": "o10", "duration": 3},
        {"id": "o11", "duration": 4, "due": 45},
        {"id": "o12", "duration": 5, "release": 20},
    ],
    "setup": [
        [0, 1, 5, 4, 5, 6, 6, 1, 8, 4, 5, 1, 4],
        [1, 0, 5, 4, 5, 6, 6, 1, 8, 4, 5, 1, 4],
        [4, 4, 0, 6, 1, 8, 8, 4, 8, 6, 1, 4, 6],
        [5, 5, 7, 0, 7, 4, 4, 5, 8, 1, 7, 5, 1],
        [4, 4, 1, 6, 0, 8, 8, 4, 8, 6, 1, 4, 6],
        [7, 7, 9, 5, 9, 0, 1, 7, 8, 5, 9, 7, 5],
        [7, 7, 9, 5, 9, 1, 0, 7, 8, 5, 9, 7, 5],
        [1, 1, 5, 4, 5, 6, 6, 0, 8, 4, 5, 1, 4],
        [8, 8, 8, 8, 8, 8, 8, 8, 0, 8, 8, 8, 8],
        [5, 5, 7, 1, 7, 4, 4, 5, 8, 0, 7, 5, 1],
        [4, 4, 1, 6, 1, 8, 8, 4, 8, 6, 0, 4, 6],
        [1, 1, 5, 4, 5, 6, 6, 1, 8, 4, 5, 0, 4],
        [5, 5, 7, 1, 7, 4, 4, 5, 8, 1, 7, 5, 0],
    ],
    "precedence": [["o05", "o06"]],
}
