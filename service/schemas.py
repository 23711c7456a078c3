"""Shape what the API answers, and describe each domain's problem as JSON Schema.

Two things live here:

- ``json_schema(schema)``: a small converter from a marshmallow schema to JSON
  Schema (draft 2020-12), used by ``GET /v1/domains`` so a client can check a
  problem before sending it. It knows marshmallow's own fields and validators;
  a domain's custom field describes itself with a ``json_schema`` class
  attribute or ``metadata={"json_schema": {...}}`` (otherwise it is left open,
  ``{}``). Schema-level checks (``@validates_schema``) cannot be expressed and
  are only enforced on submit.
- the response documents of a job, a plan, the improvement history and a
  domain, each dumped through a marshmallow schema so every answer has exactly
  the documented fields (``openapi/openapi.yaml`` describes the same shapes).
"""

from __future__ import annotations

import enum
import json
import logging
from typing import Any

from marshmallow import RAISE, Schema, fields, missing, validate

from service.queue import JobRecord
from worker.domains.base import DomainKind
from worker.reaper import attempt_history

logger = logging.getLogger(__name__)

__all__ = [
    "json_schema", "problem_schema", "links", "job_document", "plan_document", "improvements_document",
    "domain_document", "submitted_document",
]

DIALECT = "https://json-schema.org/draft/2020-12/schema"

# First match along the field's class hierarchy wins, so subclasses (a strict
# float, a cell field) inherit their parent's type unless they say otherwise.
_SIMPLE: tuple[tuple[type, dict[str, Any]], ...] = (
    (fields.Boolean, {"type": "boolean"}),
    (fields.Integer, {"type": "integer"}),
    (fields.Number, {"type": "number"}),
    (fields.Email, {"type": "string", "format": "email"}),
    (fields.URL, {"type": "string", "format": "uri"}),
    (fields.UUID, {"type": "string", "format": "uuid"}),
    (fields.DateTime, {"type": "string", "format": "date-time"}),
    (fields.Date, {"type": "string", "format": "date"}),
    (fields.Time, {"type": "string", "format": "time"}),
    (fields.String, {"type": "string"}),
)


def json_schema(schema: Schema | type[Schema]) -> dict[str, Any]:
    """Return the JSON Schema of the objects ``schema`` loads."""
    return {"$schema": DIALECT, **_object(schema, ())}


def problem_schema(kind: DomainKind) -> dict[str, Any]:
    """Return the JSON Schema of a problem of ``kind``, its ``domain`` field included."""
    out = json_schema(kind.schema)
    out["properties"] = {"domain": {"const": kind.name, "description": "the domain name"}, **out["properties"]}
    out["required"] = ["domain", *out.get("required", [])]
    out["title"] = f"{kind.name} problem"
    out["description"] = kind.summary
    return out


def _object(schema: Schema | type[Schema], seen: tuple[type, ...]) -> dict[str, Any]:
    instance = schema() if isinstance(schema, type) else schema
    cls = type(instance)
    if cls in seen:  # a recursive schema: leave the inner level open rather than loop
        return {"type": "object"}
    properties: dict[str, Any] = {}
    required: list[str] = []
    for name, field in instance.load_fields.items():
        key = field.data_key or name
        properties[key] = _field(field, (*seen, cls))
        if field.required:
            required.append(key)
    out: dict[str, Any] = {"type": "object", "properties": properties}
    if required:
        out["required"] = required
    if instance.unknown == RAISE:
        out["additionalProperties"] = False
    return out


