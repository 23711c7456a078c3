"""The job request document: strict types, unknown fields refused, the field named in every error."""

from __future__ import annotations

from datetime import datetime, timedelta, timezone

import pytest

from worker.engine import Budget, SearchConfig
from worker.exceptions import ProblemError, RequestError, UnknownDomainError
from worker.request import parse_request

FLOOR = {"domain": "grid", "rows": ["....", ".##.", "...."], "start": [0, 0], "goals": [[2, 3]]}


def test_defaults_fill_search_and_budget():
    req = parse_request({"problem": FLOOR})
    assert req.search == SearchConfig()
    assert req.budget == Budget()
    assert req.queue == "default" and req.retries == 1
    assert req.kind.name == "grid"


@pytest.mark.parametrize("doc, field", [
    ({"problem": FLOOR, "budget": {"expansions": 3.5}}, "budget.expansions"),
    ({"problem": FLOOR, "budget": {"expansions": "10"}}, "budget.expansions"),
    ({"problem": FLOOR, "budget": {"expansions": True}}, "budget.expansions"),
    ({"problem": FLOOR, "budget": {"time_s": "5"}}, "budget.time_s"),
    ({"problem": FLOOR, "budget": {"time_s": -1}}, "budget.time_s"),
    ({"problem": FLOOR, "budget": {"target_bound": 0.5}}, "budget.target_bound"),
    ({"problem": FLOOR, "budget": {"seconds": 5}}, "budget.seconds"),
    ({"problem": FLOOR, "search": {"weight": 0.5}}, "search.weight"),
    ({"problem": FLOOR, "search": {"reopen": "sometimes"}}, "search.reopen"),
    ({"problem": FLOOR, "queue": "urgent"}, "queue"),
    ({"problem": FLOOR, "extra": 1}, "extra"),
    ({"search": {}}, "problem"),
])
def test_bad_documents_name_the_field(doc, field):
    with pytest.raises(RequestError) as err:
        parse_request(doc)
    assert err.value.field == field


def test_problem_errors_are_prefixed_with_problem():
    with pytest.raises(UnknownDomainError) as err:
        parse_request({"problem": {"domain": "teleport"}})
    assert err.value.field == "problem.domain" and "grid" in err.value.message
    with pytest.raises(ProblemError) as err:
        parse_request({"problem": {**FLOOR, "start": [1, 1]}})
    assert err.value.field == "problem.start"
    with pytest.raises(ProblemError) as err:
        parse_request({"problem": {**FLOOR, "colour": "red"}})
    assert err.value.field == "problem.colour"


def test_deadline_folds_into_the_time_budget():
    now = datetime(2026, 12, 2, 8, 0, tzinfo=timezone.utc)
    doc = {"problem": FLOOR, "budget": {"time_s": 60, "deadline": (now + timedelta(seconds=20)).isoformat()}}
    assert parse_request(doc, now=now).budget.time_s == pytest.approx(20.0)
    doc["budget"]["deadline"] = (now + timedelta(seconds=90)).isoformat()
    assert parse_request(doc, now=now).budget.time_s == pytest.approx(60.0)
    doc["budget"]["deadline"] = (now - timedelta(seconds=1)).isoformat()
    with pytest.raises(RequestError) as err:
        parse_request(doc, now=now)
    assert err.value.field == "budget.deadline"


def test_not_an_object_is_refused():
    with pytest.raises(RequestError):
        parse_request([1, 2, 3])
