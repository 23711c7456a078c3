"""The domain registry: built-in domains plus any a deployment adds by entry point.

A deployment adds a domain without forking by declaring, in its own package::

    [project.entry-points."boundwise.domains"]
    crane = "my_site.crane:KIND"

where ``KIND`` is a ``worker.domains.base.DomainKind``.
"""

from __future__ import annotations

import importlib
import logging
from collections.abc import Mapping
from functools import lru_cache
from importlib.metadata import entry_points
from typing import Any

from marshmallow import ValidationError

from worker.domains.base import DomainKind, SearchSpace
from worker.exceptions import ProblemError, UnknownDomainError

__all__ = ["DomainKind", "SearchSpace", "get", "kinds", "load_problem", "ENTRY_POINT_GROUP"]

logger = logging.getLogger(__name__)

ENTRY_POINT_GROUP = "boundwise.domains"

# Built-ins are listed here too, so a source checkout that was never installed
# still has them; modules that are not there yet are skipped.
_BUILTINS = {
    "grid": "worker.domains.grid",
    "sliding-tile": "worker.domains.tiles",
    "graph": "worker.domains.graph",
    "sequencing": "worker.domains.sequencing",
    "strips": "worker.domains.strips",
    "pddl": "worker.domains.pddl",
}


def _load_builtin(modname: str) -> DomainKind | None:
    try:
        module = importlib.import_module(modname)
    except ModuleNotFoundError as err:
        if err.name != modname:
            raise
        return None
    kind = getattr(module, "KIND", None)
    return kind if isinstance(kind, DomainKind) else None


@lru_cache(maxsize=1)
def kinds() -> dict[str, DomainKind]:
    """Return every registered domain kind by name (built-ins first, then entry points)."""
    found: dict[str, DomainKind] = {}
    for modname in _BUILTINS.values():
        kind = _load_builtin(modname)
        if kind is not None:
            found[kind.name] = kind
    for ep in entry_points(group=ENTRY_POINT_GROUP):
        if ep.name in found or ep.module in _BUILTINS.values():
            continue
        try:
            kind = ep.load()
        except Exception:  # a broken plug-in must not take the built-ins down
            logger.exception("domain entry point %s failed to load", ep.name)
            continue
        if isinstance(kind, DomainKind):
            found[kind.name] = kind
        else:
            logger.error("domain entry point %s is not a DomainKind", ep.name)
    return found


def get(name: str) -> DomainKind:
    """Return the domain kind called ``name`` or raise UnknownDomainError.

    A built-in is imported alone, so a process that solves one kind of
    problem does not load the others.
    """
    if name in _BUILTINS and kinds.cache_info().currsize == 0:
        kind = _load_builtin(_BUILTINS[name])
        if kind is not None and kind.name == name:
            return kind
    try:
        return kinds()[name]
    except KeyError:
        known = ", ".join(sorted(kinds()))
        raise UnknownDomainError("domain", f"unknown domain {name!r}; known: {known}") from None


def load_problem(raw: Any) -> tuple[DomainKind, Any]:
    """Validate a raw ``problem`` object; return its kind and the loaded problem.

    Raises a ``RequestError`` whose field is relative to the problem object
    (``domain``, ``start``, ``rows.3``...).
    """
    if not isinstance(raw, Mapping):
        raise ProblemError("", "must be an object")
    name = raw.get("domain")
    if not isinstance(name, str):
        raise ProblemError("domain", "required: a domain name (string)")
    kind = get(name)
    body = {k: v for k, v in raw.items() if k != "domain"}
    try:
        problem = kind.schema().load(body)
    except ValidationError as err:
        field, message = first_error(err.messages)
        raise ProblemError(field, message) from None
    return kind, problem


def first_error(messages: Any, prefix: str = "") -> tuple[str, str]:
    """Flatten marshmallow's nested error dict to one ``(dotted.field, message)``."""
    if isinstance(messages, Mapping):
        for key in sorted(messages, key=str):
            sub = f"{prefix}.{key}" if prefix else str(key)
            if key == "_schema":
                sub = prefix
            return first_error(messages[key], sub)
    if isinstance(messages, list) and messages:
        if all(isinstance(m, str) for m in messages):
            return prefix, "; ".join(messages)
        return first_error(messages[0], prefix)
    return prefix, str(messages)
