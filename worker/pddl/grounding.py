"""Ground a parsed PDDL problem into a ``GroundTask`` by relaxed reachability.

Only actions that can ever apply are made, never the cross product of all
parameter values: starting from the initial atoms, each round joins every
schema's positive preconditions against the atoms reached so far (static
predicates, which no action changes, are only ever their initial atoms) and
adds the effects of every new binding, until a round adds no atom. After the
first round a join starts from the atoms new since the previous round
(semi-naive evaluation), so no binding is enumerated round after round. Types,
equality and negated static atoms are exact checks during the join; negated
changing atoms are ignored while reaching (a relaxation, so nothing reachable
is lost) and kept as ``pre_not`` of the ground action.

Static atoms are then dropped from preconditions (they always hold), and a
goal atom that was never reached, a false static goal atom or a false goal
equality makes the task infeasible before any search (``GroundTask.infeasible``).

Facts and actions are sorted by name, so the same text always gives the same
task whatever the hash seed. A fact is named like ``(at ball1 rooma)``, an
action like ``(pick ball1 rooma left)``.
"""

from __future__ import annotations

import logging
import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from fractions import Fraction

from worker.exceptions import LimitError, ProblemError
from worker.heuristics.relaxed import prune_unreachable
from worker.heuristics.task import GroundTask, normalise_action, scale_costs
from worker.pddl.model import EQUALITY, ActionSchema, Atom, Domain, Problem

__all__ = ["ground", "MAX_GROUND_ACTIONS", "MAX_GROUND_FACTS", "MAX_BINDINGS_TRIED"]

logger = logging.getLogger(__name__)

MAX_GROUND_ACTIONS = 400_000
MAX_GROUND_FACTS = 1 << 16
# Candidate bindings tried over the whole fixpoint; parameters that no precondition
# constrains are enumerated by type, which a hostile schema could make explode.
MAX_BINDINGS_TRIED = 2_000_000

Arg = tuple[bool, object]  # (is_variable, parameter index or object name)


@dataclass(frozen=True, slots=True)
class _Rule:
    """A schema prepared for joining: atoms as (predicate, args) with variables as parameter indices."""

    schema: ActionSchema
    allowed: tuple[frozenset[str], ...]  # per parameter: the objects of its type
    join: tuple[tuple[str, tuple[Arg, ...]], ...]  # positive atoms, in join order
    seeded: tuple[list[tuple[str, tuple[Arg, ...]]], ...]  # per atom: a join order that starts with it
    free: tuple[int, ...]  # parameters no positive atom binds
    same: tuple[tuple[Arg, Arg], ...]
    differ: tuple[tuple[Arg, Arg], ...]
    static_not: tuple[tuple[str, tuple[Arg, ...]], ...]


def _args(schema: ActionSchema, atom: Atom) -> tuple[Arg, ...]:
    index = {v: i for i, v in enumerate(schema.variables())}
    return tuple((True, index[t]) if t.startswith("?") else (False, t) for t in atom.args)


def _rule(schema: ActionSchema, domain: Domain, problem: Problem, static: frozenset[str],
          init_size: dict[str, int]) -> _Rule:
    allowed = tuple(frozenset(o for o, ts in problem.objects.items() if domain.is_of_type(ts, types))
                    for _, types in schema.params)
    atoms, same, differ, static_not = [], [], [], []
    for lit in schema.pre:
        args = _args(schema, lit.atom)
        if lit.atom.predicate == EQUALITY:
            (same if lit.positive else differ).append((args[0], args[1]))
        elif lit.positive:
            atoms.append((lit.atom.predicate, args))
        elif lit.atom.predicate in static:
            static_not.append((lit.atom.predicate, args))
    join = _order(atoms, set(), static, init_size)
    seeded = tuple(_order([a], set(), static, init_size) + _order(atoms[:i] + atoms[i + 1:], _vars(a), static,
                                                                 init_size) for i, a in enumerate(atoms))
    bound = set().union(*(_vars(a) for a in atoms)) if atoms else set()
    free = tuple(i for i in range(len(schema.params)) if i not in bound)
    return _Rule(schema, allowed, tuple(join), seeded, free, tuple(same), tuple(differ), tuple(static_not))


