"""Study files: a base case and a list of tasks, expanded into concrete tasks with stable identities.

    title = "..."
    base = "oxidation.toml"             # the base case, relative to the study file
    [[task]]
    name = "nominal"                    # optional
    kind = "simulate"                   # simulate | sweep | optimize | pareto | screen
    case = "other.toml"                 # optional: another base for this task
    set = { "tube.length" = "6 m" }     # optional overrides (dotted keys of the case)
    timeout = "10 min"                  # optional time limit of each concrete task
    # sweep:    grid = { KEY = [v1, v2, ...], ... }
    #           or latin_hypercube = { samples, seed, ranges = { KEY = [lo, hi] } } (whole-number bounds: rounded)
    # optimize: starts = N, seed = S, ideal = true
    # pareto:   points = N
    # screen:   method = "morris" | "sobol", samples = N, seed = S, policy = "censor" | "strict"

A concrete task's identity is a hash of its kind, options and fully resolved case (includes and overrides
applied) and the software version: re-running a study skips what is already done.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import math
from dataclasses import dataclass, field
from pathlib import Path

from tubewright.models.casefile import apply_overrides, build_case, read_toml, resolve_includes
from tubewright.models.errors import CaseError, suggest
from tubewright.models.units import parse, to_si
from tubewright.optimizer.screening.analysis import DEFAULT_SAMPLES, METHODS, POLICIES, check_samples

import tubewright

MAX_SWEEP = 100_000  # points of one Latin hypercube
MAX_TASKS = 100_000  # concrete tasks of one study, unless raised (--max-tasks)
COMMON_KEYS = ("name", "kind", "case", "set", "timeout")
KIND_KEYS = {  # the keys each kind reads besides COMMON_KEYS; any other key of a task is refused
    "simulate": (), "sweep": ("grid", "latin_hypercube"), "optimize": ("starts", "seed", "ideal"),
    "pareto": ("points",), "screen": ("method", "samples", "seed", "policy"),
    "robust": ("scenarios", "seed", "verify_samples"),
}
KINDS = tuple(KIND_KEYS)
TASK_KEYS = {*COMMON_KEYS, *(k for keys in KIND_KEYS.values() for k in keys)}


@dataclass(frozen=True)
class Task:
    task_id: str
    name: str
    kind: str  # simulate | optimize | pareto | screen (sweeps are expanded into simulate tasks)
    position: int
    case_data: dict
    case_source: str
    options: dict = field(default_factory=dict)
    timeout: float | None = None
    group: str = ""  # the sweep a simulate task belongs to
    swept: dict = field(default_factory=dict)  # the swept keys and their values (as written)

    def spec(self) -> dict:
        return {"task_id": self.task_id, "kind": self.kind, "case_data": self.case_data,
                "case_source": self.case_source, "options": self.options}


@dataclass(frozen=True)
class Study:
    path: Path
    title: str
    tasks: list


def task_identity(kind, options, case_data) -> str:
    payload = json.dumps({"kind": kind, "options": options, "case": case_data, "version": tubewright.__version__},
                         sort_keys=True, default=str)
    return hashlib.sha256(payload.encode()).hexdigest()[:20]


def _numeric(value, source, key):
    """A sweep value must be a finite number or a quantity with units (models.units.parse: no arithmetic).
    Returns the number or the pint Quantity."""
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise CaseError(source, key, f"a sweep needs numeric values, got {value!r}")
    if isinstance(value, str):
        try:
            return parse(value, source, key)
        except CaseError as err:
            raise CaseError(source, key, f"a sweep needs numbers or quantities with units: {err.detail}") from err
    if not math.isfinite(value):
        raise CaseError(source, key, f"a sweep needs finite numbers, got {value!r}")
    return value


def _whole(t, key, default, src, where, low=0, high=None):
    """A whole-number option of a task, checked like a case key."""
    value = t.get(key, default)
    if isinstance(value, bool) or not isinstance(value, int) or value < low or (high is not None and value > high):
        allowed = f"a whole number from {low}" + (f" to {high}" if high is not None else "")
        raise CaseError(src, f"{where}.{key}" if where else key, f"must be {allowed}, got {value!r}")
    return value


def load_study(path, max_tasks: int = None) -> Study:
    path = Path(path).resolve()
    src = str(path)
    data = read_toml(path)
    for key in data:
        if key not in ("title", "base", "seed", "task"):
            raise CaseError(src, key, "unknown key; allowed: title, base, seed, task")
    title = data.get("title", path.stem)
    if not isinstance(title, str):
        raise CaseError(src, "title", f"must be a string, got {title!r}")
    for key in ("base",):
        if key in data and not isinstance(data[key], str):
            raise CaseError(src, key, f"must be a file name, got {data[key]!r}")
    study_seed = _whole(data, "seed", 0, src, "")
    tasks_raw = data.get("task")
    if not tasks_raw:
        raise CaseError(src, "task", "the study lists no tasks: add [[task]] tables")
    if not isinstance(tasks_raw, list) or not all(isinstance(t, dict) for t in tasks_raw):
        raise CaseError(src, "task", "must be [[task]] tables")
    max_tasks = MAX_TASKS if max_tasks is None else max_tasks
    expected = sum(_expansion(t, src, f"task[{i}]") for i, t in enumerate(tasks_raw))
    if expected > max_tasks:
        raise CaseError(src, "task", f"the study expands to {expected} tasks, more than the limit of {max_tasks}: "
                        "split it, or raise the limit (--max-tasks)")
    tasks: list[Task] = []
    for i, t in enumerate(tasks_raw):
        where = f"task[{i}]"
        unknown = [k for k in t if k not in TASK_KEYS]
        if unknown:
            raise CaseError(src, f"{where}.{unknown[0]}", f"unknown key{suggest(unknown[0], TASK_KEYS)}")
        kind = t.get("kind")
        if kind not in KINDS:
            raise CaseError(src, f"{where}.kind", f'"{kind}" is not allowed{suggest(str(kind), KINDS)}; allowed: '
                            f"{', '.join(KINDS)}")
        foreign = [k for k in t if k not in COMMON_KEYS and k not in KIND_KEYS[kind]]
        if foreign:
            reads = ", ".join(KIND_KEYS[kind]) or "none besides " + ", ".join(COMMON_KEYS)
            raise CaseError(src, f"{where}.{foreign[0]}", f'does not apply to a task of kind "{kind}"; it reads: '
                            f"{reads}")
        base_name = t.get("case", data.get("base"))
        if not base_name or not isinstance(base_name, str):
            raise CaseError(src, f"{where}.case", "missing: give the study a base case or the task a case")
        case_path = (path.parent / base_name).resolve()
        if not case_path.is_file():
            raise CaseError(src, f"{where}.case", f'case file "{base_name}" not found (looked at {case_path})')
        base = resolve_includes(case_path)
        overrides = t.get("set", {})
        if not isinstance(overrides, dict):
            raise CaseError(src, f"{where}.set", 'must be a table such as { "tube.length" = "6 m" }')
        timeout = None
        if "timeout" in t:
            timeout = to_si(t["timeout"], "s", src, f"{where}.timeout")
            if not timeout > 0:
                raise CaseError(src, f"{where}.timeout", f"must be greater than zero, got {t['timeout']!r}")
        name = t.get("name", f"{kind} {i + 1}")
        if not isinstance(name, str):
            raise CaseError(src, f"{where}.name", f"must be a string, got {name!r}")
        points = _sweep_points(t, src, where, study_seed) if kind == "sweep" else [{}]
        for swept in points:
            resolved = _resolve(base, {**overrides, **swept}, src, f"{where}.set" if not swept else f"{where}.grid",
                                str(case_path))
            concrete = "simulate" if kind == "sweep" else kind
            options = _options(t, kind, src, where)
            label = name if kind != "sweep" else f"{name} [{', '.join(f'{k}={v}' for k, v in swept.items())}]"
            tasks.append(Task(task_identity(concrete, options, resolved), label, concrete, len(tasks), resolved,
                              str(case_path), options, timeout, name if kind == "sweep" else "", swept))
    return Study(path, title, tasks)


def _resolve(base, overrides, src, where, case_source):
    """The fully resolved case data with overrides; validated now, so that a bad override stops the study
    before anything runs (the error names the study file and the task)."""
    try:
        data = apply_overrides(base, overrides, case_source)
        build_case(data, case_source)
    except CaseError as err:
        raise CaseError(src, where, f"{err.key}: {err.detail}") from err
    return data


def _expansion(t, src, where) -> int:
    """How many concrete tasks one [[task]] becomes, counted before anything is expanded."""
    if t.get("kind") != "sweep":
        return 1
    if isinstance(t.get("grid"), dict):
        return math.prod(len(v) if isinstance(v, list) else 1 for v in t["grid"].values())
    lh = t.get("latin_hypercube")
    if isinstance(lh, dict) and isinstance(lh.get("samples"), int) and not isinstance(lh.get("samples"), bool):
        return max(lh["samples"], 1)
    return 1


def _sweep_points(t, src, where, study_seed):
    if "grid" in t and "latin_hypercube" in t:
        raise CaseError(src, where, "give grid or latin_hypercube, not both")
    if "grid" in t:
        grid = t["grid"]
        if not isinstance(grid, dict) or not grid:
            raise CaseError(src, f"{where}.grid", "must be a table of key = [values]")
        for key, values in grid.items():
            if not isinstance(values, list) or not values:
                raise CaseError(src, f"{where}.grid.{key}", "must be a non-empty list of values")
            for v in values:
                _numeric(v, src, f"{where}.grid.{key}")
        keys = list(grid)
        return [dict(zip(keys, combo)) for combo in itertools.product(*(grid[k] for k in keys))]
    if "latin_hypercube" in t:
        lh = t["latin_hypercube"]
        if not isinstance(lh, dict):
            raise CaseError(src, f"{where}.latin_hypercube", "must be a table { samples, seed, ranges }")
        n = _whole(lh, "samples", None, src, f"{where}.latin_hypercube", low=1, high=MAX_SWEEP)
        seed = _whole(lh, "seed", study_seed, src, f"{where}.latin_hypercube")
        ranges = lh.get("ranges", {})
        if not ranges:
            raise CaseError(src, f"{where}.latin_hypercube.ranges", "missing: { KEY = [low, high] }")
        from scipy.stats import qmc

        if not isinstance(ranges, dict):
            raise CaseError(src, f"{where}.latin_hypercube.ranges", "must be a table { KEY = [low, high] }")
        u = qmc.LatinHypercube(d=len(ranges), seed=int(seed)).random(n)
        points = [dict() for _ in range(n)]
        for j, (key, pair) in enumerate(ranges.items()):
            where_key = f"{where}.latin_hypercube.ranges.{key}"
            if not isinstance(pair, list) or len(pair) != 2:
                raise CaseError(src, where_key, "must be [low, high]")
            lo, hi = pair
            qlo, qhi = _numeric(lo, src, where_key), _numeric(hi, src, where_key)
            if hasattr(qlo, "units") != hasattr(qhi, "units") or (
                    hasattr(qlo, "units") and qlo.dimensionality != qhi.dimensionality):
                raise CaseError(src, where_key, f"low and high must have the same dimension, got {lo!r} and {hi!r}")
            whole = isinstance(lo, int) and isinstance(hi, int)
            for i in range(n):
                v = qlo + (qhi - qlo) * float(u[i, j])
                points[i][key] = (f"{v.magnitude:.6g} {v.units:~}" if hasattr(v, "units")
                                  else int(round(v)) if whole else float(v))
        return points
    raise CaseError(src, where, "a sweep needs grid or latin_hypercube")


def _options(t, kind, src, where) -> dict:
    if kind == "optimize":
        ideal = t.get("ideal", False)
        if not isinstance(ideal, bool):
            raise CaseError(src, f"{where}.ideal", f"must be true or false, got {ideal!r}")
        return {"starts": _whole(t, "starts", 0, src, where, high=1000), "seed": _whole(t, "seed", 0, src, where),
                "ideal": ideal}
    if kind == "pareto":
        return {"points": _whole(t, "points", 5, src, where, low=2, high=1000)}
    if kind == "robust":
        return {"scenarios": _whole(t, "scenarios", 8, src, where, low=1, high=1000),
                "seed": _whole(t, "seed", 0, src, where),
                "verify_samples": _whole(t, "verify_samples", 1000, src, where, low=10, high=1_000_000)}
    if kind == "screen":
        method = t.get("method", "morris")
        if method not in METHODS:
            raise CaseError(src, f"{where}.method", f"{method!r} is not allowed; allowed: "
                            + ", ".join(f'"{m}"' for m in METHODS))
        policy = t.get("policy", POLICIES[0])
        if policy not in POLICIES:
            raise CaseError(src, f"{where}.policy", f"{policy!r} is not allowed{suggest(str(policy), POLICIES)}; "
                            "allowed: " + ", ".join(f'"{m}"' for m in POLICIES))
        samples = _whole(t, "samples", DEFAULT_SAMPLES[method], src, where, low=2)
        problem = check_samples(method, samples)
        if problem:
            raise CaseError(src, f"{where}.samples", problem)
        return {"method": method, "samples": samples, "seed": _whole(t, "seed", 0, src, where), "policy": policy}
    return {}
