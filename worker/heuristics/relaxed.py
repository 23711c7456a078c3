"""Compile a ground task into the flat, integer-indexed form the relaxation heuristics share.

The delete relaxation ignores delete effects and negative conditions, which
can only make a task easier, so every estimate computed on it from exact
relaxed costs is a lower bound of the real cost (h_max, LM-cut) or a usable
estimate (h_add, h_FF).

Two artificial facts make every heuristic loop uniform:

- ``TRUE`` (id ``n``) holds in every state; an action without preconditions
  gets it as its one precondition, so "all preconditions reached" is a
  counter hitting zero for every action.
- ``GOAL`` (id ``n + 1``) is added by an artificial zero-cost goal action
  (the last action id) whose preconditions are the goal facts. The value of
  ``GOAL`` is the estimate.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace

from worker.heuristics.task import GroundAction, GroundTask

__all__ = ["RelaxedTask", "prune_unreachable", "state_facts"]


@dataclass(frozen=True, slots=True)
class RelaxedTask:
    """Flat lists indexed by fact id or action id (the goal action is the last one)."""

    n_facts: int  # real facts + TRUE + GOAL
    true_fact: int
    goal_fact: int
    goal_action: int
    pre: list[list[int]]
    add: list[list[int]]
    cost: list[int]
    npre: list[int]
    pre_of: list[list[int]]  # fact -> actions that need it
    achievers: list[list[int]]  # fact -> actions that add it

    @classmethod
    def from_task(cls, task: GroundTask) -> "RelaxedTask":
        """Build the relaxed form of ``task`` (negative conditions and deletes dropped)."""
        n = len(task.facts)
        true_fact, goal_fact = n, n + 1
        pre: list[list[int]] = []
        add: list[list[int]] = []
        cost: list[int] = []
        for a in task.actions:
            pre.append(list(a.pre) or [true_fact])
            add.append(list(a.add))
            cost.append(a.icost)
        pre.append(list(task.goal) or [true_fact])
        add.append([goal_fact])
        cost.append(0)
        n_facts = n + 2
        pre_of: list[list[int]] = [[] for _ in range(n_facts)]
        achievers: list[list[int]] = [[] for _ in range(n_facts)]
        for i, (p, e) in enumerate(zip(pre, add)):
            for f in p:
                pre_of[f].append(i)
            for f in e:
                achievers[f].append(i)
        return cls(
            n_facts=n_facts,
            true_fact=true_fact,
            goal_fact=goal_fact,
            goal_action=len(pre) - 1,
            pre=pre,
            add=add,
            cost=cost,
            npre=[len(p) for p in pre],
            pre_of=pre_of,
            achievers=achievers,
        )


def prune_unreachable(task: GroundTask) -> GroundTask:
    """Drop unreachable and no-op actions; note a goal proven unreachable.

    A fact outside the relaxed closure of the initial state is false in every
    reachable state, so an action needing one never applies; an action that
    deletes nothing and adds only its own preconditions changes no state. A goal fact
    outside the closure, or a negated goal fact that holds initially and that
    no reachable action deletes, makes the task infeasible: that is recorded in
    ``infeasible`` rather than raised, because it is a proven answer.
    """
    reached = bytearray(len(task.facts))
    for f in task.init:
        reached[f] = 1
    pending = list(task.actions)
    kept: list[GroundAction] = []
    changed = True
    while changed:
        changed = False
        rest = []
        for a in pending:
            if not a.delete and set(a.add) <= set(a.pre):
                continue  # changes no state it applies in (e.g. a move from a place to itself)
            if all(reached[f] for f in a.pre):
                kept.append(a)
                for f in a.add:
                    if not reached[f]:
                        reached[f] = 1
                        changed = True
            else:
                rest.append(a)
        pending = rest
    order = {id(a): i for i, a in enumerate(task.actions)}
    kept.sort(key=lambda a: order[id(a)])
    reason = task.infeasible
    if reason is None:
        for f in task.goal:
            if not reached[f]:
                reason = f"goal fact {task.facts[f]} is unreachable, even ignoring delete effects"
                break
    if reason is None:
        deleted = {f for a in kept for f in a.delete}
        init = set(task.init)
        for f in task.goal_not:
            if f in init and f not in deleted:
                reason = f"goal requires {task.facts[f]} to be false, but it holds and no action deletes it"
                break
    return replace(task, actions=tuple(kept), infeasible=reason)


def state_facts(state: int) -> list[int]:
    """Return the ids of the set bits of a bitset state, in increasing order."""
    out = []
    append = out.append
    while state:
        low = state & -state
        append(low.bit_length() - 1)
        state ^= low
    return out


class RelaxedEstimate:
    """Base of the delete-relaxation estimates: holds the task, answers on a bitset state.

    A subclass gives ``name`` and ``of_facts(facts)``; calling the estimate on a
    bitset state applies ``of_facts`` to its true facts.
    """

    name = "relaxed"

    def __init__(self, task: GroundTask, relaxed: RelaxedTask | None = None) -> None:
        self.task = task
        self.relaxed = relaxed or RelaxedTask.from_task(task)

    def __call__(self, state: int) -> float:
        """Return the estimate of ``state`` in real cost units (``inf`` when the goal is unreachable)."""
        return self.of_facts(state_facts(state))

    def of_facts(self, facts: Sequence[int]) -> float:
        """Return the estimate of the state whose true facts are ``facts``."""
        raise NotImplementedError

