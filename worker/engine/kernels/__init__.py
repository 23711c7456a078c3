"""Pick the search backend: compiled kernels for the grid and sliding-tile domains, else pure Python.

The choice is made once, at import. ``COMPILED`` is True when the compiled
extension modules were built and imported and the environment does not set
``BOUNDWISE_PURE_PYTHON=1``; ``BACKEND`` is "compiled" or "python"
accordingly. ``make_core(space, config)`` returns a compiled search core for a
space whose ``kernel_spec()`` a kernel understands, and None otherwise, so the
driver falls back to the pure-Python core.

A compiled core must search exactly as the pure-Python core does. Before one
is handed out it is checked against the space itself: the successors (order,
costs, goal test) and heuristic values of a few states must agree; if they do not,
the space is searched in pure Python and a warning is logged.
"""

from __future__ import annotations

import logging
import math
import os
import random
from typing import Any

from worker.engine.types import SearchConfig

__all__ = ["BACKEND", "COMPILED", "IMPORT_ERROR", "make_core", "kernel_for"]

logger = logging.getLogger(__name__)

IMPORT_ERROR: str | None = None
_KERNELS: dict[str, Any] = {}

if os.environ.get("BOUNDWISE_PURE_PYTHON", "").strip() not in ("", "0"):
    IMPORT_ERROR = "BOUNDWISE_PURE_PYTHON is set"
else:
    try:
        from worker.engine.kernels._grid import GridKernel
        from worker.engine.kernels._tiles import TilesKernel
    except ImportError as err:  # not built: no compiler at install time, or a plain source tree
        IMPORT_ERROR = str(err)
    else:
        _KERNELS = {"grid": GridKernel, "tiles": TilesKernel}

COMPILED: bool = bool(_KERNELS)
BACKEND: str = "compiled" if COMPILED else "python"

if not COMPILED:
    logger.debug("compiled search kernels not in use: %s", IMPORT_ERROR)

# How many states the agreement check looks at before trusting a kernel.
_CHECK_STATES = 48
_CHECK_SEED = 20240611


def kernel_for(spec: Any) -> Any:
    """Return the kernel class for a ``kernel_spec()`` result, or None."""
    if not isinstance(spec, dict):
        return None
    return _KERNELS.get(spec.get("kind"))


def make_core(space: Any, config: SearchConfig) -> Any:
    """Return a compiled search core for ``space``, or None to search it in pure Python."""
    if not COMPILED or config.weight < 1.0:
        return None
    if getattr(space, "guidance", None) is not None:
        return None  # kernels order open by h alone
    spec_fn = getattr(space, "kernel_spec", None)
    if spec_fn is None:
        return None
    spec = spec_fn()
    kernel = kernel_for(spec)
    if kernel is None:
        return None
    try:
        core = kernel(space, config, spec)
    except (ValueError, KeyError, TypeError) as err:
        logger.warning("compiled %s kernel refused the space (%s); searching in pure Python", spec["kind"], err)
        return None
    problem = _disagreement(core, space)
    if problem is not None:
        logger.warning("compiled %s kernel disagrees with the space (%s); searching in pure Python",
                       spec["kind"], problem)
        return None
    return core


def _disagreement(core: Any, space: Any) -> str | None:
    """Walk a few random steps from the start; return how kernel and space differ, or None."""
    rng = random.Random(_CHECK_SEED)
    state = space.initial_state()
    if core.start_state != state:
        return f"start state {core.start_state!r} != {state!r}"
    for _ in range(_CHECK_STATES):
        if space.is_goal(state):
            state = space.initial_state()
        mine = core.successors_of(state)
        theirs = [(t, float(c), bool(space.is_goal(t))) for t, c, _ in space.successors(state)]
        if mine != theirs:
            return f"successors of {state!r}: {mine!r} != {theirs!r}"
        for t, _, _ in theirs:
            h_k, h_s = core.heuristic_of(t), float(space.heuristic(t))
            if not (h_k == h_s or (math.isinf(h_k) and math.isinf(h_s))):
                return f"heuristic of {t!r}: {h_k!r} != {h_s!r}"
        if not theirs:
            state = space.initial_state()
            if not list(space.successors(state)):
                return None
            continue
        state = rng.choice(theirs)[0]
    return None
