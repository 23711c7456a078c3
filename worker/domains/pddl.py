"""The ``pddl`` domain: an action model written in PDDL, grounded and searched like ``strips``.

Problem fields::

    {"domain": "pddl",
     "domain_text": "(define (domain ...) ...)",
     "problem_text": "(define (problem ...) ...)",
     "heuristic": "lmcut",     # lmcut | hmax | blind
     "guidance": "hff"}        # hff | none

The subset read (see ``worker.pddl``): STRIPS, typing (``either`` allowed),
negative preconditions, equality, constants and action costs
(``(increase (total-cost) n)`` with a number or a function given in
``:init``). Anything else is refused with the construct, line and column.

Plan steps: ``{"action": "(pick bolts shelf-a)", "cost": c, "state": [sorted
true atoms, e.g. "(at robot shelf-a)"]}``; the state lists the atoms of
predicates some action changes (static atoms, such as a road map, are left
out).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from marshmallow import fields, post_load, validate

from worker.domains.base import DomainKind
from worker.domains.fields import StrictSchema
from worker.domains.strips.space import DEFAULT_GUIDANCE, DEFAULT_HEURISTIC, StripsSpace
from worker.heuristics import ADMISSIBLE, GUIDANCE
from worker.pddl import ground, parse_domain, parse_problem
from worker.validation.pddl import validate_pddl_plan

__all__ = ["KIND", "PddlProblem", "PddlSchema", "build", "MAX_TEXT"]

MAX_TEXT = 1 << 20


@dataclass(frozen=True, slots=True)
class PddlProblem:
    """The PDDL texts and the search settings, as loaded (parsed when the space is built)."""

    domain_text: str
    problem_text: str
    heuristic: str = DEFAULT_HEURISTIC
    guidance: str = DEFAULT_GUIDANCE


def _text() -> fields.String:
    return fields.String(required=True, validate=validate.Length(
        min=1, max=MAX_TEXT, error=f"must be PDDL text of 1 to {MAX_TEXT} characters"))


class PddlSchema(StrictSchema):
    """Load the PDDL texts and search settings (the texts are parsed when the space is built)."""

    domain_text = _text()
    problem_text = _text()
    heuristic = fields.String(load_default=DEFAULT_HEURISTIC, validate=validate.OneOf(ADMISSIBLE))
    guidance = fields.String(load_default=DEFAULT_GUIDANCE, validate=validate.OneOf(GUIDANCE))

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> PddlProblem:
        return PddlProblem(**data)


def build(problem: PddlProblem) -> StripsSpace:
    """Parse and ground the texts; return the search space (raise a located ProblemError on bad text)."""
    domain = parse_domain(problem.domain_text)
    parsed = parse_problem(problem.problem_text, domain)
    return StripsSpace(ground(domain, parsed), problem.heuristic, problem.guidance)


def sizes(problem: PddlProblem) -> dict[str, Any]:
    """Return the sizes the service caps: the length of the texts."""
    return {"characters": len(problem.domain_text) + len(problem.problem_text)}


EXAMPLE_DOMAIN = """\
; A picker robot fetches parts from shelves to the packing station.
(define (domain parts-warehouse)
  (:requirements :strips :typing :negative-preconditions :action-costs)
  (:types place part - object  shelf station - place)
  (:predicates (robot-at ?p - place) (on ?x - part ?s - shelf) (holding ?x - part)
               (hand-empty) (packed ?x - part) (aisle ?from ?to - place))
  (:functions (distance ?from ?to - place) - number (total-cost) - number)
  (:action drive
    :parameters (?from ?to - place)
    :precondition (and (robot-at ?from) (aisle ?from ?to))
    :effect (and (not (robot-at ?from)) (robot-at ?to) (increase (total-cost) (distance ?from ?to))))
  (:action pick
    :parameters (?x - part ?s - shelf)
    :precondition (and (robot-at ?s) (on ?x ?s) (hand-empty))
    :effect (and (holding ?x) (not (on ?x ?s)) (not (hand-empty)) (increase (total-cost) 1)))
  (:action pack
    :parameters (?x - part ?p - station)
    :precondition (and (robot-at ?p) (holding ?x) (not (packed ?x)))
    :effect (and (packed ?x) (hand-empty) (not (holding ?x)) (increase (total-cost) 2))))
"""

EXAMPLE_PROBLEM = """\
(define (problem two-parts)
  (:domain parts-warehouse)
  (:objects shelf-a shelf-b - shelf  packing - station  bolts gears - part)
  (:init (robot-at packing) (hand-empty) (on bolts shelf-a) (on gears shelf-b)
         (aisle packing shelf-a) (aisle shelf-a packing) (= (distance packing shelf-a) 4)
         (= (distance shelf-a packing) 4) (aisle shelf-a shelf-b) (aisle shelf-b shelf-a)
         (= (distance shelf-a shelf-b) 3) (= (distance shelf-b shelf-a) 3)
         (aisle packing shelf-b) (aisle shelf-b packing)
         (= (distance packing shelf-b) 6) (= (distance shelf-b packing) 6)
         (= (total-cost) 0))
  (:goal (and (packed bolts) (packed gears) (robot-at packing)))
  (:metric minimize (total-cost)))
"""

EXAMPLE = {"domain": "pddl", "domain_text": EXAMPLE_DOMAIN, "problem_text": EXAMPLE_PROBLEM}

KIND = DomainKind(
    name="pddl",
    summary="Action model in PDDL (STRIPS, typing, negative preconditions, equality, action costs).",
    schema=PddlSchema,
    build=build,
    validate=validate_pddl_plan,
    sizes=sizes,
    example=EXAMPLE,
)