Join = tuple[str, tuple[Arg, ...]]


def _vars(atom: Join) -> set[int]:
    return {x for is_var, x in atom[1] if is_var}  # type: ignore[misc]


def _order(atoms: list[Join], bound: set[int], static: frozenset[str], init_size: dict[str, int]) -> list[Join]:
    """Order atoms for joining: most already-bound terms first, then static ones, then the smaller."""
    atoms, bound, out = list(atoms), set(bound), []
    while atoms:
        def score(item: Join) -> tuple[int, int, int]:
            pred, args = item
            fixed = sum(1 for is_var, x in args if not is_var or x in bound)
            return (-fixed, 0 if pred in static else 1, init_size.get(pred, 0))
        best = min(atoms, key=score)
        atoms.remove(best)
        out.append(best)
        bound |= _vars(best)
    return out


def _value(arg: Arg, binding: list[str | None]) -> str:
    is_var, x = arg
    return binding[x] if is_var else x  # type: ignore[return-value,index]


class _Reach:
    """The relation of reached atoms per predicate, with per-position indexes kept up to date."""

    def __init__(self, init: frozenset[Atom]) -> None:
        self.rel: dict[str, set[tuple[str, ...]]] = {}
        for a in init:
            self.rel.setdefault(a.predicate, set()).add(a.args)
        self._index: dict[str, dict[int, dict[str, list[tuple[str, ...]]]]] = {}

    def add(self, pred: str, args: tuple[str, ...]) -> bool:
        """Record an atom; return True when it is new."""
        rel = self.rel.setdefault(pred, set())
        if args in rel:
            return False
        rel.add(args)
        for pos, idx in self._index.get(pred, {}).items():
            idx.setdefault(args[pos], []).append(args)
        return True

    def matching(self, pred: str, pos: int, obj: str) -> list[tuple[str, ...]]:
        """Return the reached tuples of ``pred`` with ``obj`` at position ``pos``."""
        by_pos = self._index.setdefault(pred, {})
        idx = by_pos.get(pos)
        if idx is None:
            idx = by_pos[pos] = {}
            for t in self.rel.get(pred, ()):
                idx.setdefault(t[pos], []).append(t)
        return idx.get(obj, [])


class _Work:
    """Count candidate bindings and refuse the problem past ``MAX_BINDINGS_TRIED``."""

    __slots__ = ("tried",)

    def __init__(self) -> None:
        self.tried = 0

    def tick(self, n: int = 1) -> None:
        """Count ``n`` more candidates; raise LimitError past the cap."""
        self.tried += n
        if self.tried > MAX_BINDINGS_TRIED:
            raise LimitError("problem_text", f"grounding tried more than {MAX_BINDINGS_TRIED} parameter bindings; "
                             "give parameters types or preconditions that narrow them",
                             cap="grounding_bindings", limit=MAX_BINDINGS_TRIED)


