"""The grid plan validator accepts legal plans and rejects each kind of broken step."""

from __future__ import annotations

import copy
import math

import pytest

from worker.domains.grid import KIND, GridSchema
from worker.exceptions import PlanValidationError

R2 = math.sqrt(2.0)


def problem(**extra):
    body = {"rows": ["...", ".#2", "..."], "start": [0, 0], "goals": [[2, 2]]}
    body.update(extra)
    return GridSchema().load(body)


GOOD = [{"action": "S", "cost": 1.0, "state": [1, 0]}, {"action": "S", "cost": 1.0, "state": [2, 0]},
        {"action": "E", "cost": 1.0, "state": [2, 1]}, {"action": "E", "cost": 1.0, "state": [2, 2]}]


def test_accepts_a_legal_plan_and_returns_its_cost():
    assert KIND.validate(problem(), GOOD) == 4.0
    around = [{"action": "E", "cost": 1.0, "state": [0, 1]}, {"action": "E", "cost": 1.0, "state": [0, 2]},
              {"action": "S", "cost": 2.0, "state": [1, 2]}, {"action": "S", "cost": 1.0, "state": [2, 2]}]
    assert KIND.validate(problem(), around) == 5.0
    diagonal = [{"action": "SE", "cost": R2, "state": [1, 1]}]
    assert KIND.validate(problem(rows=["...", "...", "..."], goals=[[1, 1]]), diagonal) == pytest.approx(R2)


def _broken(index, **change):
    steps = copy.deepcopy(GOOD)
    steps[index].update(change)
    return steps


@pytest.mark.parametrize("steps,words", [
    (_broken(0, cost=2.0), "claims cost"),
    (_broken(0, state=[1, 1]), "reaches"),
    (_broken(0, action="NE", state=[-1, 1]), "outside the grid or blocked"),
    (_broken(0, action="X"), "unknown action"),
    (_broken(1, state="2,0"), r"not \[row, col\]"),
    (_broken(1, cost="1"), "not a finite number"),
    (GOOD[:3], "not a goal"),
    ([{"action": "SE", "cost": R2, "state": [1, 1]}], "blocked"),
    ([{"action": "E", "cost": 1.0}], "missing state"),
    (["E"], "must be an object"),
    ([], "not a goal"),
])
def test_rejects_broken_plans(steps, words):
    with pytest.raises(PlanValidationError, match=words):
        KIND.validate(problem(), steps)


def test_rejects_corner_cutting_and_diagonals_with_four_moves():
    cut = [{"action": "E", "cost": 1.0, "state": [0, 1]}, {"action": "SE", "cost": 2 * R2, "state": [1, 2]},
           {"action": "S", "cost": 1.0, "state": [2, 2]}]
    with pytest.raises(PlanValidationError, match="cuts a blocked corner"):
        KIND.validate(problem(), cut)
    assert KIND.validate(problem(corner_cutting=True), cut) == pytest.approx(2 + 2 * R2)
    with pytest.raises(PlanValidationError, match="4 moves"):
        KIND.validate(problem(rows=["...", "...", "..."], goals=[[1, 1]], moves=4),
                      [{"action": "SE", "cost": R2, "state": [1, 1]}])