def _field(field: fields.Field, seen: tuple[type, ...]) -> dict[str, Any]:
    custom = field.metadata.get("json_schema", getattr(type(field), "json_schema", None))
    if isinstance(custom, dict):
        out = dict(custom)
    elif isinstance(field, fields.Nested):
        inner = _object(field.schema, seen)
        many = field.many or getattr(field.schema, "many", False)
        out = {"type": "array", "items": inner} if many else inner
    elif isinstance(field, fields.List):
        out = {"type": "array", "items": _field(field.inner, seen)}
    elif isinstance(field, fields.Tuple):
        items = [_field(f, seen) for f in field.tuple_fields]
        out = {"type": "array", "prefixItems": items, "minItems": len(items), "maxItems": len(items)}
    elif isinstance(field, fields.Dict):
        out = {"type": "object"}
        if field.value_field is not None:
            out["additionalProperties"] = _field(field.value_field, seen)
        if field.key_field is not None:
            out["propertyNames"] = _field(field.key_field, seen)
    elif isinstance(field, fields.Constant):
        out = {"const": field.constant}
    elif isinstance(field, fields.Enum):
        members = list(field.enum)
        out = {"enum": [m.value for m in members] if field.by_value else [m.name for m in members]}
    else:
        out = next((dict(js) for cls, js in _SIMPLE if isinstance(field, cls)), {})
    for validator in field.validators:
        _apply(out, validator)
    if field.allow_none:
        if "type" in out:
            out["type"] = [out["type"], "null"] if isinstance(out["type"], str) else [*out["type"], "null"]
        if "enum" in out and None not in out["enum"]:
            out["enum"] = [*out["enum"], None]
        if "const" in out:
            out["enum"] = [out.pop("const"), None]
    description = field.metadata.get("description")
    if description:
        out["description"] = description
    default = field.load_default
    if default is not missing and not callable(default):
        try:
            json.dumps(default, allow_nan=False)
            out["default"] = default.value if isinstance(default, enum.Enum) else default
        except (TypeError, ValueError):
            pass  # a default that is no JSON value (a dataclass...) is not shown
    return out


def _apply(out: dict[str, Any], v: Any) -> None:
    kind = out.get("type")
    if isinstance(v, validate.Range):
        if v.min is not None:
            out["minimum" if v.min_inclusive else "exclusiveMinimum"] = v.min
        if v.max is not None:
            out["maximum" if v.max_inclusive else "exclusiveMaximum"] = v.max
    elif isinstance(v, validate.Length):
        lo, hi = ("minLength", "maxLength") if kind == "string" else (
            ("minProperties", "maxProperties") if kind == "object" else ("minItems", "maxItems"))
        if v.equal is not None:
            out[lo] = out[hi] = v.equal
        else:
            if v.min is not None:
                out[lo] = v.min
            if v.max is not None:
                out[hi] = v.max
    elif isinstance(v, validate.OneOf):
        out["enum"] = list(v.choices)
    elif isinstance(v, validate.Equal):
        out["const"] = v.comparable
    elif isinstance(v, validate.Regexp):
        out["pattern"] = v.regex.pattern
    elif isinstance(v, validate.NoneOf):
        out["not"] = {"enum": list(v.iterable)}


# -- response documents ---------------------------------------------------------------------------

def links(job_id: str) -> dict[str, str]:
    """Return the paths of a job's resources (relative, so they hold behind any proxy)."""
    base = f"/v1/jobs/{job_id}"
    return {"self": base, "plan": f"{base}/plan", "improvements": f"{base}/improvements",
            "events": f"{base}/events", "cancel": base}


class _Best(Schema):
    revision = fields.Integer()
    cost = fields.Float()
    lower_bound = fields.Float(allow_none=True)
    bound = fields.Float(allow_none=True)
    found_at_s = fields.Float(allow_none=True)


class _Progress(Schema):
    expansions = fields.Integer()
    generated = fields.Integer()
    stored = fields.Integer()
    elapsed_s = fields.Float()
    lower_bound = fields.Float(allow_none=True)
    cost = fields.Float(allow_none=True)
    bound = fields.Float(allow_none=True)


class JobSchema(Schema):
    """The job status document."""

    id = fields.String()
    status = fields.String()
    domain = fields.String()
    queue = fields.String()
    best = fields.Nested(_Best, allow_none=True)
    progress = fields.Nested(_Progress)
    budget = fields.Dict()
    used = fields.Dict()
    queued_s = fields.Float(allow_none=True)
    stop_reason = fields.String(allow_none=True)
    proven_optimal = fields.Boolean()
    proven_infeasible = fields.Boolean()
    attempts = fields.List(fields.Dict())
    error = fields.Dict(allow_none=True)
    created_at = fields.String()
    started_at = fields.String(allow_none=True)
    finished_at = fields.String(allow_none=True)
    links = fields.Dict()


