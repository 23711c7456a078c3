"""The search engine: anytime weighted A* with proven bounds (Hansen & Zhou, JAIR 28, 2007).

A plain, I/O-free library. ``search`` takes a search space (see
``worker.domains.base.SearchSpace``), a ``SearchConfig``, a ``Budget``, a clock
and a cancellation check, and yields events as they happen:

- ``Improvement`` for each strictly cheaper plan (path, cost, lower bound L,
  bound = cost / L, counters);
- ``Progress`` at least every ``progress_every_s`` seconds of search (L can
  rise without a new plan);
- one final ``Finished`` that says why it stopped and what was proven.

The loop itself lives in a *search core* with a resumable ``step(n)`` that
returns on a slice budget, an improvement or completion (``StepStatus``); the
driver does budgets, cancellation and events between slices, so a compiled
core can take the loop over without changing anything above it.
"""

from __future__ import annotations

from worker.engine.driver import open_core, search, solve
from worker.engine.types import (
    Budget,
    Counters,
    Event,
    Finished,
    Improvement,
    Path,
    Progress,
    SearchConfig,
    StepStatus,
    StopReason,
    suboptimality,
)

__all__ = [
    "Budget",
    "Counters",
    "Event",
    "Finished",
    "Improvement",
    "Path",
    "Progress",
    "SearchConfig",
    "StepStatus",
    "StopReason",
    "open_core",
    "search",
    "solve",
    "suboptimality",
]
