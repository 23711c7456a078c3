"""Backend choice: the COMPILED flag, the pure-Python switch, and when a kernel declines a space."""

from __future__ import annotations

import json
import logging
import os
import subprocess
import sys
from pathlib import Path

import pytest

from tests.worker.engine.toy import ToySpace
from worker.domains.grid import KIND as GRID, GridSchema, GridSpace
from worker.domains.tiles import KIND as TILES
from worker.engine import SearchConfig, solve
from worker.engine import kernels
from worker.exceptions import SearchError

ROOT = Path(__file__).resolve().parents[3]


def _run(code: str, **env: str) -> str:
    full = {k: v for k, v in os.environ.items() if not k.startswith("BOUNDWISE_")}
    full.update(env)
    done = subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=full, capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0, done.stderr
    return done.stdout.strip()


def test_backend_flag_is_consistent():
    assert kernels.BACKEND == ("compiled" if kernels.COMPILED else "python")
    assert (kernels.IMPORT_ERROR is None) == kernels.COMPILED
    if os.environ.get("BOUNDWISE_REQUIRE_COMPILED") == "1":
        assert kernels.COMPILED, f"the compiled kernels must be built here: {kernels.IMPORT_ERROR}"


def test_pure_python_switch_forces_the_python_core():
    code = ("from worker.engine import kernels, solve, SearchConfig\n"
            "from worker.request import parse_request\n"
            "from worker.domains.grid import KIND\n"
            "req = parse_request({'problem': dict(KIND.example), 'budget': {}})\n"
            "_, fin = solve(req.space, SearchConfig())\n"
            "print(kernels.COMPILED, kernels.BACKEND, fin.backend)")
    assert _run(code, BOUNDWISE_PURE_PYTHON="1") == "False python python"


@pytest.mark.parametrize("kind", [GRID, TILES])
def test_solve_command_reports_the_backend(compiled, tmp_path, kind):
    request = tmp_path / "request.json"
    request.write_text(json.dumps({"problem": dict(kind.example), "search": {"weight": 2.0}, "budget": {}}))
    code = f"import sys; from service.cli import main; sys.exit(main(['solve', {str(request)!r}, '--json']))"
    native = json.loads(_run(code).splitlines()[-1])
    python = json.loads(_run(code, BOUNDWISE_PURE_PYTHON="1").splitlines()[-1])
    assert native["backend"] == "compiled" and python["backend"] == "python"
    assert native["proven_optimal"] and python["proven_optimal"]
    for key in ("cost", "lower_bound", "expansions", "generated", "stored", "plan", "improvements"):
        if key == "improvements":
            strip = [{k: v for k, v in imp.items() if k != "elapsed_s"} for imp in native[key]]
            assert strip == [{k: v for k, v in imp.items() if k != "elapsed_s"} for imp in python[key]]
        else:
            assert native[key] == python[key], key


def test_spaces_without_a_kernel_spec_or_with_guidance_are_declined(compiled):
    toy = ToySpace(3, [(0, 1, 1.0), (1, 2, 1.0)], 0, [2])
    assert compiled.make_core(toy, SearchConfig()) is None
    _, fin = solve(toy, SearchConfig())
    assert fin.backend == "python" and fin.cost == 2.0

    guided = GridSpace(GridSchema().load({"rows": ["...."], "start": [0, 0], "goals": [[0, 3]]}))
    guided.guidance = lambda s: 0.0
    assert compiled.make_core(guided, SearchConfig()) is None

    odd = GridSpace(GridSchema().load({"rows": ["...."], "start": [0, 0], "goals": [[0, 3]]}))
    odd.kernel_spec = lambda: {"kind": "hexagons"}
    assert compiled.make_core(odd, SearchConfig()) is None


def test_a_weight_below_one_is_refused_by_either_backend(compiled):
    space = GridSpace(GridSchema().load({"rows": ["...."], "start": [0, 0], "goals": [[0, 3]]}))
    assert compiled.make_core(space, SearchConfig(weight=0.5)) is None
    with pytest.raises(SearchError):
        solve(space, SearchConfig(weight=0.5))


def test_a_space_that_disagrees_with_its_spec_is_searched_in_python(compiled, caplog):
    rows = ["......", ".##...", "......"]
    space = GridSpace(GridSchema().load({"rows": rows, "start": [0, 0], "goals": [[2, 5]]}))
    exact_h = space.heuristic
    space.heuristic = lambda s: exact_h(s) * 0.5  # admissible, but not what the kernel computes
    with caplog.at_level(logging.WARNING, logger="worker.engine.kernels"):
        assert compiled.make_core(space, SearchConfig()) is None
    assert "disagrees" in caplog.text and "heuristic" in caplog.text

    turned = GridSpace(GridSchema().load({"rows": rows, "start": [0, 0], "goals": [[2, 5]]}))
    forward = turned.successors
    turned.successors = lambda s: list(reversed(forward(s)))  # same moves, another order
    assert compiled.make_core(turned, SearchConfig()) is None
    _, fin = solve(turned, SearchConfig(weight=1.0))
    assert fin.backend == "python" and fin.proven_optimal
