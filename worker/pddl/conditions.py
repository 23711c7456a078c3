"""Parse PDDL preconditions, goals and effects within the supported subset, refusing the rest by name.

Supported: conjunctions, atoms, negated atoms, equality ``(= a b)`` and its
negation, add and delete effects, and ``(increase (total-cost) n)`` with a
number or a function term. Everything else (disjunction, implication,
quantifiers, conditional effects, numeric conditions and effects) is refused
with the construct's name, line and column.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from fractions import Fraction

from worker.pddl.model import EQUALITY, Atom, CostTerm, Literal
from worker.pddl.sexpr import Node, SList, Sym, fail

__all__ = ["Scope", "parse_condition", "parse_effect", "parse_atom", "parse_number", "TOTAL_COST"]

TOTAL_COST = "total-cost"

_REFUSED_IN_CONDITIONS = {
    "or": "disjunction (or)",
    "imply": "implication (imply)",
    "exists": "existential quantifier (exists)",
    "forall": "universal quantifier (forall)",
    "<": "numeric comparison (<)",
    ">": "numeric comparison (>)",
    "<=": "numeric comparison (<=)",
    ">=": "numeric comparison (>=)",
    "preference": "preferences",
}
_REFUSED_IN_EFFECTS = {
    "when": "conditional effect (when)",
    "forall": "universal effect (forall)",
    "decrease": "numeric effect (decrease)",
    "assign": "numeric effect (assign)",
    "scale-up": "numeric effect (scale-up)",
    "scale-down": "numeric effect (scale-down)",
    "or": "disjunction (or) in an effect",
    "exists": "existential quantifier (exists) in an effect",
}
_SUBSET = "supported: STRIPS with typing, negative preconditions, equality and action costs"


@dataclass(frozen=True, slots=True)
class Scope:
    """What names a condition or effect may use."""

    field: str
    predicates: Mapping[str, tuple[tuple[str, ...], ...]]
    functions: Mapping[str, int]
    variables: Mapping[str, tuple[str, ...]]
    objects: Mapping[str, tuple[str, ...]]


def parse_number(field: str, node: Node, what: str) -> Fraction:
    """Return the exact value of a numeric symbol, or raise a located error."""
    if not isinstance(node, Sym):
        fail(field, node, f"{what} must be a number")
    try:
        return Fraction(node.text)
    except (ValueError, ZeroDivisionError):
        fail(field, node, f"{what} must be a number, not {node.text!r}")


def _term(scope: Scope, node: Node) -> str:
    if not isinstance(node, Sym):
        fail(scope.field, node, "expected a variable or an object name, not a list")
    name = node.text
    if name.startswith("?"):
        if name not in scope.variables:
            fail(scope.field, node, f"undeclared variable {name}")
    elif name not in scope.objects:
        fail(scope.field, node, f"unknown object or constant {name!r}")
    return name


def parse_atom(scope: Scope, node: SList) -> Atom:
    """Return the atom written by ``node``: a declared predicate with the right number of terms."""
    head = node.items[0] if node.items else None
    if not isinstance(head, Sym):
        fail(scope.field, node, "expected a predicate name after '('")
    name = head.text
    if name == EQUALITY:
        if any(isinstance(t, SList) for t in node.items[1:]):
            fail(scope.field, node, f"numeric comparison (=) on a function is not supported ({_SUBSET})")
        if len(node.items) != 3:
            fail(scope.field, node, "equality takes exactly two terms")
        return Atom(EQUALITY, (_term(scope, node.items[1]), _term(scope, node.items[2])))
    if name not in scope.predicates:
        fail(scope.field, head, f"unknown predicate {name!r}")
    arity = len(scope.predicates[name])
    if len(node.items) - 1 != arity:
        fail(scope.field, node, f"predicate {name!r} takes {arity} argument(s), got {len(node.items) - 1}")
    return Atom(name, tuple(_term(scope, t) for t in node.items[1:]))


def parse_condition(scope: Scope, node: Node) -> list[Literal]:
    """Return the conjunction of literals written by ``node`` (a precondition or a goal)."""
    if not isinstance(node, SList):
        fail(scope.field, node, f"expected a condition in parentheses, not {node.text!r}")
    if not node.items:
        return []
    head = node.head()
    if head == "and":
        out: list[Literal] = []
        for child in node.items[1:]:
            out.extend(parse_condition(scope, child))
        return out
    if head == "not":
        if len(node.items) != 2:
            fail(scope.field, node, "'not' takes exactly one condition")
        inner = node.items[1]
        if not isinstance(inner, SList) or inner.head() in ("and", "not", *_REFUSED_IN_CONDITIONS):
            fail(scope.field, node, f"negation of a compound condition is not supported ({_SUBSET})")
        return [Literal(parse_atom(scope, inner), positive=False)]
    if head in _REFUSED_IN_CONDITIONS:
        fail(scope.field, node, f"{_REFUSED_IN_CONDITIONS[head]} is not supported ({_SUBSET})")
    return [Literal(parse_atom(scope, node))]


def _cost_term(scope: Scope, node: SList) -> CostTerm:
    if len(node.items) != 3:
        fail(scope.field, node, "'increase' takes (total-cost) and an amount")
    target, amount = node.items[1], node.items[2]
    if not (isinstance(target, SList) and target.head() == TOTAL_COST and len(target.items) == 1):
        fail(scope.field, target, f"numeric fluents other than (total-cost) are not supported ({_SUBSET})")
    if isinstance(amount, Sym):
        value = parse_number(scope.field, amount, "an action cost")
        if value < 0:
            fail(scope.field, amount, f"an action cost must not be negative, got {amount.text}")
        return CostTerm(number=value)
    fname = amount.head()
    if fname is None or fname not in scope.functions:
        fail(scope.field, amount, f"unknown function {fname!r}; declare it under :functions")
    if fname == TOTAL_COST:
        fail(scope.field, amount, "(total-cost) cannot be its own increase")
    arity = scope.functions[fname]
    if len(amount.items) - 1 != arity:
        fail(scope.field, amount, f"function {fname!r} takes {arity} argument(s), got {len(amount.items) - 1}")
    return CostTerm(function=Atom(fname, tuple(_term(scope, t) for t in amount.items[1:])))


def parse_effect(scope: Scope, node: Node) -> tuple[list[Atom], list[Atom], list[CostTerm]]:
    """Return the add effects, delete effects and cost terms written by ``node``."""
    adds: list[Atom] = []
    dels: list[Atom] = []
    costs: list[CostTerm] = []
    _effect(scope, node, adds, dels, costs)
    return adds, dels, costs


def _effect(scope: Scope, node: Node, adds: list[Atom], dels: list[Atom], costs: list[CostTerm]) -> None:
    if not isinstance(node, SList):
        fail(scope.field, node, f"expected an effect in parentheses, not {node.text!r}")
    if not node.items:
        return
    head = node.head()
    if head == "and":
        for child in node.items[1:]:
            _effect(scope, child, adds, dels, costs)
    elif head == "not":
        inner = node.items[1] if len(node.items) == 2 else None
        if not isinstance(inner, SList) or inner.head() in ("and", "not", EQUALITY, *_REFUSED_IN_EFFECTS):
            fail(scope.field, node, "'not' in an effect takes exactly one atom")
        dels.append(parse_atom(scope, inner))
    elif head == "increase":
        costs.append(_cost_term(scope, node))
    elif head in _REFUSED_IN_EFFECTS:
        fail(scope.field, node, f"{_REFUSED_IN_EFFECTS[head]} is not supported ({_SUBSET})")
    elif head == EQUALITY:
        fail(scope.field, node, "equality cannot be an effect")
    else:
        adds.append(parse_atom(scope, node))
