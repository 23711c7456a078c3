"""Read PDDL (a STRIPS subset with typing, negative preconditions, equality and action costs) and ground it.

``parse_domain(text)`` and ``parse_problem(text, domain)`` return the lifted
model (``worker.pddl.model``); ``ground(domain, problem)`` returns the
``GroundTask`` the ``pddl`` domain searches. Every error is a ``ProblemError``
on ``domain_text`` or ``problem_text`` whose message and ``extra`` give the
line and column.
"""

from __future__ import annotations

from worker.pddl.domain import parse_domain
from worker.pddl.grounding import MAX_GROUND_ACTIONS, MAX_GROUND_FACTS, ground
from worker.pddl.model import ActionSchema, Atom, Domain, Literal, Problem
from worker.pddl.problem import parse_problem

__all__ = ["parse_domain", "parse_problem", "ground", "ActionSchema", "Atom", "Domain", "Literal", "Problem",
           "MAX_GROUND_ACTIONS", "MAX_GROUND_FACTS"]
