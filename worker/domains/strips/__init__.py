"""The ``strips`` domain: a general action model written as JSON facts and actions.

See ``model`` for the problem document, ``space`` for states and successors,
``worker.heuristics`` for the estimates. The ``pddl`` domain
(``worker.domains.pddl``) compiles PDDL text to the same ground task and
searches it with the same space.

Plan steps: ``{"action": "<action name>", "cost": c, "state": [sorted names
of the facts true after the step]}``.
"""

from __future__ import annotations

from typing import Any

from worker.domains.base import DomainKind
from worker.domains.strips.example import EXAMPLE
from worker.domains.strips.model import MAX_ACTIONS, MAX_FACTS, StripsProblem, StripsSchema, compile_task
from worker.domains.strips.space import DEFAULT_GUIDANCE, DEFAULT_HEURISTIC, StripsSpace
from worker.validation.strips import validate_strips_plan

__all__ = ["KIND", "StripsProblem", "StripsSchema", "StripsSpace", "build", "compile_task",
           "DEFAULT_HEURISTIC", "DEFAULT_GUIDANCE", "MAX_FACTS", "MAX_ACTIONS"]


def build(problem: StripsProblem) -> StripsSpace:
    """Return the search space of a loaded JSON action model."""
    return StripsSpace(compile_task(problem), problem.heuristic, problem.guidance)


def sizes(problem: StripsProblem) -> dict[str, Any]:
    """Return the sizes the service caps: facts and actions."""
    return {"facts": len(problem.facts), "actions": len(problem.actions)}


KIND = DomainKind(
    name="strips",
    summary="General action model as JSON facts and actions (preconditions, effects, costs).",
    schema=StripsSchema,
    build=build,
    validate=validate_strips_plan,
    sizes=sizes,
    example=EXAMPLE,
)