_JOB = JobSchema()
_REQUESTED = ("time_s", "deadline", "expansions", "max_states", "target_bound")


def job_document(record: JobRecord) -> dict[str, Any]:
    """Return the status document of a job."""
    p = record.progress
    progress = {"expansions": p.get("expansions") or 0, "generated": p.get("generated") or 0,
                "stored": p.get("stored") or 0, "elapsed_s": p.get("elapsed_s") or 0.0,
                "lower_bound": p.get("lower_bound")}
    if p.get("cost") is not None:
        progress["cost"] = p["cost"]
        progress["bound"] = p.get("bound")
    return _JOB.dump({
        "id": record.id,
        "status": record.status.value,
        "domain": record.domain,
        "queue": record.queue,
        "best": record.best,
        "progress": progress,
        "budget": {"requested": {k: record.budget_requested.get(k) for k in _REQUESTED},
                   "effective": {k: record.budget.get(k) for k in _REQUESTED}},
        "used": {"time_s": progress["elapsed_s"], "expansions": progress["expansions"],
                 "max_states": progress["stored"]},
        "queued_s": record.queued_s,
        "stop_reason": record.stop_reason,
        "proven_optimal": record.proven_optimal,
        "proven_infeasible": record.proven_infeasible,
        "attempts": attempt_history(record.attempt_log, record.attempts, record.status.value, record.started_at,
                                    record.finished_at, record.revision, record.best),
        "error": record.error,
        "created_at": record.created_at,
        "started_at": record.started_at,
        "finished_at": record.finished_at,
        "links": links(record.id),
    })


def submitted_document(record: JobRecord) -> dict[str, Any]:
    """Return the answer to a submit: the id, the status and the links."""
    return {"id": record.id, "status": record.status.value, "links": links(record.id)}


class PlanSchema(Schema):
    """A plan of one revision: steps, cost, bounds and the work done when it was found."""

    id = fields.String()
    revision = fields.Integer()
    cost = fields.Float()
    lower_bound = fields.Float(allow_none=True)
    bound = fields.Float(allow_none=True)
    weight = fields.Float(allow_none=True)
    expansions = fields.Integer()
    elapsed_s = fields.Float()
    final = fields.Boolean()
    steps = fields.List(fields.Dict())


def plan_document(record: JobRecord, plan: dict[str, Any]) -> dict[str, Any]:
    """Return a stored plan with the job id and whether it is the last word (the job is final)."""
    is_last = record.final and plan.get("revision") == record.revision
    return PlanSchema().dump({**plan, "id": record.id, "final": is_last})


class _Improvement(Schema):
    revision = fields.Integer()
    cost = fields.Float()
    lower_bound = fields.Float(allow_none=True)
    bound = fields.Float(allow_none=True)
    weight = fields.Float(allow_none=True)
    expansions = fields.Integer()
    elapsed_s = fields.Float()


class ImprovementsSchema(Schema):
    """The history of a job's plans, oldest first."""

    id = fields.String()
    status = fields.String()
    improvements = fields.List(fields.Nested(_Improvement))


def improvements_document(record: JobRecord, history: list[dict[str, Any]]) -> dict[str, Any]:
    """Return a job's improvement history."""
    return ImprovementsSchema().dump({"id": record.id, "status": record.status.value, "improvements": history})


class DomainSchema(Schema):
    """A registered domain: its name, summary, problem JSON Schema and an example problem."""

    name = fields.String()
    summary = fields.String()
    problem_schema = fields.Dict()
    example = fields.Dict(allow_none=True)


def domain_document(kind: DomainKind) -> dict[str, Any]:
    """Return the description of one domain."""
    example = dict(kind.example) if kind.example is not None else None
    return DomainSchema().dump({"name": kind.name, "summary": kind.summary, "problem_schema": problem_schema(kind),
                                "example": example})
