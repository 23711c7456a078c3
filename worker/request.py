"""The job request document: one JSON document for HTTP submits, `boundwise solve` and the docs.

::

    {
      "problem": {"domain": "grid", ...domain fields...},
      "search":  {"weight": 2.0, "schedule": "decreasing", "reopen": "reopen", "bound_share": 0.1},
      "budget":  {"time_s": 5, "expansions": 1000000, "max_states": 2000000,
                  "target_bound": 1.0, "deadline": "2026-12-02T10:00:00Z"},
      "queue":   "default",
      "retries": 1
    }

``parse_request`` validates the whole document (strict types, unknown fields
rejected, the domain's own checks) and returns a ``JobRequest`` whose
``space`` is ready to search. Errors are ``RequestError`` with a dotted field
path (``budget.expansions``, ``problem.start``).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import Any

from marshmallow import ValidationError, fields, post_load, validate

from worker.domains import first_error, load_problem
from worker.domains.base import DomainKind, SearchSpace
from worker.domains.fields import StrictFloat, StrictInt, StrictSchema
from worker.engine import Budget, SearchConfig
from worker.exceptions import RequestError

__all__ = ["JobRequest", "parse_request", "SearchSchema", "BudgetSchema", "JobRequestSchema"]


class SearchSchema(StrictSchema):
    weight = StrictFloat(load_default=2.0, validate=validate.Range(min=1.0, max=1000.0))
    schedule = fields.String(load_default="decreasing", validate=validate.OneOf(["fixed", "decreasing"]))
    weight_step = StrictFloat(load_default=0.5, validate=validate.Range(min=0.0, min_inclusive=False))
    reopen = fields.String(load_default="reopen", validate=validate.OneOf(["reopen", "defer"]))
    bound_share = StrictFloat(load_default=0.1, validate=validate.Range(min=0.0, max=0.9))

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> SearchConfig:
        return SearchConfig(**data)


class BudgetSchema(StrictSchema):
    time_s = StrictFloat(load_default=None, validate=validate.Range(min=0.0, min_inclusive=False))
    deadline = fields.AwareDateTime(load_default=None, default_timezone=timezone.utc)
    expansions = StrictInt(load_default=None, validate=validate.Range(min=1))
    max_states = StrictInt(load_default=None, validate=validate.Range(min=1))
    target_bound = StrictFloat(load_default=None, validate=validate.Range(min=1.0))


class JobRequestSchema(StrictSchema):
    problem = fields.Raw(required=True)
    search = fields.Nested(SearchSchema, load_default=lambda: SearchConfig())
    budget = fields.Nested(BudgetSchema, load_default=lambda: BudgetSchema().load({}))
    queue = fields.String(load_default="default", validate=validate.OneOf(["high", "default"]))
    retries = StrictInt(load_default=1, validate=validate.Range(min=0, max=10))


@dataclass(frozen=True, slots=True)
class JobRequest:
    """A validated job request: the problem's kind, its loaded form and searchable space."""

    document: Mapping[str, Any]
    kind: DomainKind
    problem: Any
    space: SearchSpace
    search: SearchConfig
    budget: Budget
    deadline: datetime | None
    queue: str
    retries: int


def parse_request(document: Any, now: datetime | None = None) -> JobRequest:
    """Validate a job request document and build its search space.

    ``deadline`` is folded into ``budget.time_s`` against ``now`` (the earlier
    of the two wins); a deadline already past is refused.
    """
    if not isinstance(document, Mapping):
        raise RequestError("", "the job request must be a JSON object")
    try:
        data = JobRequestSchema().load(document)
    except ValidationError as err:
        field, message = first_error(err.messages)
        raise RequestError(field, message) from None
    try:
        kind, problem = load_problem(data["problem"])
        space = kind.build(problem)
    except RequestError as err:
        raise err.prefixed("problem") from None
    b = data["budget"]
    time_s = b["time_s"]
    deadline = b["deadline"]
    if deadline is not None:
        left = (deadline - (now or datetime.now(timezone.utc))).total_seconds()
        if left <= 0:
            raise RequestError("budget.deadline", "the deadline has already passed")
        time_s = left if time_s is None else min(time_s, left)
    budget = Budget(
        time_s=time_s,
        expansions=b["expansions"],
        max_states=b["max_states"],
        target_bound=b["target_bound"],
    )
    return JobRequest(
        document=document,
        kind=kind,
        problem=problem,
        space=space,
        search=data["search"],
        budget=budget,
        deadline=deadline,
        queue=data["queue"],
        retries=data["retries"],
    )
