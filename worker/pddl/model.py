"""Hold parsed PDDL: the lifted domain (types, predicates, action schemas) and the problem.

Every name is lower-case (PDDL is case-insensitive). A term is a variable
(``?x``) or an object name. Equality is the predicate ``=``. An action's cost
is the sum of its ``(increase (total-cost) ...)`` terms, each a number or a
function term whose value the problem's ``:init`` gives; a domain with no
``total-cost`` at all gives every action cost 1.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from fractions import Fraction

__all__ = ["Atom", "Literal", "CostTerm", "ActionSchema", "Domain", "Problem", "ROOT_TYPE", "EQUALITY"]

ROOT_TYPE = "object"
EQUALITY = "="


@dataclass(frozen=True, slots=True)
class Atom:
    """A predicate applied to terms (variables or objects)."""

    predicate: str
    args: tuple[str, ...]

    def text(self) -> str:
        """Return the atom written as PDDL, e.g. ``(at ball1 rooma)``."""
        return "(" + " ".join((self.predicate, *self.args)) + ")"


@dataclass(frozen=True, slots=True)
class Literal:
    """An atom or its negation, in a precondition or a goal."""

    atom: Atom
    positive: bool = True


@dataclass(frozen=True, slots=True)
class CostTerm:
    """One ``increase`` of the total cost: a fixed number, or a function term read from ``:init``."""

    number: Fraction | None = None
    function: Atom | None = None


@dataclass(frozen=True, slots=True)
class ActionSchema:
    """A lifted action: typed parameters, precondition literals, effects and cost terms."""

    name: str
    params: tuple[tuple[str, tuple[str, ...]], ...]  # (variable, its types: one, or several for `either`)
    pre: tuple[Literal, ...]
    add: tuple[Atom, ...]
    delete: tuple[Atom, ...]
    cost: tuple[CostTerm, ...]
    line: int = 0
    col: int = 0

    def variables(self) -> tuple[str, ...]:
        """Return the parameter variables in order."""
        return tuple(v for v, _ in self.params)


@dataclass(frozen=True, slots=True)
class Domain:
    """A parsed domain."""

    name: str
    requirements: frozenset[str]
    supertypes: Mapping[str, frozenset[str]]  # type -> every ancestor type, itself included
    constants: Mapping[str, tuple[str, ...]]  # object -> declared types
    predicates: Mapping[str, tuple[tuple[str, ...], ...]]  # name -> per-argument types
    functions: Mapping[str, int]  # name -> arity
    actions: tuple[ActionSchema, ...]
    uses_costs: bool = False

    def action(self, name: str) -> ActionSchema | None:
        """Return the schema called ``name``, or None."""
        for a in self.actions:
            if a.name == name:
                return a
        return None

    def fluent_predicates(self) -> frozenset[str]:
        """Return the predicates some action adds or deletes; the others are static."""
        return frozenset(a.predicate for s in self.actions for a in (*s.add, *s.delete))

    def is_of_type(self, declared: tuple[str, ...], wanted: tuple[str, ...]) -> bool:
        """Return True when an object declared with ``declared`` types belongs to one of ``wanted``."""
        for t in declared:
            ancestors = self.supertypes.get(t, frozenset((t, ROOT_TYPE)))
            if any(w in ancestors for w in wanted):
                return True
        return False


@dataclass(frozen=True, slots=True)
class Problem:
    """A parsed problem of a domain."""

    name: str
    domain_name: str
    objects: Mapping[str, tuple[str, ...]]  # every object, the domain's constants included
    init: frozenset[Atom]
    values: Mapping[Atom, Fraction] = field(default_factory=dict)  # function term -> number
    goal: tuple[Literal, ...] = ()
