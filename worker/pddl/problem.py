"""Parse a PDDL problem of a parsed domain: objects, initial atoms and costs, goal, metric.

Errors are ``ProblemError`` on ``problem_text`` with the line and column. The
only metric accepted is ``(:metric minimize (total-cost))``; without a metric
the plan cost is still the total action cost (1 per action when the domain
has no costs).
"""

from __future__ import annotations

from fractions import Fraction

from worker.pddl.conditions import TOTAL_COST, Scope, parse_atom, parse_condition, parse_number
from worker.pddl.domain import typed_list
from worker.pddl.model import EQUALITY, Atom, Domain, Problem
from worker.pddl.sexpr import SList, Sym, fail, read

__all__ = ["parse_problem", "FIELD"]

FIELD = "problem_text"

_REFUSED_SECTIONS = {
    ":constraints": "constraints (:constraints)",
    ":length": "plan length hints (:length)",
}


def _init(section: SList, domain: Domain, scope: Scope) -> tuple[frozenset[Atom], dict[Atom, Fraction]]:
    atoms: set[Atom] = set()
    values: dict[Atom, Fraction] = {}
    for item in section.items[1:]:
        if not isinstance(item, SList) or not item.items:
            fail(FIELD, item, "expected an initial atom such as (at ball1 rooma)")
        head = item.head()
        if head == "not":
            fail(FIELD, item, "negative initial atoms are not needed: whatever :init does not list is false")
        if head == "at" and "at" not in domain.predicates:
            fail(FIELD, item, "timed initial literals (at ...) are not supported")
        if head == EQUALITY:
            if len(item.items) != 3 or not isinstance(item.items[1], SList):
                fail(FIELD, item, "expected (= (function args) number)")
            term = item.items[1]
            fname = term.head()
            if fname is None or fname not in domain.functions:
                fail(FIELD, term, f"unknown function {fname!r}")
            if len(term.items) - 1 != domain.functions[fname]:
                fail(FIELD, term, f"function {fname!r} takes {domain.functions[fname]} argument(s)")
            args = []
            for t in term.items[1:]:
                if not isinstance(t, Sym) or t.text not in scope.objects:
                    fail(FIELD, t, "expected an object name")
                args.append(t.text)
            key = Atom(fname, tuple(args))
            if key in values:
                fail(FIELD, item, f"{key.text()} is given a value twice")
            value = parse_number(FIELD, item.items[2], "a function value")
            if value < 0 and fname != TOTAL_COST:
                fail(FIELD, item.items[2], f"an action cost must not be negative, got {item.items[2].text}")
            values[key] = value
            continue
        atom = parse_atom(scope, item)
        atoms.add(atom)
    return frozenset(atoms), values


def parse_problem(text: str, domain: Domain) -> Problem:
    """Return the parsed problem of ``text`` for ``domain``, or raise a located ProblemError."""
    nodes = read(text, FIELD)
    if len(nodes) != 1 or not isinstance(nodes[0], SList) or nodes[0].head() != "define":
        fail(FIELD, nodes[1] if len(nodes) > 1 else (nodes[0] if nodes else (1, 1)),
             "expected exactly one (define (problem NAME) ...)")
    define = nodes[0]
    header = define.items[1] if len(define.items) > 1 else define
    if not (isinstance(header, SList) and header.head() == "problem" and len(header.items) == 2
            and isinstance(header.items[1], Sym)):
        fail(FIELD, header, "expected (problem NAME) after define")
    sections: dict[str, SList] = {}
    for sec in define.items[2:]:
        key = sec.head() if isinstance(sec, SList) else None
        if key is None or not key.startswith(":"):
            fail(FIELD, sec, "expected a section such as (:objects ...) or (:goal ...)")
        if key in _REFUSED_SECTIONS:
            fail(FIELD, sec, f"{_REFUSED_SECTIONS[key]} are not supported")
        if key not in (":domain", ":requirements", ":objects", ":init", ":goal", ":metric"):
            fail(FIELD, sec, f"unknown problem section {key}")
        if key in sections:
            fail(FIELD, sec, f"section {key} is given twice")
        sections[key] = sec
    dom = sections.get(":domain")
    if dom is None:
        fail(FIELD, define, "missing (:domain NAME)")
    if len(dom.items) != 2 or not isinstance(dom.items[1], Sym):
        fail(FIELD, dom, "expected (:domain NAME)")
    if dom.items[1].text != domain.name:
        fail(FIELD, dom.items[1], f"the problem is for domain {dom.items[1].text!r}, "
                                  f"but the domain text defines {domain.name!r}")
    objects: dict[str, tuple[str, ...]] = dict(domain.constants)
    if ":objects" in sections:
        declared: set[str] = set()
        for name, types in typed_list(FIELD, sections[":objects"].items[1:], variables=False):
            if name.text in declared:
                fail(FIELD, name, f"object {name.text!r} is declared twice")
            for t in types:
                if t not in domain.supertypes:
                    fail(FIELD, name, f"unknown type {t!r} for {name.text!r}")
            declared.add(name.text)
            if name.text in domain.constants and domain.constants[name.text] != types:
                fail(FIELD, name, f"{name.text!r} is a domain constant of another type")
            objects[name.text] = types
    scope = Scope(FIELD, domain.predicates, domain.functions, {}, objects)
    init, values = _init(sections[":init"], domain, scope) if ":init" in sections else (frozenset(), {})
    if ":goal" not in sections:
        fail(FIELD, define, "missing (:goal ...)")
    goal_sec = sections[":goal"]
    if len(goal_sec.items) != 2:
        fail(FIELD, goal_sec, "expected (:goal CONDITION)")
    goal = parse_condition(scope, goal_sec.items[1])
    if ":metric" in sections:
        m = sections[":metric"]
        ok = (len(m.items) == 3 and isinstance(m.items[1], Sym) and m.items[1].text == "minimize"
              and isinstance(m.items[2], SList) and m.items[2].head() == TOTAL_COST and len(m.items[2].items) == 1)
        if not ok:
            fail(FIELD, m, "the only supported metric is (:metric minimize (total-cost))")
    return Problem(header.items[1].text, domain.name, objects, init, values, tuple(goal))
