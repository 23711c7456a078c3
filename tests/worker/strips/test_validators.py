"""The plan validators replay plans on the problem as written and refuse every kind of bad plan."""

from __future__ import annotations

import copy

import pytest

from worker.domains.pddl import EXAMPLE as PDDL_EXAMPLE
from worker.domains.strips import EXAMPLE as JSON_EXAMPLE
from worker.exceptions import PlanValidationError
from worker.request import parse_request
from worker.runner import run


def _plan(example):
    req = parse_request({"problem": example})
    events = list(run(req))
    return req, [e for e in events if e["type"] == "improvement"][-1]


def test_good_plans_replay_to_their_cost():
    for example in (JSON_EXAMPLE, PDDL_EXAMPLE):
        req, best = _plan(example)
        assert req.kind.validate(req.problem, best["plan"]) == pytest.approx(best["cost"])


def _tampered(steps, how):
    steps = copy.deepcopy(steps)
    how(steps)
    return steps


JSON_CASES = {
    "unknown action": (lambda s: s[0].update(action="teleport"), "unknown action"),
    "inapplicable action": (lambda s: s.insert(0, copy.deepcopy(s[1])), "which is false"),
    "wrong step cost": (lambda s: s[0].update(cost=s[0]["cost"] + 1), "claims cost"),
    "wrong listed state": (lambda s: s[0]["state"].append("gears packed"), "state differs"),
    "goal not reached": (lambda s: s.pop(), "without reaching the goal"),
    "missing field": (lambda s: s[0].pop("cost"), "missing cost"),
}


@pytest.mark.parametrize("name", sorted(JSON_CASES))
def test_json_validator_refuses_bad_plans(name):
    req, best = _plan(JSON_EXAMPLE)
    how, words = JSON_CASES[name]
    with pytest.raises(PlanValidationError, match=words):
        req.kind.validate(req.problem, _tampered(best["plan"], how))


def test_json_validator_checks_negative_preconditions():
    req, best = _plan(JSON_EXAMPLE)
    steps = best["plan"]
    packs = [i for i, s in enumerate(steps) if s["action"] == "pack bolts"]
    # Packing bolts twice is refused: "pack bolts" needs "bolts packed" false.
    bad = steps[: packs[0] + 1] + [copy.deepcopy(steps[packs[0]])] + steps[packs[0] + 1:]
    with pytest.raises(PlanValidationError, match="false, but it holds|needs"):
        req.kind.validate(req.problem, bad)


PDDL_CASES = {
    "unknown action": (lambda s: s[0].update(action="(teleport packing)"), "unknown action"),
    "not a call": (lambda s: s[0].update(action="drive packing shelf-a"), "not written as"),
    "wrong arity": (lambda s: s[0].update(action="(drive packing)"), "takes 2 argument"),
    "unknown object": (lambda s: s[0].update(action="(drive packing shelf-z)"), "unknown object"),
    "wrong type": (lambda s: s[1].update(action="(pick bolts packing)"), "is not of type shelf"),
    "precondition false": (lambda s: s.insert(0, copy.deepcopy(s[1])), "needs"),
    "wrong step cost": (lambda s: s[0].update(cost=1.0), "claims cost"),
    "wrong listed state": (lambda s: s[0]["state"].remove("(hand-empty)"), "state differs"),
    "static atom listed": (lambda s: s[0]["state"].append("(aisle packing shelf-a)"), "state differs"),
    "goal not reached": (lambda s: s.pop(), "without reaching the goal"),
}


@pytest.mark.parametrize("name", sorted(PDDL_CASES))
def test_lifted_validator_refuses_bad_plans(name):
    req, best = _plan(PDDL_EXAMPLE)
    assert best["plan"][0]["action"].startswith("(drive packing")
    how, words = PDDL_CASES[name]
    with pytest.raises(PlanValidationError, match=words):
        req.kind.validate(req.problem, _tampered(best["plan"], how))
