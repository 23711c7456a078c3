"""The registered problem domains, each with the JSON Schema of its problems and an example."""

from __future__ import annotations

import logging
from functools import lru_cache
from typing import Any

from flask import Blueprint, Response, jsonify

from service.errors import DomainNotFound
from service.schemas import domain_document
from worker.domains import kinds

logger = logging.getLogger(__name__)

bp = Blueprint("domains", __name__, url_prefix="/v1/domains")


@lru_cache(maxsize=1)
def _documents() -> dict[str, dict[str, Any]]:
    # The registry is fixed for the life of a process, so each schema is converted once.
    return {name: domain_document(kind) for name, kind in sorted(kinds().items())}


@bp.get("")
def list_domains() -> Response:
    """List every domain with its summary, problem schema and example."""
    return jsonify({"domains": list(_documents().values())})


@bp.get("/<name>")
def get_domain(name: str) -> Response:
    """Describe one domain."""
    doc = _documents().get(name)
    if doc is None:
        raise DomainNotFound(f"no domain named {name[:64]!r}; known: {', '.join(_documents())}", "name")
    return jsonify(doc)
