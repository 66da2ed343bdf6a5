"""The typed result of a simulation, built from an integrator solution. Kept apart from the simulator and
the checks so that both can use it without importing each other."""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from .outcomes import Reason, Status
from .state import StateLayout
from .summary import profile_columns, summarise

PROFILE_POINTS = 201
SUMMARY_POINTS = 2001  # the grid of the summary figures (extremes, outlet), from the dense solution


@dataclass
class SimulationResult:
    """Typed outcome of one simulation. ``columns`` holds the axial profiles as numpy arrays (SI, unit in
    the name); ``profiles`` gives them as a pandas DataFrame (built on first use: the CLI's summary does not
    pay for importing pandas). ``reason_code`` is the machine-readable reason beside ``reason``."""

    status: Status
    reason: str
    summary: dict
    columns: dict
    findings: list = field(default_factory=list)  # checks.Finding
    timings: dict = field(default_factory=dict)
    reason_code: Reason = Reason.INTEGRATED

    @property
    def ok(self) -> bool:
        return self.status == Status.OK

    @property
    def profiles(self):
        import pandas as pd

        return pd.DataFrame(self.columns)


def hot_spot_position(sol, z, T, i_t: int) -> float:
    """The position of the largest temperature of the dense solution, refined between the neighbours of the
    largest value of ``T`` (row ``i_t`` of the state) on the grid ``z``: the grid maximum alone errs by up to
    T'' dz^2 / 8, which would blur small differences of the hot spot such as those of the runaway
    sensitivity."""
    from scipy.optimize import minimize_scalar

    i = int(np.argmax(T))
    if i == 0 or i == z.size - 1:
        return float(z[i])
    best = minimize_scalar(lambda x: -sol.sol(x)[i_t], bounds=(z[i - 1], z[i + 1]), method="bounded",
                           options={"xatol": 1e-10 * max(z[-1], 1.0)})
    return float(best.x) if best.success and -best.fun >= T[i] else float(z[i])


def build_result(case, sol, status: Status, code: Reason, reason: str, t0: float, points=(),
                 grid: int = SUMMARY_POINTS) -> SimulationResult:
    """The result from a solve_ivp solution (dense when available): summary on a grid of ``grid`` points
    (with the integrator's steps), profile columns on PROFILE_POINTS points plus the hot spot and the given
    ``points`` [m] (those reached)."""
    elapsed = time.perf_counter() - t0
    if sol is None or getattr(sol, "t", None) is None or len(sol.t) < 2:
        return SimulationResult(status, reason, {}, {}, [], {"simulate_s": elapsed}, code)
    layout = StateLayout.of(case)
    z_end = float(sol.t[-1])
    exact = np.asarray([p for p in points if 0.0 <= p <= z_end], dtype=float)
    if sol.sol is not None:
        z = np.union1d(np.union1d(np.linspace(0.0, z_end, grid), sol.t), exact)
        y = sol.sol(z)
        i_t = layout.index("T")
        z_hot = hot_spot_position(sol, z, y[i_t], i_t)
        if z_hot not in z:  # one more point, at the refined hot spot
            k = int(np.searchsorted(z, z_hot))
            z, y = np.insert(z, k, z_hot), np.insert(y, k, sol.sol(z_hot), axis=1)
        y[:, -1] = sol.y[:, -1]
    else:
        z, y = sol.t, sol.y
    summary = summarise(case, z, y, sol.y[:, -1])
    summary["status"] = status
    summary["reason"] = reason
    summary["reason_code"] = code
    pick = np.unique(np.searchsorted(z, np.linspace(0.0, z_end, PROFILE_POINTS)).clip(0, z.size - 1))
    pick = np.union1d(pick, [int(np.argmax(layout.get(y, "T")))])
    if exact.size and sol.sol is not None:
        pick = np.union1d(pick, np.searchsorted(z, exact))
    columns = profile_columns(case, z[pick], y[:, pick])
    return SimulationResult(status, reason, summary, columns, [], {"simulate_s": elapsed}, code)
