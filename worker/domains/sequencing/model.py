"""Load and check a sequencing problem: tasks, changeovers, windows, precedence, objective.

The problem document (the ``domain`` key removed)::

    {
      "tasks": [{"id": "o1", "duration": 4, "release": 0, "due": 30}, ...],
      "setup": [[...], ...],            # square over [start, task_1, ..., task_n]
      "return_to_start": false,
      "precedence": [["o1", "o3"]],     # o1 must come before o3
      "objective": "setup"              # or "makespan"
    }

or, instead of ``setup``, coordinates on every task (``x``/``y`` or
``lat``/``lon``) with ``metric`` (``euclidean``, ``manhattan``, ``haversine``;
default euclidean for x/y and haversine for lat/lon, in kilometres), an
optional ``speed`` (changeover = distance / speed, default 1) and a ``start``
location (required with ``return_to_start``; without it the first task has
no changeover).

Timing: the clock is 0 at the start; the changeover to the next task begins
when the previous task ends; a task starts at max(arrival, release), ends
``duration`` later and must end by ``due``; with ``return_to_start`` the
changeover back is added at the end.

Windows are checked up front: a task whose ``due`` cannot be met in any
order (its release plus duration is later, or the quickest changeover chain
from the start arrives too late) is an input error on ``tasks.<i>.due``.
Windows that only clash with each other are left to the search, which ends
proven infeasible.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from enum import Enum
from typing import Any

from marshmallow import ValidationError, fields, post_load, validate

from worker.domains.fields import StrictBool, StrictFloat, StrictSchema

__all__ = [
    "EARTH_RADIUS_KM",
    "MAX_TASKS",
    "Objective",
    "SequencingProblem",
    "SequencingSchema",
    "Task",
    "due_slack",
    "shortest_from",
]

# A hard cap on tasks. Sets of done tasks are Python ints, so nothing breaks
# above it, but beyond a few dozen tasks only anytime plans are realistic and
# a request of thousands would just burn a worker.
MAX_TASKS = 200
EARTH_RADIUS_KM = 6371.0
RETURN = "return"  # the action label of the final changeover back to the start


class Objective(str, Enum):
    """What a plan's cost measures."""

    SETUP = "setup"  # total changeover / travel time
    MAKESPAN = "makespan"  # completion time of the last task (return and waiting included)


@dataclass(frozen=True, slots=True)
class Task:
    """One task: an id, how long it takes, and its optional window and location."""

    id: str
    duration: float = 0.0
    release: float | None = None
    due: float | None = None
    at: tuple[float, float] | None = None  # (x, y) or (lat, lon)


@dataclass(frozen=True, slots=True)
class SequencingProblem:
    """A validated problem; ``matrix`` is the changeover matrix over [start, tasks...]."""

    tasks: tuple[Task, ...]
    matrix: tuple[tuple[float, ...], ...]
    return_to_start: bool = False
    precedence: tuple[tuple[str, str], ...] = ()
    objective: Objective = Objective.SETUP
    setup: tuple[tuple[float, ...], ...] | None = None
    metric: str | None = None
    speed: float = 1.0
    start: tuple[float, float] | None = None

    @property
    def has_windows(self) -> bool:
        """True when any task has a release or a due."""
        return any(t.release is not None or t.due is not None for t in self.tasks)


def due_slack(due: float) -> float:
    """Return the float slack allowed when comparing an end time with ``due``."""
    return 1e-9 * max(1.0, abs(due))


def shortest_from(matrix: Sequence[Sequence[float]], source: int) -> list[float]:
    """Return the least changeover chain from ``source`` to every node (dense Dijkstra).

    Setup matrices need not obey the triangle inequality, so the direct entry
    is not always the quickest way to reach a task.
    """
    n = len(matrix)
    dist = list(matrix[source])
    dist[source] = 0.0
    done = [False] * n
    done[source] = True
    for _ in range(n - 1):
        u, best = -1, math.inf
        for v in range(n):
            if not done[v] and dist[v] < best:
                u, best = v, dist[v]
        if u < 0:
            break
        done[u] = True
        row = matrix[u]
        for v in range(n):
            if not done[v] and best + row[v] < dist[v]:
                dist[v] = best + row[v]
    return dist


def _nested(path: str, message: str) -> dict[Any, Any]:
    """Build marshmallow's nested error dict for a dotted path such as ``precedence.2.1``."""
    out: Any = [message]
    for part in reversed(path.split(".")):
        out = {int(part) if part.isdigit() else part: out}
    return out


def _fail(path: str, message: str) -> ValidationError:
    return ValidationError(_nested(path, message))


