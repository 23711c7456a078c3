"""GET /v1/domains and the marshmallow-to-JSON-Schema converter behind it."""

from __future__ import annotations

import copy

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from jsonschema import Draft202012Validator
from marshmallow import RAISE, Schema, ValidationError, fields, validate

from service.schemas import json_schema, problem_schema
from worker.domains import kinds


def test_every_domain_is_listed_with_a_valid_schema_its_example_satisfies(client):
    listed = client.get("/v1/domains").get_json()["domains"]
    assert [d["name"] for d in listed] == sorted(kinds())
    for domain in listed:
        # source: JSON Schema 2020-12 meta-schema, through the jsonschema library
        Draft202012Validator.check_schema(domain["problem_schema"])
        if domain["example"] is not None:
            errors = list(Draft202012Validator(domain["problem_schema"]).iter_errors(domain["example"]))
            assert not errors, f"{domain['name']}: {errors[0].message}"
    one = client.get("/v1/domains/grid").get_json()
    assert one["name"] == "grid" and one["problem_schema"]["properties"]["domain"] == {
        "const": "grid", "description": "the domain name"}


class _Shelf(Schema):
    class Meta:
        unknown = RAISE

    bin = fields.String(required=True, validate=validate.Regexp(r"^[A-Z][0-9]{2}$"))
    slots = fields.List(fields.Integer(strict=True), validate=validate.Length(min=1, max=4))


class _Cell(Schema):
    class Meta:
        unknown = RAISE

    name = fields.String(required=True, validate=validate.Length(min=1, max=20),
                         metadata={"description": "the cell's name"})
    speed = fields.Float(load_default=1.5, validate=validate.Range(min=0, min_inclusive=False, max=4))
    mode = fields.String(load_default="pick", validate=validate.OneOf(["pick", "pack"]))
    shelves = fields.List(fields.Nested(_Shelf), required=True)
    layout = fields.Dict(keys=fields.String(), values=fields.Integer(), allow_none=True)
    note = fields.Raw()
    corner = fields.Tuple((fields.Integer(), fields.Integer()))


def test_the_converter_writes_the_json_schema_keywords_of_each_field_and_validator():
    # source: JSON Schema 2020-12 validation vocabulary (type, minimum, exclusiveMinimum, maxLength,
    # enum, pattern, minItems, prefixItems, additionalProperties, default), from memory
    out = json_schema(_Cell)
    assert out["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert out["required"] == ["name", "shelves"] and out["additionalProperties"] is False
    p = out["properties"]
    assert p["name"] == {"type": "string", "minLength": 1, "maxLength": 20, "description": "the cell's name"}
    assert p["speed"] == {"type": "number", "exclusiveMinimum": 0, "maximum": 4, "default": 1.5}
    assert p["mode"] == {"type": "string", "enum": ["pick", "pack"], "default": "pick"}
    shelf = p["shelves"]["items"]
    assert p["shelves"]["type"] == "array" and shelf["additionalProperties"] is False
    assert shelf["properties"]["bin"] == {"type": "string", "pattern": "^[A-Z][0-9]{2}$"}
    assert shelf["properties"]["slots"] == {"type": "array", "items": {"type": "integer"}, "minItems": 1,
                                            "maxItems": 4}
    assert p["layout"] == {"type": ["object", "null"], "additionalProperties": {"type": "integer"},
                           "propertyNames": {"type": "string"}}
    assert p["note"] == {}
    assert p["corner"] == {"type": "array", "prefixItems": [{"type": "integer"}, {"type": "integer"}],
                           "minItems": 2, "maxItems": 2}


_value = st.one_of(st.none(), st.booleans(), st.integers(-5, 50), st.floats(-5, 50, allow_nan=False),
                   st.text(max_size=6), st.lists(st.integers(-1, 30), max_size=3),
                   st.lists(st.lists(st.integers(-1, 30), max_size=3), max_size=2),
                   st.dictionaries(st.text(max_size=3), st.integers(), max_size=2))


@pytest.mark.parametrize("name", sorted(kinds()))
@settings(max_examples=60, deadline=None)
@given(data=st.data())
def test_a_problem_the_json_schema_refuses_is_refused_on_submit_too(name, data):
    """The published schema may be looser than the service (custom fields, cross-field checks), never stricter."""
    kind = kinds()[name]
    if kind.example is None:
        return
    schema = problem_schema(kind)
    problem = copy.deepcopy(dict(kind.example))
    keys = sorted(set(problem) - {"domain"}) + ["unknown_field"]
    key = data.draw(st.sampled_from(keys))
    problem[key] = data.draw(_value)
    if Draft202012Validator(schema).is_valid(problem):
        return
    body = {k: v for k, v in problem.items() if k != "domain"}
    with pytest.raises(ValidationError):
        kind.schema().load(body)
