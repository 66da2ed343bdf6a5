"""Mutations of the demo case files for the property test (tests/test_input_properties.py) and the fuzz
script (tests/benchmarks/fuzz_cases.py): deleted and renamed keys, swapped units, non-finite, huge and tiny
numbers, wrong types, deep nesting. The judge says what an acceptable outcome is."""

from __future__ import annotations

import math
import random
import signal
from contextlib import contextmanager

import numpy as np
from builders import DEMO
from tubewright.models import CaseError, simulate
from tubewright.models.backend import NUMPY
from tubewright.models.casefile import build_case, resolve_includes

DEMOS = ("oxidation.toml", "coil.toml")
NASTY = [float("nan"), float("inf"), -float("inf"), 1e300, -1e300, 1e-300, 0, -1, 0.5, 7, "abc", True, [], {},
         "nan K", "inf J/mol/K", "1e300 m", "1e-300 m", "9**9**9 m", "10**400 Pa", "1 kg", "2 bar", "300 degC",
         "5 W/m^2/degF", "0 J/mol/K", "x" * 10_000, [[[[[[1]]]]]]]


def leaves(data, prefix=()):
    """Every (path, value) of a nested dict (lists count as leaves)."""
    for key, value in data.items():
        if isinstance(value, dict) and value:
            yield from leaves(value, (*prefix, key))
        else:
            yield (*prefix, key), value


def mutate(data: dict, rng: random.Random) -> tuple[dict, str]:
    """One mutation of ``data`` (a deep copy is changed) and its description."""
    import copy

    out = copy.deepcopy(data)
    path, _ = rng.choice(list(leaves(out)))
    node = out
    for part in path[:-1]:
        node = node[part]
    kind = rng.choice(["delete", "rename", "nasty", "nasty", "nasty", "deep"])
    key = path[-1]
    if kind == "delete":
        del node[key]
    elif kind == "rename":
        node[key + "x"] = node.pop(key)
    elif kind == "deep":
        deep = 1
        for _ in range(rng.choice([50, 500])):
            deep = [deep]
        node[key] = deep
    else:
        node[key] = rng.choice(NASTY)
    return out, f"{kind} {'.'.join(path)}"


class Hang(Exception):
    pass


@contextmanager
def time_limit(seconds: float):
    """SIGALRM-based limit (POSIX): raises Hang when the block runs longer."""
    def stop(signum, frame):
        raise Hang(f"longer than {seconds} s")

    old = signal.signal(signal.SIGALRM, stop)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)


def judge(data: dict, source: str = "mutated.toml") -> str:
    """"refused" (CaseError naming the file), or "ran" (a simulation whose every reported number is finite
    and whose mass and energy close where it reached the outlet). Anything else raises AssertionError, Hang
    or the exception itself."""
    try:
        case = build_case(data, source)
    except CaseError as err:
        assert err.source == source and str(err).startswith(source), str(err)
        assert err.key, f"the refusal names no key: {err}"
        return "refused"
    result = simulate(case)
    for name, value in result.summary.items():
        if isinstance(value, float):
            assert math.isfinite(value), f"summary {name} = {value}"
    if result.ok:
        f_in = np.array(case.feed.molar_flows)
        f_out = np.array([result.summary["outlet_molar_flow_mol_s"][n] for n in case.names])
        mass = np.array([s.molar_mass for s in case.species])
        assert abs(f_out @ mass - f_in @ mass) <= 1e-6 * (f_in @ mass), "mass does not close"
        h_in = sum(f * s.enthalpy(NUMPY, case.feed.temperature) for f, s in zip(f_in, case.species))
        h_out = sum(f * s.enthalpy(NUMPY, result.summary["outlet_temperature_K"])
                    for f, s in zip(f_out, case.species))
        q = result.summary["heat_removed_W"]
        scale = max(abs(q), 1e-6 * sum(abs(f * s.enthalpy(NUMPY, case.feed.temperature))
                                       for f, s in zip(f_in, case.species)), 1e-9)
        assert abs(h_in - h_out - q) <= 1e-4 * scale, f"energy does not close: {h_in - h_out - q:g} W"
    return "ran"


def demo_data(name: str) -> dict:
    return resolve_includes(DEMO / name)
