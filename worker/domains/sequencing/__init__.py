"""The ``sequencing`` domain: order tasks on one resource (machine, vehicle, picker, station).

Tasks have durations and optional windows (``release``, ``due``); moving
from one to the next costs a sequence-dependent changeover (a ``setup``
matrix, or travel between task coordinates); ``precedence`` pairs fix some
orders; the sequence may return to the start. The objective is the total
changeover (``setup``) or the completion time of the whole sequence
(``makespan``). See ``model`` for the document and timing rule, ``space`` for
states and dominance, ``heuristic`` for the lower bounds.

Plan steps: ``{"action": task_id | "return", "cost": c, "state": {"task":
task_id | null, "start": t, "end": t, "changeover": c}}``.
"""

from __future__ import annotations

from typing import Any

from worker.domains.base import DomainKind
from worker.domains.sequencing.example import EXAMPLE
from worker.domains.sequencing.model import MAX_TASKS, Objective, SequencingProblem, SequencingSchema
from worker.domains.sequencing.space import SequencingSpace
from worker.validation.sequencing import validate_sequencing_plan

__all__ = ["KIND", "MAX_TASKS", "Objective", "SequencingProblem", "SequencingSchema", "SequencingSpace"]


def build(problem: SequencingProblem) -> SequencingSpace:
    """Return the search space of a loaded problem."""
    return SequencingSpace(problem)


def sizes(problem: SequencingProblem) -> dict[str, Any]:
    """Return the sizes the service caps: the number of tasks."""
    return {"tasks": len(problem.tasks)}


KIND = DomainKind(
    name="sequencing",
    summary="Order tasks on one resource with changeovers or travel, time windows and precedence.",
    schema=SequencingSchema,
    build=build,
    validate=validate_sequencing_plan,
    sizes=sizes,
    example=EXAMPLE,
)
