"""Rebuild a plan from a chain of states through the space's own successors."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from worker.engine.types import Path
from worker.exceptions import SearchError


def rebuild_path(space: Any, chain: Sequence[Any]) -> Path:
    """Return the ``Path`` along ``chain``, taking the cheapest action between each pair of states.

    Both the pure-Python core and the compiled cores rebuild plans with it,
    so they report the same actions, step costs and plan cost.
    """
    actions: list[Any] = []
    costs: list[float] = []
    succ = space.successors
    for a_state, b_state in zip(chain, chain[1:]):
        best: tuple[float, Any] | None = None
        for u, c, act in succ(a_state):
            if u == b_state and (best is None or c < best[0]):
                best = (float(c), act)
        if best is None:
            raise SearchError("plan step not among the successors while rebuilding a plan")
        costs.append(best[0])
        actions.append(best[1])
    return Path(tuple(chain), tuple(actions), tuple(costs))