class _TaskSchema(StrictSchema):
    id = fields.String(required=True, validate=validate.Length(min=1, max=200))
    duration = StrictFloat(load_default=0.0, validate=validate.Range(min=0.0))
    release = StrictFloat(load_default=None, validate=validate.Range(min=0.0))
    due = StrictFloat(load_default=None, validate=validate.Range(min=0.0))
    x = StrictFloat(load_default=None)
    y = StrictFloat(load_default=None)
    lat = StrictFloat(load_default=None, validate=validate.Range(min=-90.0, max=90.0))
    lon = StrictFloat(load_default=None, validate=validate.Range(min=-180.0, max=180.0))


class _LocationSchema(StrictSchema):
    x = StrictFloat(load_default=None)
    y = StrictFloat(load_default=None)
    lat = StrictFloat(load_default=None, validate=validate.Range(min=-90.0, max=90.0))
    lon = StrictFloat(load_default=None, validate=validate.Range(min=-180.0, max=180.0))


class SequencingSchema(StrictSchema):
    """The marshmallow schema of a sequencing problem; loads a ``SequencingProblem``."""

    tasks = fields.List(
        fields.Nested(_TaskSchema), required=True, validate=validate.Length(min=1, max=MAX_TASKS)
    )
    setup = fields.List(fields.List(StrictFloat()), load_default=None)
    metric = fields.String(load_default=None, validate=validate.OneOf(["euclidean", "manhattan", "haversine"]))
    speed = StrictFloat(load_default=None, validate=validate.Range(min=0.0, min_inclusive=False))
    start = fields.Nested(_LocationSchema, load_default=None)
    return_to_start = StrictBool(load_default=False)
    precedence = fields.List(
        fields.List(fields.String(), validate=validate.Length(equal=2, error="must be a pair [before, after]")),
        load_default=list,
    )
    objective = fields.String(load_default="setup", validate=validate.OneOf([o.value for o in Objective]))

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> SequencingProblem:
        return make_problem(data)


def make_problem(data: Mapping[str, Any]) -> SequencingProblem:
    """Check the cross-field rules of loaded fields and return the problem (ValidationError on failure)."""
    raw_tasks = data["tasks"]
    index: dict[str, int] = {}
    for i, t in enumerate(raw_tasks):
        if t["id"] == RETURN:
            raise _fail(f"tasks.{i}.id", f"{RETURN!r} is reserved for the final changeover back to the start")
        if t["id"] in index:
            raise _fail(f"tasks.{i}.id", f"duplicate task id {t['id']!r} (also tasks.{index[t['id']]})")
        index[t["id"]] = i
    if data["setup"] is not None:
        matrix, at, start = _matrix_from_setup(data), [None] * len(raw_tasks), None
        metric, speed = None, 1.0
    else:
        matrix, at, start, metric, speed = _matrix_from_coordinates(data)
    tasks = tuple(
        Task(t["id"], t["duration"], t["release"], t["due"], at[i]) for i, t in enumerate(raw_tasks)
    )
    precedence = _check_precedence(data["precedence"], index)
    _check_windows(tasks, matrix)
    return SequencingProblem(
        tasks=tasks,
        matrix=matrix,
        return_to_start=data["return_to_start"],
        precedence=precedence,
        objective=Objective(data["objective"]),
        setup=None if data["setup"] is None else matrix,
        metric=metric,
        speed=speed,
        start=start,
    )


def _matrix_from_setup(data: Mapping[str, Any]) -> tuple[tuple[float, ...], ...]:
    n1 = len(data["tasks"]) + 1
    for key in ("metric", "speed", "start"):
        if data[key] is not None:
            raise _fail(key, "only used with task coordinates, not with a setup matrix")
    for i, t in enumerate(data["tasks"]):
        for key in ("x", "y", "lat", "lon"):
            if t[key] is not None:
                raise _fail(f"tasks.{i}.{key}", "give either a setup matrix or task coordinates, not both")
    rows = data["setup"]
    if len(rows) != n1:
        raise _fail(
            "setup",
            f"must be square with {n1} rows (the start, then the {n1 - 1} tasks in order); got {len(rows)}",
        )
    for i, row in enumerate(rows):
        if len(row) != n1:
            raise _fail(f"setup.{i}", f"must have {n1} entries (the start, then the tasks); got {len(row)}")
        for j, v in enumerate(row):
            if v < 0:
                raise _fail(f"setup.{i}.{j}", f"must not be negative; got {v}")
    return tuple(tuple(float(v) for v in row) for row in rows)


