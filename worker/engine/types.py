"""Value types of the engine: configuration, budget, path, events and the stop reason."""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import Enum
from typing import Any


class StopReason(str, Enum):
    """Why a search ended."""

    EXHAUSTED = "exhausted"  # open list empty or L >= cost: the result is proven
    TARGET_BOUND = "target_bound"  # cost / L reached the requested bound
    TIME = "time"
    EXPANSIONS = "expansions"
    MEMORY = "memory"  # stored states reached max_states
    CANCELLED = "cancelled"


class StepStatus(str, Enum):
    """What one call of ``step(budget)`` on a search core ended with."""

    BUDGET = "budget"  # the slice of expansions was used up; call again
    IMPROVED = "improved"  # a cheaper plan was found; read it, then call again
    DONE = "done"  # the open list is exhausted (or L >= incumbent): nothing left to prove


@dataclass(frozen=True, slots=True)
class SearchConfig:
    """How to search: the weight schedule, the reopening policy and the bound-raising share.

    ``weight``       w in the open-list order g + w*h (1.0 is plain A*).
    ``schedule``     "fixed" keeps w; "decreasing" lowers it by ``weight_step``
                     after each improvement (never below 1), re-keying the open list.
    ``reopen``       "reopen": a cheaper path to a closed state puts it back on
                     open (AWA*); "defer": it waits on an INCONS list until the
                     next weight change (ARA*), and L is taken over OPEN and INCONS.
    ``bound_share``  once a plan is in hand, this share of expansions takes the
                     open node of least g + h instead, which raises the lower bound.
    ``g_tolerance``  relative tolerance under which two g-values count as equal
                     (octile float costs differ in the last bits).
    """

    weight: float = 2.0
    schedule: str = "decreasing"
    weight_step: float = 0.5
    reopen: str = "reopen"
    bound_share: float = 0.1
    g_tolerance: float = 1e-9


@dataclass(frozen=True, slots=True)
class Budget:
    """Limits of one search; None means no limit of that kind."""

    time_s: float | None = None
    expansions: int | None = None
    max_states: int | None = None
    target_bound: float | None = None


@dataclass(frozen=True, slots=True)
class Path:
    """A plan as the engine sees it: states[0] is the start; actions[i] leads to states[i+1]."""

    states: tuple[Any, ...]
    actions: tuple[Any, ...]
    costs: tuple[float, ...]

    @property
    def cost(self) -> float:
        return math.fsum(self.costs)


def suboptimality(cost: float | None, lower_bound: float) -> float | None:
    """Return cost / L, the proven factor by which the plan may exceed the optimum."""
    if cost is None:
        return None
    if cost <= 0.0:
        return 1.0
    if lower_bound <= 0.0:
        return math.inf
    return max(1.0, cost / lower_bound)


@dataclass(frozen=True, slots=True)
class Counters:
    """Work done so far."""

    expansions: int
    generated: int
    reopened: int
    stored: int
    elapsed_s: float


@dataclass(frozen=True, slots=True)
class Improvement:
    """A strictly cheaper plan, with the lower bound proven at the moment it was found."""

    path: Path
    cost: float
    lower_bound: float
    bound: float
    weight: float
    counters: Counters


@dataclass(frozen=True, slots=True)
class Progress:
    """A periodic report: the lower bound can rise without a new plan."""

    cost: float | None
    lower_bound: float
    bound: float | None
    weight: float
    counters: Counters


@dataclass(frozen=True, slots=True)
class Finished:
    """The last event of a search."""

    stop_reason: StopReason
    cost: float | None
    lower_bound: float
    bound: float | None
    proven_optimal: bool
    proven_infeasible: bool
    path: Path | None
    counters: Counters
    backend: str = "python"


Event = Improvement | Progress | Finished
