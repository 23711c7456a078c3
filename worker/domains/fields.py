"""Strict marshmallow fields and the strict schema base shared by the built-in domains.

They live here rather than in ``worker.request`` because that module imports
the domain registry; a domain importing it back would make a cycle.
"""

from __future__ import annotations

import math
from typing import Any

from marshmallow import RAISE, Schema, ValidationError, fields

__all__ = ["StrictSchema", "StrictFloat", "StrictInt", "StrictBool", "CellField"]


class StrictSchema(Schema):
    """A schema that refuses unknown fields."""

    class Meta:
        unknown = RAISE


class StrictFloat(fields.Float):
    """Accept JSON numbers only: no strings, no booleans, no NaN or infinity."""

    def _deserialize(self, value: Any, attr: Any, data: Any, **kwargs: Any) -> float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ValidationError("must be a number")
        if not math.isfinite(value):
            raise ValidationError("must be a finite number")
        return float(value)


def StrictInt(**kwargs: Any) -> fields.Integer:
    """Return an integer field that refuses 3.5, "3" and true."""
    return fields.Integer(strict=True, **kwargs)


class StrictBool(fields.Boolean):
    """Accept JSON true/false only, not "yes", 1 or "on"."""

    def _deserialize(self, value: Any, attr: Any, data: Any, **kwargs: Any) -> bool:
        if not isinstance(value, bool):
            raise ValidationError("must be true or false")
        return value


class CellField(fields.Field):
    """A grid cell written ``[row, col]``: two non-negative integers, loaded as a tuple."""

    def _deserialize(self, value: Any, attr: Any, data: Any, **kwargs: Any) -> tuple[int, int]:
        if not isinstance(value, (list, tuple)) or len(value) != 2:
            raise ValidationError("must be [row, col]")
        for v in value:
            if isinstance(v, bool) or not isinstance(v, int):
                raise ValidationError("must be [row, col] with integer row and col")
            if v < 0:
                raise ValidationError("row and col must not be negative")
        return (value[0], value[1])
