"""Keep the architecture's one-way dependencies: walk every module's imports."""

from __future__ import annotations

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    names: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module)
    return names


def _modules(folder: str) -> list[Path]:
    return sorted((ROOT / folder).rglob("*.py"))


def _offenders(folder: str, forbidden: tuple[str, ...]) -> list[str]:
    bad = []
    for path in _modules(folder):
        for name in _imports(path):
            if any(name == f or name.startswith(f + ".") for f in forbidden):
                bad.append(f"{path.relative_to(ROOT)} imports {name}")
    return bad


def test_worker_never_imports_service():  # common practice: layered imports
    assert _modules("worker"), "the worker package has modules"
    assert _offenders("worker", ("service",)) == []


def test_engine_imports_no_domain_redis_or_web_code():  # common practice: an I/O-free core
    forbidden = ("service", "worker.domains", "worker.validation", "worker.jobs", "worker.publish",
                 "worker.runner", "worker.request", "redis", "rq", "flask", "marshmallow")
    assert _modules("worker/engine")
    assert _offenders("worker/engine", forbidden) == []


def test_domains_do_not_reach_into_the_engine():  # common practice: domains behind a protocol
    forbidden = ("service", "worker.engine", "redis", "rq", "flask")
    assert _modules("worker/domains")
    assert _offenders("worker/domains", forbidden) == []


def test_top_level_layout_is_the_documented_one():
    allowed = {"pyproject.toml", "README.md", "DEVELOPERS.md", "service", "worker", "tests", "deploy",
               "openapi"}
    tracked = {p.name for p in ROOT.iterdir() if not p.name.startswith(".") and p.name not in
               {"build", "dist", "__pycache__"} and not p.name.endswith(".egg-info")}
    assert tracked <= allowed, f"unexpected top-level entries: {sorted(tracked - allowed)}"
