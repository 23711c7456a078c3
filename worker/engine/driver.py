"""The driver: run a search core in slices under a budget and turn it into events."""

from __future__ import annotations

import gc
import logging
import math
import time
from collections.abc import Callable, Iterator
from typing import Any

from worker.engine.core import PythonCore
from worker.engine.types import (
    Budget,
    Counters,
    Event,
    Finished,
    Improvement,
    Progress,
    SearchConfig,
    StepStatus,
    StopReason,
    suboptimality,
)

logger = logging.getLogger(__name__)

# A slice aims at this much wall time, so a cancellation or a deadline is seen
# within a few tens of milliseconds whatever a node costs to expand.
_SLICE_TARGET_S = 0.01
_SLICE_MIN, _SLICE_MAX, _SLICE_FIRST = 1, 1 << 16, 64


def open_core(space: Any, config: SearchConfig) -> Any:
    """Return a search core for ``space``: a compiled one where available, else ``PythonCore``."""
    try:
        from worker.engine import kernels
    except ImportError:
        kernels = None  # type: ignore[assignment]
    if kernels is not None:
        core = kernels.make_core(space, config)
        if core is not None:
            return core
    return PythonCore(space, config)


def _counters(core: Any, start: float, now: float) -> Counters:
    return Counters(core.expansions, core.generated, core.reopened, core.stored, now - start)


def search(
    space: Any,
    config: SearchConfig | None = None,
    budget: Budget | None = None,
    *,
    clock: Callable[[], float] = time.monotonic,
    cancelled: Callable[[], bool] | None = None,
    progress_every_s: float = 0.5,
    core: Any = None,
) -> Iterator[Event]:
    """Search ``space`` and yield ``Improvement`` / ``Progress`` events, then one ``Finished``.

    The reported lower bound never decreases (the largest proven so far is
    kept). Under an expansions budget the sequence of improvements is the same
    on every run: slices only decide where the driver looks at the clock.
    """
    config = config or SearchConfig()
    budget = budget or Budget()
    core = core if core is not None else open_core(space, config)
    start = clock()
    time_limit = budget.time_s
    last_progress = start
    lower = 0.0
    slice_n = _SLICE_FIRST
    reason: StopReason | None = None
    proven = False
    while True:
        n = slice_n
        if budget.expansions is not None:
            left = budget.expansions - core.expansions
            if left <= 0:
                reason = StopReason.EXPANSIONS
                break
            n = min(n, left)
        t0 = clock()
        # The search allocates millions of long-lived tuples and no cycles; the
        # cyclic collector would rescan them over and over (measured: a third
        # of the time on a large grid), so it is paused inside a slice.
        collect = gc.isenabled()
        if collect:
            gc.disable()
        try:
            status = core.step(n)
        finally:
            if collect:
                gc.enable()
        now = clock()
        dt = now - t0
        if status is not StepStatus.IMPROVED:
            if dt > 0:
                slice_n = int(min(_SLICE_MAX, max(_SLICE_MIN, slice_n * _SLICE_TARGET_S / dt)))
            else:
                slice_n = min(_SLICE_MAX, slice_n * 2)
        if status is StepStatus.IMPROVED:
            lower = max(lower, core.lower_bound())
            path = core.incumbent_path()
            cost = core.incumbent
            yield Improvement(
                path=path,
                cost=cost,
                lower_bound=lower,
                bound=suboptimality(cost, lower),
                weight=core.weight,
                counters=_counters(core, start, now),
            )
            last_progress = now
        if status is StepStatus.DONE or core.finished:
            reason, proven = StopReason.EXHAUSTED, True
            break
        cost = core.incumbent if core.incumbent < math.inf else None
        if budget.target_bound is not None and cost is not None:
            lower = max(lower, core.lower_bound())
            bound = suboptimality(cost, lower)
            if bound is not None and bound <= budget.target_bound:
                reason = StopReason.TARGET_BOUND
                break
        if cancelled is not None and cancelled():
            reason = StopReason.CANCELLED
            break
        if time_limit is not None and now - start >= time_limit:
            reason = StopReason.TIME
            break
        if budget.max_states is not None and core.stored >= budget.max_states:
            reason = StopReason.MEMORY
            break
        if now - last_progress >= progress_every_s:
            last_progress = now
            # Before the first plan this may scan the open list: fine every half second.
            lower = max(lower, core.lower_bound())
            yield Progress(
                cost=cost,
                lower_bound=lower,
                bound=suboptimality(cost, lower),
                weight=core.weight,
                counters=_counters(core, start, now),
            )
    now = clock()
    lower = max(lower, core.lower_bound())
    cost = core.incumbent if core.incumbent < math.inf else None
    optimal = cost is not None and (proven or lower >= cost * (1.0 - config.g_tolerance))
    yield Finished(
        stop_reason=reason,
        cost=cost,
        lower_bound=lower,
        bound=1.0 if optimal else suboptimality(cost, lower),
        proven_optimal=optimal,
        proven_infeasible=proven and cost is None,
        path=core.incumbent_path(),
        counters=_counters(core, start, now),
        backend=getattr(core, "backend", "python"),
    )


def solve(
    space: Any,
    config: SearchConfig | None = None,
    budget: Budget | None = None,
    **kwargs: Any,
) -> tuple[list[Improvement], Finished]:
    """Run ``search`` to the end; return the improvements and the final event."""
    improvements: list[Improvement] = []
    for event in search(space, config, budget, **kwargs):
        if isinstance(event, Improvement):
            improvements.append(event)
        elif isinstance(event, Finished):
            return improvements, event
    raise AssertionError("search ended without a Finished event")
