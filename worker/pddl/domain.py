"""Parse a PDDL domain: requirements, types, constants, predicates, functions and actions.

Errors are ``ProblemError`` on ``domain_text`` with the line and column.
Requirements that name a construct outside the supported subset (durative
actions, derived predicates, timed literals, preferences, constraints) are
refused where they are declared; ADL requirements are accepted as
declarations, and the constructs themselves are refused where they are used,
so a domain that declares ``:adl`` but writes plain STRIPS still loads.
"""

from __future__ import annotations

from collections.abc import Sequence

from worker.pddl.conditions import TOTAL_COST, Scope, parse_condition, parse_effect
from worker.pddl.model import ROOT_TYPE, ActionSchema, Domain
from worker.pddl.sexpr import Node, SList, Sym, fail, read

__all__ = ["parse_domain", "typed_list", "FIELD"]

FIELD = "domain_text"

_SUPPORTED = {":strips", ":typing", ":negative-preconditions", ":equality", ":action-costs"}
# Declared often for no reason; the constructs they allow are refused where they appear.
_TOLERATED = {":adl", ":disjunctive-preconditions", ":existential-preconditions", ":universal-preconditions",
              ":quantified-preconditions", ":conditional-effects", ":fluents", ":numeric-fluents"}
_REFUSED_SECTIONS = {
    ":derived": "derived predicates (:derived)",
    ":durative-action": "durative actions (:durative-action)",
    ":constraints": "constraints (:constraints)",
    ":process": "processes (:process)",
    ":event": "events (:event)",
}


def typed_list(field: str, items: Sequence[Node], *, variables: bool) -> list[tuple[Sym, tuple[str, ...]]]:
    """Return ``(name, types)`` pairs of a PDDL typed list (``a b - t c``); untyped names get ``object``."""
    out: list[tuple[Sym, tuple[str, ...]]] = []
    pending: list[Sym] = []
    i = 0
    while i < len(items):
        it = items[i]
        if isinstance(it, Sym) and it.text == "-":
            if not pending:
                fail(field, it, "'-' must follow one or more names")
            if i + 1 >= len(items):
                fail(field, it, "'-' must be followed by a type")
            types = _type_ref(field, items[i + 1])
            out.extend((p, types) for p in pending)
            pending = []
            i += 2
            continue
        if not isinstance(it, Sym):
            fail(field, it, "expected a name, not a list")
        if variables and not it.text.startswith("?"):
            fail(field, it, f"expected a variable (?name), not {it.text!r}")
        if not variables and it.text.startswith("?"):
            fail(field, it, f"expected a name, not the variable {it.text}")
        pending.append(it)
        i += 1
    out.extend((p, (ROOT_TYPE,)) for p in pending)
    return out


def _type_ref(field: str, node: Node) -> tuple[str, ...]:
    if isinstance(node, Sym):
        return (node.text,)
    if node.head() == "either" and len(node.items) > 1 and all(isinstance(t, Sym) for t in node.items[1:]):
        return tuple(t.text for t in node.items[1:])  # type: ignore[union-attr]
    fail(field, node, "expected a type name or (either type ...)")


def _types(section: SList) -> dict[str, frozenset[str]]:
    """Return every type's ancestors (itself and ``object`` included)."""
    parents: dict[str, set[str]] = {ROOT_TYPE: set()}
    where: dict[str, Sym] = {}
    for name, types in typed_list(FIELD, section.items[1:], variables=False):
        if len(types) > 1:
            fail(FIELD, name, f"type {name.text!r} cannot have an (either ...) parent")
        parents.setdefault(name.text, set()).add(types[0])
        where.setdefault(name.text, name)
    for ps in list(parents.values()):
        for p in ps:
            parents.setdefault(p, {ROOT_TYPE} if p != ROOT_TYPE else set())
    parents[ROOT_TYPE].discard(ROOT_TYPE)
    ancestors: dict[str, frozenset[str]] = {}

    def visit(t: str, trail: tuple[str, ...]) -> frozenset[str]:
        if t in ancestors:
            return ancestors[t]
        if t in trail:
            fail(FIELD, where.get(t, section), f"type {t!r} is its own ancestor")
        acc = {t, ROOT_TYPE}
        for p in parents[t]:
            acc |= visit(p, trail + (t,))
        ancestors[t] = frozenset(acc)
        return ancestors[t]

    for t in parents:
        visit(t, ())
    return ancestors


def _check_types(types: dict[str, frozenset[str]], refs: Sequence[tuple[Sym, tuple[str, ...]]]) -> None:
    for name, ts in refs:
        for t in ts:
            if t not in types:
                fail(FIELD, name, f"unknown type {t!r} for {name.text!r}")


def _requirements(section: SList) -> frozenset[str]:
    found = set()
    for r in section.items[1:]:
        if not isinstance(r, Sym):
            fail(FIELD, r, "expected a requirement such as :strips")
        if r.text not in _SUPPORTED and r.text not in _TOLERATED:
            known = r.text.startswith(":")
            reason = "is outside the supported subset" if known else "is not a requirement"
            fail(FIELD, r, f"requirement {r.text} {reason} (supported: {', '.join(sorted(_SUPPORTED))})")
        found.add(r.text)
    return frozenset(found)


def _predicates(section: SList, types: dict[str, frozenset[str]]) -> dict[str, tuple[tuple[str, ...], ...]]:
    out: dict[str, tuple[tuple[str, ...], ...]] = {}
    for p in section.items[1:]:
        if not isinstance(p, SList) or not isinstance(p.items[0] if p.items else None, Sym):
            fail(FIELD, p, "expected a predicate declaration such as (at ?x ?y)")
        name = p.items[0]
        if name.text in out:  # type: ignore[union-attr]
            fail(FIELD, name, f"predicate {name.text!r} is declared twice")  # type: ignore[union-attr]
        params = typed_list(FIELD, p.items[1:], variables=True)
        _check_types(types, params)
        out[name.text] = tuple(ts for _, ts in params)  # type: ignore[union-attr]
    return out


