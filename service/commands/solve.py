"""`boundwise solve REQUEST.json`: run one job request locally and stream its improvements.

Standard output is JSON Lines: one ``{"type": "improvement", ...}`` line per
improving plan as it is found and, with ``--json``, a final
``{"type": "result", ...}`` object with the best plan. Without ``--json`` a
short summary goes to standard error. Exit status 0 when the search ran (with a
plan or not), 2 for a request that cannot be read or is invalid.
"""

from __future__ import annotations

import argparse
import copy
import json
import signal
import sys
import threading
from typing import Any

from worker.exceptions import RequestError
from worker.request import parse_request
from worker.runner import run

# flag -> (section, field) of the job request document it overrides
OVERRIDES = {
    "time_limit": ("budget", "time_s"),
    "max_expansions": ("budget", "expansions"),
    "weight": ("search", "weight"),
    "target_bound": ("budget", "target_bound"),
}


def register(sub: Any) -> None:
    """Add the ``solve`` subcommand."""
    p = sub.add_parser("solve", help="solve a job request document locally",
                       description="Solve a job request document (the same JSON as the HTTP submit body).")
    p.add_argument("request", help="path of the job request JSON file, or - for standard input")
    p.add_argument("--time-limit", type=float, metavar="S", help="wall-time budget in seconds")
    p.add_argument("--max-expansions", type=int, metavar="N", help="expansions budget")
    p.add_argument("--weight", type=float, metavar="W", help="weight w of g + w*h (1 is plain A*)")
    p.add_argument("--target-bound", type=float, metavar="B", help="stop once cost / lower bound <= B")
    p.add_argument("--json", action="store_true", help="print a final JSON result object on stdout")
    p.set_defaults(func=main)


def _read(path: str) -> Any:
    if path == "-":
        return json.loads(sys.stdin.read())
    with open(path, encoding="utf-8") as f:
        return json.loads(f.read())


def apply_overrides(document: Any, args: argparse.Namespace) -> Any:
    """Return a copy of ``document`` with the command-line flags written into it."""
    if not isinstance(document, dict):
        return document
    doc = copy.deepcopy(document)
    for attr, (section, field) in OVERRIDES.items():
        value = getattr(args, attr, None)
        if value is None:
            continue
        part = doc.setdefault(section, {})
        if isinstance(part, dict):
            part[field] = value
    return doc


def _emit(obj: dict[str, Any]) -> None:
    sys.stdout.write(json.dumps(obj, separators=(",", ":")) + "\n")
    sys.stdout.flush()


def main(args: argparse.Namespace) -> int:
    """Run the solve subcommand."""
    try:
        document = apply_overrides(_read(args.request), args)
    except OSError as err:
        print(f"error: cannot read {args.request}: {err.strerror or err}", file=sys.stderr)
        return 2
    except json.JSONDecodeError as err:
        print(f"error: {args.request} is not JSON: {err.msg} at line {err.lineno} column {err.colno}",
              file=sys.stderr)
        return 2
    try:
        request = parse_request(document)
    except RequestError as err:
        print(f"error: {err.field or 'request'}: {err.message}", file=sys.stderr)
        return 2

    stop = threading.Event()
    previous = signal.signal(signal.SIGINT, lambda *_: stop.set())
    improvements: list[dict[str, Any]] = []
    best: dict[str, Any] | None = None
    final: dict[str, Any] = {}
    try:
        for event in run(request, cancelled=stop.is_set):
            if event["type"] == "improvement":
                best = event
                line = {k: v for k, v in event.items() if k != "plan"}
                improvements.append({k: line[k] for k in ("revision", "cost", "lower_bound", "bound",
                                                          "expansions", "elapsed_s")})
                _emit(line)
            elif event["type"] == "finished":
                final = event
    finally:
        signal.signal(signal.SIGINT, previous)

    result = {
        "type": "result",
        "domain": request.kind.name,
        "cost": final["cost"],
        "lower_bound": final["lower_bound"],
        "bound": final["bound"],
        "proven_optimal": final["proven_optimal"],
        "proven_infeasible": final["proven_infeasible"],
        "stop_reason": final["stop_reason"],
        "expansions": final["expansions"],
        "generated": final["generated"],
        "reopened": final["reopened"],
        "stored": final["stored"],
        "elapsed_s": final["elapsed_s"],
        "backend": final["backend"],
        "plan": best["plan"] if best else None,
        "improvements": improvements,
    }
    if args.json:
        _emit(result)
    else:
        if result["proven_infeasible"]:
            summary = "no plan exists (proven infeasible)"
        elif result["cost"] is None:
            summary = f"no plan found before the search stopped ({result['stop_reason']})"
        elif result["proven_optimal"]:
            summary = f"cost {result['cost']:.6g}, proven optimal"
        else:
            bound = result["bound"]
            shown = f"{bound:.4g}" if bound is not None else "unbounded"
            summary = f"cost {result['cost']:.6g}, within {shown} of optimal ({result['stop_reason']})"
        print(f"{summary}; {result['expansions']} expansions in {result['elapsed_s']:.3f} s "
              f"[{result['backend']}]", file=sys.stderr)
    return 0
