"""The HTTP resources, one blueprint each: jobs, domains, health."""

from __future__ import annotations

from service.views.domains import bp as domains
from service.views.health import bp as health
from service.views.jobs import bp as jobs

# Registered in this order by ``service.app.create_app``.
BLUEPRINTS = (health, domains, jobs)

__all__ = ["BLUEPRINTS"]
