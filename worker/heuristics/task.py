"""Hold a ground STRIPS task: numbered facts, ground actions and exact integer costs.

Both action-model domains compile to this one form: the JSON ``strips``
problem directly, the ``pddl`` problem after grounding. The search space and
the relaxation heuristics read it; nothing here depends on either input form.

Costs are exact. Every action cost is a non-negative rational number; the
task keeps ``icost`` (an int) per action and one ``scale`` such that the real
cost is ``icost / scale``. Heuristics add and subtract the ints, so cost
partitioning (LM-cut) cannot drift or spin on rounding.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from fractions import Fraction

__all__ = ["GroundAction", "GroundTask", "exact_cost", "normalise_action", "scale_costs"]


@dataclass(frozen=True, slots=True)
class GroundAction:
    """One ground action: fact ids of its conditions and effects, and its scaled integer cost.

    ``delete`` never shares a fact with ``add``: when an action both deletes
    and adds a fact, the fact stays true (add after delete), so it is dropped
    from ``delete`` when the task is made.
    """

    name: str
    pre: tuple[int, ...]
    pre_not: tuple[int, ...]
    add: tuple[int, ...]
    delete: tuple[int, ...]
    icost: int


@dataclass(frozen=True, slots=True)
class GroundTask:
    """A ground task; ``infeasible`` holds a reason when the goal is proven unreachable before search."""

    facts: tuple[str, ...]
    init: tuple[int, ...]
    goal: tuple[int, ...]
    goal_not: tuple[int, ...]
    actions: tuple[GroundAction, ...]
    scale: int = 1
    infeasible: str | None = None

    def cost(self, action: GroundAction) -> float:
        """Return the real cost of ``action`` as a float."""
        return action.icost / self.scale if self.scale != 1 else float(action.icost)

    def to_float(self, value: int | float) -> float:
        """Return a scaled integer cost (or infinity) in real units."""
        if value == math.inf:
            return math.inf
        return value / self.scale if self.scale != 1 else float(value)


def exact_cost(value: float | int | Fraction | str) -> Fraction:
    """Return ``value`` as an exact fraction; a float is read as the decimal it prints as."""
    if isinstance(value, float):
        # repr() is the shortest decimal that round-trips, i.e. what the user wrote.
        return Fraction(repr(value))
    return Fraction(value)


def scale_costs(costs: Sequence[Fraction]) -> tuple[list[int], int]:
    """Return integer costs and the common scale: ``costs[i] == ints[i] / scale`` exactly."""
    scale = 1
    for c in costs:
        scale = math.lcm(scale, c.denominator)
    return [int(c * scale) for c in costs], scale


def normalise_action(name: str, pre: Iterable[int], pre_not: Iterable[int], add: Iterable[int],
                     delete: Iterable[int], icost: int) -> GroundAction:
    """Return a ``GroundAction`` with sorted, duplicate-free fact tuples and add-after-delete applied."""
    add_set = set(add)
    return GroundAction(
        name=name,
        pre=tuple(sorted(set(pre))),
        pre_not=tuple(sorted(set(pre_not))),
        add=tuple(sorted(add_set)),
        delete=tuple(sorted(set(delete) - add_set)),
        icost=icost,
    )
