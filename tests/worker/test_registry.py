"""The domain registry: built-ins, plug-ins by entry point, and loading only what is asked for."""

from __future__ import annotations

import subprocess
import sys
from importlib.metadata import EntryPoint

import pytest

import worker.domains as registry
from worker.domains.base import DomainKind
from worker.exceptions import UnknownDomainError


def test_builtins_are_registered():
    assert {"grid", "sliding-tile", "graph", "sequencing", "strips", "pddl"} <= set(registry.kinds())


def test_asking_for_one_domain_loads_only_that_one():
    code = ("import sys; from worker.domains import get; get('grid'); "
            "print(sorted(m for m in sys.modules if m.startswith('worker.domains.')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert "worker.domains.grid" in out and "worker.domains.pddl" not in out and "strips" not in out


def test_a_plug_in_domain_arrives_through_the_entry_point_group(monkeypatch):
    grid = registry.get("grid")
    crane = DomainKind(name="crane", summary="an invented plug-in", schema=grid.schema, build=grid.build,
                       validate=grid.validate)
    module = type(sys)("site_plugins_crane")
    module.KIND = crane
    monkeypatch.setitem(sys.modules, "site_plugins_crane", module)
    ep = EntryPoint(name="crane", value="site_plugins_crane:KIND", group=registry.ENTRY_POINT_GROUP)
    monkeypatch.setattr(registry, "entry_points", lambda group: [ep] if group == registry.ENTRY_POINT_GROUP else [])
    registry.kinds.cache_clear()
    try:
        assert registry.get("crane") is crane
    finally:
        registry.kinds.cache_clear()


def test_unknown_domain_names_the_known_ones():
    with pytest.raises(UnknownDomainError) as err:
        registry.get("teleport")
    assert err.value.field == "domain" and "grid" in err.value.message