def _bindings(rule: _Rule, join: Sequence[Join], reach: _Reach, init: frozenset[Atom], work: _Work,
              first: list[tuple[str, ...]] | None = None) -> Iterator[tuple[str, ...]]:
    """Yield every parameter binding whose positive atoms are reached and whose exact checks pass.

    With ``first`` given, the first atom of ``join`` only takes those tuples
    (the atoms new since the last round).
    """
    n = len(rule.allowed)
    binding: list[str | None] = [None] * n
    allowed = rule.allowed

    def finish() -> Iterator[tuple[str, ...]]:
        work.tick()
        for a, b in rule.same:
            if _value(a, binding) != _value(b, binding):
                return
        for a, b in rule.differ:
            if _value(a, binding) == _value(b, binding):
                return
        for pred, args in rule.static_not:
            if Atom(pred, tuple(_value(x, binding) for x in args)) in init:
                return
        yield tuple(binding)  # type: ignore[arg-type]

    def free(k: int) -> Iterator[tuple[str, ...]]:
        if k == len(rule.free):
            yield from finish()
            return
        i = rule.free[k]
        for obj in sorted(allowed[i]):
            binding[i] = obj
            yield from free(k + 1)
        binding[i] = None

    def step(k: int) -> Iterator[tuple[str, ...]]:
        if k == len(join):
            yield from free(0)
            return
        pred, args = join[k]
        candidates = first if k == 0 else None
        for pos, (is_var, x) in enumerate(args if candidates is None else ()):
            v = x if not is_var else binding[x]  # type: ignore[index]
            if v is not None:
                candidates = reach.matching(pred, pos, v)  # type: ignore[arg-type]
                break
        if candidates is None:
            candidates = list(reach.rel.get(pred, ()))
        work.tick(len(candidates))
        for tup in candidates:
            newly = []
            ok = True
            for pos, (is_var, x) in enumerate(args):
                v = tup[pos]
                if not is_var:
                    if v != x:
                        ok = False
                        break
                    continue
                b = binding[x]  # type: ignore[index]
                if b is None:
                    if v not in allowed[x]:  # type: ignore[index]
                        ok = False
                        break
                    binding[x] = v  # type: ignore[index]
                    newly.append(x)
                elif b != v:
                    ok = False
                    break
            if ok:
                yield from step(k + 1)
            for x in newly:
                binding[x] = None  # type: ignore[index]

    yield from step(0)


def _ground_cost(schema: ActionSchema, binding: tuple[str, ...], domain: Domain, problem: Problem) -> Fraction:
    if not domain.uses_costs:
        return Fraction(1)
    total = Fraction(0)
    sub = dict(zip(schema.variables(), binding))
    for term in schema.cost:
        if term.number is not None:
            total += term.number
            continue
        key = Atom(term.function.predicate, tuple(sub.get(t, t) for t in term.function.args))  # type: ignore[union-attr]
        if key not in problem.values:
            name = "(" + " ".join((schema.name, *binding)) + ")"
            raise ProblemError("problem_text", f"{name} costs {key.text()}, but :init gives it no value")
        total += problem.values[key]
    return total


def ground(domain: Domain, problem: Problem) -> GroundTask:
    """Return the ground task of ``problem``: reachable facts and actions, exact costs, the goal."""
    fluent = domain.fluent_predicates()
    static = frozenset(domain.predicates) - fluent
    init_size: dict[str, int] = {}
    for a in problem.init:
        init_size[a.predicate] = init_size.get(a.predicate, 0) + 1
    rules = [_rule(s, domain, problem, static, init_size) for s in domain.actions]
    for rule in rules:
        combos = math.prod(len(rule.allowed[i]) for i in rule.free)
        if combos > MAX_BINDINGS_TRIED:
            names = " ".join(rule.schema.params[i][0] for i in rule.free)
            raise LimitError("problem_text", f"action {rule.schema.name!r}: parameters {names} are not narrowed by "
                             f"any precondition and take {combos} combinations; type them or add preconditions",
                             cap="grounding_bindings", limit=MAX_BINDINGS_TRIED)
    reach = _Reach(problem.init)
    found: list[set[tuple[str, ...]]] = [set() for _ in rules]
    total = 0
    work = _Work()
    delta: dict[str, list[tuple[str, ...]]] | None = None  # None: the first, full round
    while True:
        new: dict[str, list[tuple[str, ...]]] = {}
        for rule, seen in zip(rules, found):
            if delta is None:
                runs = [(rule.join, None)]
            else:
                runs = [(order, delta[order[0][0]]) for order in rule.seeded if order[0][0] in delta]
            for order, first in runs:
                fresh = []
                for b in _bindings(rule, order, reach, problem.init, work, first):
                    if b in seen:
                        continue
                    fresh.append(b)
                    total += 1
                    if total > MAX_GROUND_ACTIONS:
                        raise LimitError("problem_text", f"grounding makes more than {MAX_GROUND_ACTIONS} actions",
                                         cap="ground_actions", limit=MAX_GROUND_ACTIONS)
                for b in fresh:
                    seen.add(b)
                    sub = dict(zip(rule.schema.variables(), b))
                    for atom in rule.schema.add:
                        args = tuple(sub.get(t, t) for t in atom.args)
                        if reach.add(atom.predicate, args):
                            new.setdefault(atom.predicate, []).append(args)
        if not new:
            break
        delta = new
    facts = sorted((p, args) for p, rel in reach.rel.items() if p in fluent for args in rel)
    if len(facts) > MAX_GROUND_FACTS:
        raise LimitError("problem_text", f"grounding makes more than {MAX_GROUND_FACTS} facts",
                         cap="ground_facts", limit=MAX_GROUND_FACTS)
    fact_id = {f: i for i, f in enumerate(facts)}
    names = tuple(Atom(p, args).text() for p, args in facts)
    return _assemble(domain, problem, rules, found, fact_id, names, static)


