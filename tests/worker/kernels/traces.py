"""Event traces and a watchdog, to compare the compiled and the pure-Python backends."""

from __future__ import annotations

import signal
from contextlib import contextmanager

from worker.engine import Budget, Finished, Improvement
from worker.engine.core import PythonCore
from worker.engine.driver import search

# A pure-Python search of these small instances must end within this many seconds.
STEP_WATCHDOG_S = 20


@contextmanager
def watchdog(seconds: int, what: str):
    """Fail instead of hanging when the block runs longer than ``seconds``."""

    def _expired(signum, frame):
        raise AssertionError(f"{what} did not finish within {seconds} s")

    previous = signal.signal(signal.SIGALRM, _expired)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)


def trace(core, config, budget: Budget) -> list[tuple]:
    """Return every event of a search as comparable plain values (plans, costs, bounds, counters)."""
    out = []
    for ev in search(None, config, budget, core=core, progress_every_s=float("inf")):
        c = ev.counters
        row = (type(ev).__name__, ev.cost, ev.lower_bound, c.expansions, c.generated, c.reopened, c.stored)
        if isinstance(ev, Improvement):
            row += (ev.weight, ev.path)
        elif isinstance(ev, Finished):
            row += (ev.stop_reason, ev.proven_optimal, ev.proven_infeasible, ev.path)
        out.append(row)
    return out


def both_traces(kernels_module, space, config, budget: Budget) -> tuple[list[tuple], list[tuple]]:
    """Return the traces of the pure-Python core and of the compiled core on the same space."""
    with watchdog(STEP_WATCHDOG_S, "the pure-Python search"):
        python = trace(PythonCore(space, config), config, budget)
    core = kernels_module.make_core(space, config)
    assert core is not None and core.backend == "compiled", "the kernel refused a space it should take"
    return python, trace(core, config, budget)
