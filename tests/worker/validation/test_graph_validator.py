"""The graph plan validator follows links at their cheapest cost and rejects broken steps."""

from __future__ import annotations

import pytest

from worker.domains.graph import KIND, GraphSchema
from worker.exceptions import PlanValidationError


def problem(directed=False):
    return GraphSchema().load({
        "nodes": [{"id": "dock"}, {"id": "aisle"}, {"id": "pack"}], "directed": directed,
        "edges": [{"from": "dock", "to": "aisle", "cost": 5}, {"from": "dock", "to": "aisle", "cost": 3},
                  {"from": "pack", "to": "aisle", "cost": 2}],
        "start": "dock", "goals": ["pack"]})


GOOD = [{"action": "to aisle", "cost": 3.0, "state": "aisle"}, {"action": "to pack", "cost": 2.0, "state": "pack"}]


def test_accepts_the_cheapest_parallel_link_both_ways_when_undirected():
    assert KIND.validate(problem(), GOOD) == 5.0


@pytest.mark.parametrize("steps,words", [
    ([{**GOOD[0], "cost": 5.0}, GOOD[1]], "claims cost"),  # the dearer parallel link is not the move's cost
    ([{"action": "to pack", "cost": 2.0, "state": "pack"}], "no link"),
    ([{"action": "to dock", "cost": 3.0, "state": "aisle"}, GOOD[1]], "does not name"),
    ([{"action": "to aisle", "cost": 3.0, "state": 7}, GOOD[1]], "not a node id"),
    (GOOD[:1], "not a goal"),
    ([], "not a goal"),
])
def test_rejects_broken_plans(steps, words):
    with pytest.raises(PlanValidationError, match=words):
        KIND.validate(problem(), steps)


def test_directed_links_only_work_forwards():
    with pytest.raises(PlanValidationError, match="no link from 'aisle' to 'pack'"):
        KIND.validate(problem(directed=True), GOOD)
