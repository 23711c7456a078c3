"""The small protocol every problem domain implements, and the kind record that registers it.

A *domain kind* (``DomainKind``) is what the registry holds: a name, the
marshmallow schema of its problem, a ``build`` function that turns a validated
problem into a ``SearchSpace``, and an independent plan ``validate`` function.

A *search space* (``SearchSpace``) is what the engine searches. The engine sees
nothing else of a domain: states are opaque hashable values, successors are
``(next_state, cost, action)`` triples, and ``heuristic`` must be admissible
(never above the cheapest cost to a goal); it prunes and gives the lower bound.
``guidance``, when not None, is a second, possibly inadmissible estimate that
only orders the open list.

Optional attributes a space may offer (the engine looks them up with getattr):

``dense_size``
    an int N: every state is an int in ``range(N)``, so the engine may keep its
    tables in flat arrays instead of dicts.
``goal_set``
    a set (or frozenset) of goal states, when the goal is a finite list of
    states: the engine then tests membership inline instead of calling
    ``is_goal`` (``is_goal`` must agree with it).
``kernel_spec()``
    plain data describing the space for a compiled search kernel (see
    ``worker.engine``); a space without it is searched in pure Python.

A domain knows nothing of the engine's internals; the engine knows nothing of
any particular domain.
"""

from __future__ import annotations

from collections.abc import Callable, Hashable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Protocol, runtime_checkable

from marshmallow import Schema

State = Hashable
Successor = tuple[Hashable, float, Any]  # (next_state, step cost >= 0, action label)
Step = dict[str, Any]  # {"action": ..., "cost": float, "state": ...} plus domain extras


@runtime_checkable
class SearchSpace(Protocol):
    """What the engine needs of a problem: start, goal test, successors, an admissible h."""

    guidance: Callable[[Any], float] | None

    def initial_state(self) -> Hashable:
        """Return the start state."""

    def is_goal(self, state: Any) -> bool:
        """Return True when ``state`` satisfies the goal."""

    def successors(self, state: Any) -> Iterable[Successor]:
        """Yield ``(next_state, cost, action)`` for every action applicable in ``state``."""

    def heuristic(self, state: Any) -> float:
        """Return an admissible estimate of the cheapest cost from ``state`` to a goal."""

    def render_plan(self, states: Sequence[Any], actions: Sequence[Any], costs: Sequence[float]) -> list[Step]:
        """Turn an engine path (``len(states) == len(actions) + 1``) into documented steps.

        Each step is ``{"action": ..., "cost": ..., "state": ...}`` where ``state``
        is the state reached by the step, in the domain's documented JSON form.
        """


@dataclass(frozen=True, slots=True)
class DomainKind:
    """A registered problem domain: schema, builder, independent validator."""

    name: str
    summary: str
    schema: type[Schema]
    # ``problem`` below is whatever ``schema().load`` returned for the problem
    # fields (the "domain" key removed); domains may load into dataclasses.
    build: Callable[[Any], SearchSpace]
    # Replays rendered steps on the problem itself, returns the plan's cost,
    # raises PlanValidationError. Must not reuse the space's successor code.
    validate: Callable[[Any, Sequence[Step]], float]
    # Sizes the service caps, e.g. {"cells": 4096} or {"nodes": 10, "edges": 30}.
    sizes: Callable[[Any], dict[str, int]] = field(default=lambda problem: {})
    # A small invented example problem (with its "domain" key) for docs and tests.
    example: Mapping[str, Any] | None = None
