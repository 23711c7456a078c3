"""The sliding-tile plan validator accepts legal plans and rejects each kind of broken step."""

from __future__ import annotations

import copy

import pytest

from worker.domains.tiles import KIND, TilesSchema
from worker.exceptions import PlanValidationError

PROBLEM = TilesSchema().load({"tiles": [1, 2, 0, 3, 4, 5, 6, 7, 8]})
GOOD = [{"action": "left", "cost": 1.0, "state": [1, 0, 2, 3, 4, 5, 6, 7, 8]},
        {"action": "left", "cost": 1.0, "state": [0, 1, 2, 3, 4, 5, 6, 7, 8]}]


def _broken(index, **change):
    steps = copy.deepcopy(GOOD)
    steps[index].update(change)
    return steps


def test_accepts_a_legal_plan():
    assert KIND.validate(PROBLEM, GOOD) == 2.0
    assert KIND.validate(TilesSchema().load({"tiles": list(range(9))}), []) == 0.0


@pytest.mark.parametrize("steps,words", [
    (_broken(0, cost=2.0), "claims cost"),
    (_broken(0, action="right"), "cannot move right"),
    (_broken(0, action="down"), "not the board after the move"),
    (_broken(1, state=[0, 2, 1, 3, 4, 5, 6, 7, 8]), "not the board"),
    (_broken(1, state="0 1 2"), "not the board"),
    (_broken(1, action="west"), "unknown action"),
    (GOOD[:1], "not the goal"),
    ([], "not the goal"),
])
def test_rejects_broken_plans(steps, words):
    with pytest.raises(PlanValidationError, match=words):
        KIND.validate(PROBLEM, steps)