def _point(obj: Mapping[str, Any], planar: bool, where: str) -> tuple[float, float]:
    keys = ("x", "y") if planar else ("lat", "lon")
    other = ("lat", "lon") if planar else ("x", "y")
    for k in other:
        if obj[k] is not None:
            raise _fail(f"{where}.{k}", f"all locations must use the same form ({keys[0]}/{keys[1]})")
    for k in keys:
        if obj[k] is None:
            raise _fail(f"{where}.{k}", f"required: every location needs {keys[0]} and {keys[1]}")
    return (obj[keys[0]], obj[keys[1]])


def _matrix_from_coordinates(data: Mapping[str, Any]) -> tuple[Any, ...]:
    tasks = data["tasks"]
    first = tasks[0]
    if all(first[k] is None for k in ("x", "y", "lat", "lon")):
        raise _fail("setup", "required: give a setup matrix, or coordinates (x, y or lat, lon) on every task")
    planar = first["x"] is not None or first["y"] is not None
    at = [_point(t, planar, f"tasks.{i}") for i, t in enumerate(tasks)]
    metric = data["metric"] or ("euclidean" if planar else "haversine")
    if (metric == "haversine") == planar:
        need = "lat/lon" if metric == "haversine" else "x/y"
        raise _fail("metric", f"{metric} needs {need} coordinates")
    start = None if data["start"] is None else _point(data["start"], planar, "start")
    if start is None and data["return_to_start"]:
        raise _fail("start", "required: return_to_start needs a start location")
    speed = 1.0 if data["speed"] is None else data["speed"]
    points = [start, *at]
    n1 = len(points)
    matrix = [[0.0] * n1 for _ in range(n1)]
    for i in range(n1):
        for j in range(n1):
            if i != j and points[i] is not None and points[j] is not None:
                matrix[i][j] = distance(metric, points[i], points[j]) / speed
    return tuple(tuple(r) for r in matrix), at, start, metric, speed


def distance(metric: str, a: tuple[float, float], b: tuple[float, float]) -> float:
    """Return the distance between two locations under ``metric`` (haversine in km)."""
    if metric == "euclidean":
        return math.hypot(a[0] - b[0], a[1] - b[1])
    if metric == "manhattan":
        return abs(a[0] - b[0]) + abs(a[1] - b[1])
    lat1, lon1, lat2, lon2 = map(math.radians, (a[0], a[1], b[0], b[1]))
    s = math.sin((lat2 - lat1) / 2) ** 2 + math.cos(lat1) * math.cos(lat2) * math.sin((lon2 - lon1) / 2) ** 2
    return 2 * EARTH_RADIUS_KM * math.asin(min(1.0, math.sqrt(s)))


def _check_precedence(pairs: Sequence[Sequence[str]], index: Mapping[str, int]) -> tuple[tuple[str, str], ...]:
    after: dict[str, list[str]] = {}
    for i, pair in enumerate(pairs):
        for j, tid in enumerate(pair):
            if tid not in index:
                raise _fail(f"precedence.{i}.{j}", f"unknown task id {tid!r}")
        after.setdefault(pair[0], []).append(pair[1])
    cycle = _find_cycle(after, list(index))
    if cycle:
        raise _fail("precedence", "precedence has a cycle: " + " -> ".join(cycle))
    return tuple((a, b) for a, b in pairs)


def _find_cycle(after: Mapping[str, list[str]], ids: list[str]) -> list[str]:
    """Return one cycle as a closed list of ids (first == last), or [] when there is none."""
    state: dict[str, int] = {}  # 1 = on the current path, 2 = finished
    for root in ids:
        if state.get(root):
            continue
        path: list[str] = [root]
        iters = [iter(after.get(root, ()))]
        state[root] = 1
        while iters:
            nxt = next(iters[-1], None)
            if nxt is None:
                state[path.pop()] = 2
                iters.pop()
            elif state.get(nxt) == 1:
                return path[path.index(nxt):] + [nxt]
            elif not state.get(nxt):
                state[nxt] = 1
                path.append(nxt)
                iters.append(iter(after.get(nxt, ())))
    return []


def _check_windows(tasks: Sequence[Task], matrix: Sequence[Sequence[float]]) -> None:
    if not any(t.due is not None for t in tasks):
        return
    reach = shortest_from(matrix, 0)
    for i, t in enumerate(tasks):
        if t.due is None:
            continue
        release = t.release or 0.0
        if release + t.duration > t.due + due_slack(t.due):
            raise _fail(
                f"tasks.{i}.due",
                f"cannot be met: release {release:g} + duration {t.duration:g} ends after the due {t.due:g}",
            )
        earliest = max(reach[i + 1], release) + t.duration
        if earliest > t.due + due_slack(t.due):
            raise _fail(
                f"tasks.{i}.due",
                f"cannot be met in any order: the earliest end is {earliest:g} "
                f"(changeover {reach[i + 1]:g} from the start), after the due {t.due:g}",
            )
