"""The adaptive-integrator simulator: scipy ``solve_ivp`` (stiff methods, complex-step Jacobian) for the
initial-value coolant modes, shooting on the coolant outlet temperature for counter-current coolant.

A simulation never raises for a physical failure: it returns a ``SimulationResult`` with ``status``
("ok", "stopped" where the model left its validity, "failed") and the profile up to that point."""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace

import numpy as np
from scipy.integrate import solve_ivp

from .backend import NUMPY
from .balances import axial_derivatives

STATE_TAIL = ("T", "P", "Tc", "Q", "tau")
PROFILE_POINTS = 201


@dataclass
class SimulationResult:
    """Typed outcome of one simulation. ``columns`` holds the axial profiles as numpy arrays (SI, unit in
    the name); ``profiles`` gives them as a pandas DataFrame (built on first use: the CLI's summary does not
    pay for importing pandas)."""

    status: str  # "ok" | "stopped" | "failed"
    reason: str
    summary: dict
    columns: dict
    findings: list = field(default_factory=list)  # checks.Finding
    timings: dict = field(default_factory=dict)

    @property
    def ok(self) -> bool:
        return self.status == "ok"

    @property
    def profiles(self):
        import pandas as pd

        return pd.DataFrame(self.columns)


def state_rhs(case):
    """f(z, y) for y = [F_1..F_n, T, P, Tc, Q, tau] (per tube flows; y may carry extra trailing axes)."""
    n = len(case.species)

    def rhs(z, y):
        flows = np.where(y[:n].real < 0.0, 0.0 * y[:n], y[:n])  # guard against integrator undershoot
        d = axial_derivatives(NUMPY, case, list(flows), y[n], y[n + 1], y[n + 2])
        parts = [*d.dF, d.dT, d.dP, d.dTc, d.dQ, d.dtau]
        if y.ndim == 1:
            return np.array(parts)
        return np.array([np.broadcast_to(p, y.shape[1:]) for p in parts])

    return rhs


def complex_step_jacobian(rhs, size):
    """Exact-to-rounding Jacobian by the complex step (Squire and Trapp, SIAM Review 40, 1998, 110-112):
    J[:, k] = Im f(y + i h e_k) / h, all columns in one vectorised evaluation."""
    h = 1e-30

    def jac(z, y):
        cols = np.repeat(np.asarray(y, dtype=complex)[:, None], size, axis=1)
        cols[np.arange(size), np.arange(size)] += 1j * h * np.maximum(1.0, np.abs(y))
        return rhs(z, cols).imag / (h * np.maximum(1.0, np.abs(y)))[None, :]

    return jac


def initial_state(case, coolant_start: float | None = None) -> np.ndarray:
    n_tubes = case.tube.count
    F0 = np.array(case.feed.molar_flows) / n_tubes
    tc = case.coolant.temperature if coolant_start is None else coolant_start
    if tc is None:
        tc = case.feed.temperature
    return np.concatenate([F0, [case.feed.temperature, case.feed.pressure, tc, 0.0, 0.0]])


def _events(case):
    n = len(case.species)
    num = case.numerics

    def pressure_floor(z, y):
        return y[n + 1] - num.min_pressure

    def temperature_ceiling(z, y):
        return num.temperature_ceiling - y[n]

    pressure_floor.terminal = temperature_ceiling.terminal = True
    pressure_floor.direction = temperature_ceiling.direction = -1
    return [pressure_floor, temperature_ceiling]


def integrate(case, coolant_start: float | None = None, dense: bool = True):
    """One pass of solve_ivp from z = 0 to L. Returns the scipy result (never raises for solver trouble)."""
    rhs = state_rhs(case)
    y0 = initial_state(case, coolant_start)
    num = case.numerics
    atol = num.atol * np.maximum(np.abs(y0), 1.0)
    kwargs = {"jac": complex_step_jacobian(rhs, y0.size)}
    try:
        return solve_ivp(rhs, (0.0, case.tube.length), y0, method=num.method, rtol=num.rtol, atol=atol,
                         events=_events(case), dense_output=dense, **kwargs)
    except (ValueError, FloatingPointError, ArithmeticError) as err:
        return _Failure(str(err))


