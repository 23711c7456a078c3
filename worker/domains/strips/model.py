"""Load a JSON action model (facts, initial facts, goal, actions) and compile it to a ground task.

Problem fields::

    {"domain": "strips",
     "facts":   ["robot at shelf", "robot at packing", "bolts on shelf", ...],
     "init":    ["robot at shelf", "bolts on shelf"],
     "goal":    ["bolts packed"],
     "goal_not": [],                                  # facts that must be false at the end
     "actions": [{"name": "drive shelf to packing",
                  "pre": ["robot at shelf"], "pre_not": [],
                  "add": ["robot at packing"], "delete": ["robot at shelf"],
                  "cost": 2.5}, ...],                 # cost >= 0, default 1
     "heuristic": "lmcut",                            # lmcut | hmax | blind
     "guidance":  "hff"}                              # hff | none

Fact names are any non-empty strings; every fact an action, ``init`` or the
goal mentions must be listed in ``facts``. An action applies when all ``pre``
facts hold and no ``pre_not`` fact does; it makes ``delete`` false, then
``add`` true (a fact in both stays true). Errors name the field, e.g.
``actions.3.pre.1: unknown fact 'x'``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from marshmallow import ValidationError, fields, post_load, validate

from worker.domains.fields import StrictFloat, StrictSchema
from worker.domains.strips.space import DEFAULT_GUIDANCE, DEFAULT_HEURISTIC
from worker.heuristics import ADMISSIBLE, GUIDANCE
from worker.heuristics.relaxed import prune_unreachable
from worker.heuristics.task import GroundTask, exact_cost, normalise_action, scale_costs

__all__ = ["ActionSpec", "StripsProblem", "StripsSchema", "compile_task", "MAX_FACTS", "MAX_ACTIONS"]

MAX_FACTS = 1 << 16
MAX_ACTIONS = 1 << 18
_LISTS = ("pre", "pre_not", "add", "delete")


@dataclass(frozen=True, slots=True)
class ActionSpec:
    """One action as written in the problem."""

    name: str
    pre: tuple[str, ...]
    pre_not: tuple[str, ...]
    add: tuple[str, ...]
    delete: tuple[str, ...]
    cost: float


@dataclass(frozen=True, slots=True)
class StripsProblem:
    """A loaded, checked JSON action model."""

    facts: tuple[str, ...]
    init: tuple[str, ...]
    goal: tuple[str, ...]
    goal_not: tuple[str, ...]
    actions: tuple[ActionSpec, ...]
    heuristic: str = DEFAULT_HEURISTIC
    guidance: str = DEFAULT_GUIDANCE


def _facts(**kw: Any) -> fields.List:
    return fields.List(fields.String(), **kw)


class ActionSchema(StrictSchema):
    """Load one action record."""

    name = fields.String(required=True)
    pre = _facts(load_default=list)
    pre_not = _facts(load_default=list)
    add = _facts(load_default=list)
    delete = _facts(load_default=list)
    cost = StrictFloat(load_default=1.0, validate=validate.Range(min=0.0, error="must be at least 0"))


def _error(path: Sequence[str | int], message: str) -> ValidationError:
    """Return a ValidationError nested along ``path`` so the registry reports the dotted field."""
    msg: Any = [message]
    for key in reversed(path):
        msg = {key: msg}
    return ValidationError(msg)


class StripsSchema(StrictSchema):
    """Load and check a JSON action model into a ``StripsProblem``."""

    facts = _facts(required=True, validate=validate.Length(min=1, max=MAX_FACTS))
    init = _facts(required=True)
    goal = _facts(required=True)
    goal_not = _facts(load_default=list)
    actions = fields.List(fields.Nested(ActionSchema), required=True,
                          validate=validate.Length(max=MAX_ACTIONS))
    heuristic = fields.String(load_default=DEFAULT_HEURISTIC, validate=validate.OneOf(ADMISSIBLE))
    guidance = fields.String(load_default=DEFAULT_GUIDANCE, validate=validate.OneOf(GUIDANCE))

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> StripsProblem:
        known: dict[str, int] = {}
        for i, f in enumerate(data["facts"]):
            if not f.strip():
                raise _error(("facts", i), "a fact name must not be empty")
            if f in known:
                raise _error(("facts", i), f"duplicate fact {f!r} (also facts.{known[f]})")
            known[f] = i
        for key in ("init", "goal", "goal_not"):
            for j, f in enumerate(data[key]):
                if f not in known:
                    raise _error((key, j), f"unknown fact {f!r}")
        clash = set(data["goal"]) & set(data["goal_not"])
        if clash:
            f = sorted(clash)[0]
            raise _error(("goal_not", data["goal_not"].index(f)), f"fact {f!r} is also in goal")
        names: dict[str, int] = {}
        actions = []
        for i, a in enumerate(data["actions"]):
            name = a["name"]
            if not name.strip():
                raise _error(("actions", i, "name"), "must not be empty")
            if name in names:
                raise _error(("actions", i, "name"), f"duplicate action name {name!r} (also actions.{names[name]})")
            names[name] = i
            for key in _LISTS:
                for j, f in enumerate(a[key]):
                    if f not in known:
                        raise _error(("actions", i, key, j), f"unknown fact {f!r}")
            both = set(a["pre"]) & set(a["pre_not"])
            if both:
                f = sorted(both)[0]
                raise _error(("actions", i, "pre_not", a["pre_not"].index(f)),
                             f"fact {f!r} is also in pre, so the action could never apply")
            actions.append(ActionSpec(name, *(tuple(a[k]) for k in _LISTS), a["cost"]))
        return StripsProblem(
            facts=tuple(data["facts"]),
            init=tuple(data["init"]),
            goal=tuple(data["goal"]),
            goal_not=tuple(data["goal_not"]),
            actions=tuple(actions),
            heuristic=data["heuristic"],
            guidance=data["guidance"],
        )


def compile_task(problem: StripsProblem) -> GroundTask:
    """Return the ground task of a loaded problem, with relaxed-unreachable actions dropped."""
    index = {f: i for i, f in enumerate(problem.facts)}
    icosts, scale = scale_costs([exact_cost(a.cost) for a in problem.actions])
    actions = tuple(
        normalise_action(a.name, (index[f] for f in a.pre), (index[f] for f in a.pre_not),
                         (index[f] for f in a.add), (index[f] for f in a.delete), c)
        for a, c in zip(problem.actions, icosts)
    )
    task = GroundTask(
        facts=problem.facts,
        init=tuple(sorted({index[f] for f in problem.init})),
        goal=tuple(sorted({index[f] for f in problem.goal})),
        goal_not=tuple(sorted({index[f] for f in problem.goal_not})),
        actions=actions,
        scale=scale,
    )
    return prune_unreachable(task)
