"""Run a validated job request: engine events in, JSON-ready events with checked plans out.

This is the one path from a request to what callers see, shared by the RQ job
and by ``boundwise solve``. Every plan is rendered by its domain and replayed
by the domain's independent validator before it is yielded; a plan that fails
the replay raises ``PlanValidationError`` and is never published.
"""

from __future__ import annotations

import logging
import math
import time
from collections.abc import Callable, Iterator
from typing import Any

from worker.engine import Finished, Improvement, Progress, search
from worker.engine.types import Counters
from worker.exceptions import PlanValidationError
from worker.request import JobRequest

__all__ = ["run", "finite"]

logger = logging.getLogger(__name__)

# Relative tolerance between the engine's cost and the validator's replayed cost.
COST_TOLERANCE = 1e-6


def finite(x: float | None) -> float | None:
    """Return ``x``, or None where JSON cannot carry it (inf, NaN)."""
    if x is None or not math.isfinite(x):
        return None
    return x


def _counters(c: Counters) -> dict[str, Any]:
    return {
        "expansions": c.expansions,
        "generated": c.generated,
        "reopened": c.reopened,
        "stored": c.stored,
        "elapsed_s": round(c.elapsed_s, 6),
    }


def check_plan(request: JobRequest, steps: list[dict[str, Any]], cost: float) -> None:
    """Replay ``steps`` with the domain's validator and compare the costs; raise on any mismatch."""
    replayed = request.kind.validate(request.problem, steps)
    if not math.isclose(replayed, cost, rel_tol=COST_TOLERANCE, abs_tol=COST_TOLERANCE):
        raise PlanValidationError(f"plan cost {cost!r} differs from the replayed cost {replayed!r}")


def run(
    request: JobRequest,
    *,
    cancelled: Callable[[], bool] | None = None,
    clock: Callable[[], float] = time.monotonic,
    progress_every_s: float = 0.5,
) -> Iterator[dict[str, Any]]:
    """Search ``request`` and yield ``improvement``, ``progress`` and one ``finished`` event dict."""
    revision = 0
    for event in search(
        request.space,
        request.search,
        request.budget,
        clock=clock,
        cancelled=cancelled,
        progress_every_s=progress_every_s,
    ):
        if isinstance(event, Improvement):
            path = event.path
            steps = request.space.render_plan(path.states, path.actions, path.costs)
            check_plan(request, steps, event.cost)
            revision += 1
            yield {
                "type": "improvement",
                "revision": revision,
                "cost": event.cost,
                "lower_bound": finite(event.lower_bound),
                "bound": finite(event.bound),
                "weight": event.weight,
                **_counters(event.counters),
                "plan": steps,
            }
        elif isinstance(event, Progress):
            yield {
                "type": "progress",
                "cost": event.cost,
                "lower_bound": finite(event.lower_bound),
                "bound": finite(event.bound),
                "weight": event.weight,
                **_counters(event.counters),
            }
        elif isinstance(event, Finished):
            yield {
                "type": "finished",
                "stop_reason": event.stop_reason.value,
                "cost": event.cost,
                "lower_bound": finite(event.lower_bound),
                "bound": finite(event.bound),
                "proven_optimal": event.proven_optimal,
                "proven_infeasible": event.proven_infeasible,
                "revision": revision,
                "backend": event.backend,
                **_counters(event.counters),
            }