def _functions(section: SList) -> dict[str, int]:
    out: dict[str, int] = {}
    items = section.items[1:]
    i = 0
    while i < len(items):
        it = items[i]
        if isinstance(it, Sym) and it.text == "-":
            kind = items[i + 1] if i + 1 < len(items) else it
            if not isinstance(kind, Sym) or kind.text != "number":
                fail(FIELD, kind, "only numeric functions (- number) are supported, for action costs")
            i += 2
            continue
        if not isinstance(it, SList) or not isinstance(it.items[0] if it.items else None, Sym):
            fail(FIELD, it, "expected a function declaration such as (total-cost)")
        out[it.items[0].text] = len(typed_list(FIELD, it.items[1:], variables=True))  # type: ignore[union-attr]
        i += 1
    return out


def _action(section: SList, scope: Scope, types: dict[str, frozenset[str]]) -> ActionSchema:
    items = section.items
    if len(items) < 2 or not isinstance(items[1], Sym):
        fail(FIELD, section, "expected an action name after :action")
    name = items[1]
    fields: dict[str, Node] = {}
    i = 2
    while i < len(items):
        key = items[i]
        if not isinstance(key, Sym) or key.text not in (":parameters", ":precondition", ":effect"):
            fail(FIELD, key, "expected :parameters, :precondition or :effect")
        if key.text in fields:
            fail(FIELD, key, f"{key.text} is given twice")
        if i + 1 >= len(items):
            fail(FIELD, key, f"{key.text} needs a value")
        fields[key.text] = items[i + 1]
        i += 2
    params_node = fields.get(":parameters", SList((), name.line, name.col))
    if not isinstance(params_node, SList):
        fail(FIELD, params_node, ":parameters must be a list")
    params = typed_list(FIELD, params_node.items, variables=True)
    _check_types(types, params)
    seen: set[str] = set()
    for v, _ in params:
        if v.text in seen:
            fail(FIELD, v, f"parameter {v.text} is declared twice")
        seen.add(v.text)
    local = Scope(FIELD, scope.predicates, scope.functions, {v.text: ts for v, ts in params}, scope.objects)
    pre = parse_condition(local, fields[":precondition"]) if ":precondition" in fields else []
    adds, dels, costs = parse_effect(local, fields[":effect"]) if ":effect" in fields else ([], [], [])
    return ActionSchema(name.text, tuple((v.text, ts) for v, ts in params), tuple(pre), tuple(adds),
                        tuple(dels), tuple(costs), name.line, name.col)


def parse_domain(text: str) -> Domain:
    """Return the parsed domain of ``text``, or raise a located ProblemError on ``domain_text``."""
    nodes = read(text, FIELD)
    if len(nodes) != 1 or not isinstance(nodes[0], SList) or nodes[0].head() != "define":
        fail(FIELD, nodes[1] if len(nodes) > 1 else (nodes[0] if nodes else (1, 1)),
             "expected exactly one (define (domain NAME) ...)")
    define = nodes[0]
    header = define.items[1] if len(define.items) > 1 else define
    if not (isinstance(header, SList) and header.head() == "domain" and len(header.items) == 2
            and isinstance(header.items[1], Sym)):
        fail(FIELD, header, "expected (domain NAME) after define")
    sections: dict[str, SList] = {}
    actions: list[SList] = []
    for sec in define.items[2:]:
        key = sec.head() if isinstance(sec, SList) else None
        if key is None or not key.startswith(":"):
            fail(FIELD, sec, "expected a section such as (:predicates ...) or (:action ...)")
        if key in _REFUSED_SECTIONS:
            fail(FIELD, sec, f"{_REFUSED_SECTIONS[key]} are not supported")
        if key == ":action":
            actions.append(sec)
        elif key in (":requirements", ":types", ":constants", ":predicates", ":functions"):
            if key in sections:
                fail(FIELD, sec, f"section {key} is given twice")
            sections[key] = sec
        else:
            fail(FIELD, sec, f"unknown domain section {key}")
    reqs = _requirements(sections[":requirements"]) if ":requirements" in sections else frozenset()
    types = _types(sections[":types"]) if ":types" in sections else {ROOT_TYPE: frozenset((ROOT_TYPE,))}
    constants: dict[str, tuple[str, ...]] = {}
    if ":constants" in sections:
        pairs = typed_list(FIELD, sections[":constants"].items[1:], variables=False)
        _check_types(types, pairs)
        for c, ts in pairs:
            if c.text in constants:
                fail(FIELD, c, f"constant {c.text!r} is declared twice")
            constants[c.text] = ts
    predicates = _predicates(sections[":predicates"], types) if ":predicates" in sections else {}
    functions = _functions(sections[":functions"]) if ":functions" in sections else {}
    scope = Scope(FIELD, predicates, functions, {}, constants)
    schemas: list[ActionSchema] = []
    for sec in actions:
        schema = _action(sec, scope, types)
        if any(s.name == schema.name for s in schemas):
            fail(FIELD, sec.items[1], f"action {schema.name!r} is declared twice")
        schemas.append(schema)
    uses_costs = TOTAL_COST in functions or any(s.cost for s in schemas)
    return Domain(header.items[1].text, reqs, types, constants, predicates, functions, tuple(schemas),
                  uses_costs)
