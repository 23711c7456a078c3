"""The runner: every plan is rendered and replayed by the domain's validator before it is yielded."""

from __future__ import annotations

import dataclasses

import pytest

from worker.exceptions import PlanValidationError
from worker.request import parse_request
from worker.runner import run

FLOOR = {"domain": "grid", "rows": ["......", ".####.", "......", "......"], "start": [0, 0], "goals": [[3, 5]]}


def test_events_carry_validated_plans_and_end_with_finished():
    req = parse_request({"problem": FLOOR, "search": {"weight": 1.0}})
    events = list(run(req))
    assert [e["type"] for e in events][-1] == "finished"
    imps = [e for e in events if e["type"] == "improvement"]
    assert imps and imps[-1]["revision"] == len(imps)
    plan = imps[-1]["plan"]
    assert plan[-1]["state"] == [3, 5]
    assert sum(step["cost"] for step in plan) == pytest.approx(imps[-1]["cost"])
    fin = events[-1]
    assert fin["proven_optimal"] and fin["revision"] == len(imps) and fin["bound"] == 1.0


def test_a_plan_that_fails_the_replay_is_never_yielded():
    req = parse_request({"problem": FLOOR})

    def lying_validator(problem, steps):
        return 999.0  # disagrees with the engine's cost

    bad = dataclasses.replace(req, kind=dataclasses.replace(req.kind, validate=lying_validator))
    events = run(bad)
    with pytest.raises(PlanValidationError):
        for event in events:
            assert event["type"] != "improvement", "no plan may be published before the replay passes"


def test_infeasible_problem_reports_no_bound_and_no_plan():
    walled = {"domain": "grid", "rows": ["..#..", "..#..", "..#.."], "start": [0, 0], "goals": [[0, 4]]}
    events = list(run(parse_request({"problem": walled})))
    assert [e["type"] for e in events] == ["finished"]
    fin = events[0]
    assert fin["proven_infeasible"] and fin["cost"] is None and fin["lower_bound"] is None