@dataclass
class _Failure:
    message: str
    status: int = -1
    success: bool = False
    t: object = None
    y: object = None
    sol: object = None
    t_events: object = None


def _stop_reason(case, sol) -> tuple[str, str]:
    if isinstance(sol, _Failure):
        return "failed", f"integrator error: {sol.message}"
    if sol.status == 1:
        z = sol.t[-1]
        if sol.t_events[0].size:
            return "stopped", f"pressure fell to {case.numerics.min_pressure:.4g} Pa at z = {z:.4g} m"
        return "stopped", (f"temperature passed the ceiling {case.numerics.temperature_ceiling:.1f} K at "
                           f"z = {z:.4g} m (runaway?)")
    if sol.status != 0:
        return "failed", f"integrator failed at z = {sol.t[-1]:.4g} m: {sol.message}"
    return "ok", "integrated to the tube outlet"


def shoot_countercurrent(case, guess: float | None = None):
    """Counter-current coolant enters at z = L: find its outlet temperature at z = 0 such that the
    integrated coolant temperature at z = L equals the inlet value. The residual is nearly linear in the
    guess, so the secant method from ``guess`` usually converges in 3-4 integrations; bracketing plus
    Brent's method is the fallback."""
    from scipy.optimize import brentq, root_scalar

    n = len(case.species)
    tc_in = case.coolant.temperature
    # the shooting passes need no tighter tolerance than 1e-8; the final pass uses the case's own
    shooting = replace(case, numerics=replace(case.numerics, rtol=max(case.numerics.rtol, 1e-8)))

    def residual(tc0):
        with np.errstate(over="ignore", invalid="ignore"):  # a wild probe fails quietly and returns NaN
            sol = integrate(shooting, tc0, dense=False)
        if isinstance(sol, _Failure) or sol.status != 0:
            return np.nan
        return sol.y[n + 2, -1] - tc_in

    start = tc_in + 1.0 if guess is None else guess
    try:
        secant = root_scalar(residual, x0=start, x1=start + 0.5, method="secant", xtol=1e-5, maxiter=20)
        if secant.converged and np.isfinite(secant.root):
            return secant.root, "converged"
    except (ValueError, ArithmeticError):
        pass
    # Fallback: scan below and above the inlet value (the coolant warms towards z = 0 when it cools the
    # fluid, and cools when it heats an endothermic one) for a sign change, then Brent's method.
    steps = np.array([0.0, 2.0, 5.0, 10.0, 20.0, 40.0, 80.0, 160.0, 320.0])
    candidates = np.concatenate([tc_in - steps[:0:-1], tc_in + steps])
    candidates = candidates[candidates > 0.5 * tc_in]
    values = [residual(x) for x in candidates]
    for (a, fa), (b, fb) in zip(zip(candidates, values), zip(candidates[1:], values[1:])):
        if np.isfinite(fa) and np.isfinite(fb) and np.sign(fa) != np.sign(fb):
            return brentq(residual, a, b, xtol=1e-9, rtol=1e-12, maxiter=100), "converged"
    return None, "no coolant outlet temperature within 320 K of its inlet value closes the counter-current balance"


def simulate(case, checks: bool = True, coolant_guess: float | None = None) -> SimulationResult:
    """Simulate one case. ``checks`` adds the validity and safety findings (which re-simulate for the
    runaway sensitivities). ``coolant_guess``: a starting guess of the counter-current coolant outlet
    temperature [K] (for re-simulations of a nearby case)."""
    from . import summary as S

    t0 = time.perf_counter()
    tc_start = None
    if case.coolant.mode == "countercurrent":
        tc_start, why = shoot_countercurrent(case, coolant_guess)
        if tc_start is None:
            sol = integrate(case, case.coolant.temperature)
            return S.build_result(case, sol, "failed", f"counter-current shooting failed: {why}", t0)
    sol = integrate(case, tc_start)
    status, reason = _stop_reason(case, sol)
    result = S.build_result(case, sol, status, reason, t0)
    if checks and result.summary:
        from .checks import run_checks

        t1 = time.perf_counter()
        result.findings = run_checks(case, result)
        result.timings["checks_s"] = time.perf_counter() - t1
    return result