def _assemble(domain: Domain, problem: Problem, rules: list[_Rule], found: list[set[tuple[str, ...]]],
              fact_id: dict[tuple[str, tuple[str, ...]], int], names: tuple[str, ...],
              static: frozenset[str]) -> GroundTask:
    raw = []
    for rule, bindings in zip(rules, found):
        s = rule.schema
        for b in sorted(bindings):
            sub = dict(zip(s.variables(), b))

            def ids(atoms: tuple[Atom, ...]) -> list[int]:
                out = []
                for a in atoms:
                    key = (a.predicate, tuple(sub.get(t, t) for t in a.args))
                    if key in fact_id:
                        out.append(fact_id[key])
                return out

            pre = ids(tuple(l.atom for l in s.pre if l.positive and l.atom.predicate not in static
                            and l.atom.predicate != EQUALITY))
            neg = ids(tuple(l.atom for l in s.pre if not l.positive and l.atom.predicate not in static
                            and l.atom.predicate != EQUALITY))
            raw.append(("(" + " ".join((s.name, *b)) + ")", pre, neg, ids(s.add), ids(s.delete),
                        _ground_cost(s, b, domain, problem)))
    icosts, scale = scale_costs([r[5] for r in raw])
    actions = tuple(normalise_action(name, pre, neg, add, dele, c)
                    for (name, pre, neg, add, dele, _), c in zip(raw, icosts))
    init = sorted(fact_id[(a.predicate, a.args)] for a in problem.init if (a.predicate, a.args) in fact_id)
    goal, goal_not, reason = [], [], None
    for lit in problem.goal:
        a = lit.atom
        key = (a.predicate, a.args)
        if a.predicate == EQUALITY:
            holds = a.args[0] == a.args[1]
        elif a.predicate in static:
            holds = a in problem.init
        else:
            if key in fact_id:
                (goal if lit.positive else goal_not).append(fact_id[key])
                continue
            holds = False  # never reached: false in every reachable state
        if holds != lit.positive and reason is None:
            if lit.positive and a.predicate not in static and a.predicate != EQUALITY:
                reason = f"goal {a.text()} is unreachable, even ignoring delete effects"
            else:
                reason = f"goal {'' if lit.positive else '(not '}{a.text()}{'' if lit.positive else ')'} can never hold"
    task = prune_unreachable(GroundTask(names, tuple(init), tuple(sorted(set(goal))), tuple(sorted(set(goal_not))),
                                        actions, scale, reason))
    logger.debug("grounded %s: %d facts, %d actions%s", problem.name, len(task.facts), len(task.actions),
                 f"; infeasible: {task.infeasible}" if task.infeasible else "")
    return task
