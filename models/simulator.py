"""The adaptive-integrator simulator: scipy ``solve_ivp`` (stiff methods, complex-step Jacobian) for the
initial-value coolant modes, shooting on the coolant outlet temperature for counter-current coolant.

A simulation never raises for a physical failure: it returns a ``SimulationResult`` with ``status``
("ok", "stopped" where the model left its validity, "failed") and the profile up to that point."""

from __future__ import annotations

import time
from dataclasses import dataclass, replace
from functools import partial

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import brentq, root_scalar

from .backend import NUMPY
from .balances import axial_derivatives
from .checks import run_checks
from .outcomes import Reason, Status
from .results import SUMMARY_POINTS, SimulationResult, build_result
from .state import StateLayout


def state_rhs(case):
    """f(z, y) for y = [F_1..F_n, T, P, Tc, Q, tau] (models.state; per tube flows). y may carry trailing
    axes (samples, or the perturbed columns of the complex step): the balances broadcast over them."""
    layout = StateLayout.of(case)
    flows = layout.flows
    i_t, i_p, i_tc = (layout.index(s) for s in ("T", "P", "Tc"))

    def rhs(z, y):
        F = np.where(y[flows].real < 0.0, 0.0 * y[flows], y[flows])  # guard against integrator undershoot
        d = axial_derivatives(NUMPY, case, list(F), y[i_t], y[i_p], y[i_tc])
        rhs.last = out = layout.pack(d, y.shape[1:])  # kept: tells a failed integration from a bug
        return out

    rhs.last = None
    return rhs


COMPLEX_STEP = 1e-30


def complex_step_columns(rhs, z, y):
    """Exact-to-rounding Jacobian by the complex step (Squire and Trapp, SIAM Review 40, 1998, 110-112):
    J[:, k] = Im f(y + i h e_k) / h, all columns in one vectorised evaluation. ``y`` has shape (size, ...)
    (trailing sample axes allowed); returns d[i, k, ...] = df_i/dy_k per sample."""
    y = np.asarray(y)
    size = y.shape[0]
    step = COMPLEX_STEP * np.maximum(1.0, np.abs(y))  # (size, ...)
    cols = np.repeat(y.astype(complex)[:, None], size, axis=1)  # (state, perturbed component, ...)
    cols[np.arange(size), np.arange(size)] += 1j * step
    return rhs(z, cols).imag / step[None]


def complex_step_jacobian(rhs):
    """The dense Jacobian function of one state vector, for solve_ivp."""
    return partial(complex_step_columns, rhs)


def initial_state(case, coolant_start: float | None = None) -> np.ndarray:
    return StateLayout.of(case).initial(case, coolant_start)


def _events(case):
    layout = StateLayout.of(case)
    return stop_events(case, lambda y: y[layout.index("P")], lambda y: y[layout.index("T")])


def stop_events(case, pressure, temperature):
    """The terminal events of an integration: the pressure floor and the temperature ceiling, from functions
    of the state giving the pressure and the (largest) temperature."""
    num = case.numerics

    def pressure_floor(z, y):
        return pressure(y) - num.min_pressure

    def temperature_ceiling(z, y):
        return num.temperature_ceiling - temperature(y)

    pressure_floor.terminal = temperature_ceiling.terminal = True
    pressure_floor.direction = temperature_ceiling.direction = -1
    return [pressure_floor, temperature_ceiling]


def integrate(case, coolant_start: float | None = None, dense: bool = True):
    """One pass of solve_ivp from z = 0 to L. Returns the scipy result (never raises for solver trouble)."""
    return run_ivp(case, state_rhs(case), initial_state(case, coolant_start), _events(case), dense)


def run_ivp(case, rhs, y0, events, dense: bool):
    """solve_ivp over the tube with the case's method and tolerances and the complex-step Jacobian; an
    integrator failure comes back as a result with status -1 (the axial and the radial models)."""
    num = case.numerics
    atol = num.atol * np.maximum(np.abs(y0), 1.0)
    try:
        return solve_ivp(rhs, (0.0, case.tube.length), y0, method=num.method, rtol=num.rtol, atol=atol,
                         events=events, dense_output=dense, jac=complex_step_jacobian(rhs))
    except (FloatingPointError, ArithmeticError, np.linalg.LinAlgError) as err:
        return _Failure(str(err))
    except ValueError as err:
        if rhs.last is None or np.all(np.isfinite(rhs.last)):
            raise  # a ValueError on finite balances is a bug, not an integrator failure
        return _Failure(f"the balances became non-finite ({err})")


@dataclass
class _Failure:
    message: str
    status: int = -1
    success: bool = False
    t: object = None
    y: object = None
    sol: object = None
    t_events: object = None


def stop_reason(case, sol) -> tuple[Status, Reason, str]:
    """Status, reason code and message of one integration."""
    if isinstance(sol, _Failure):
        return Status.FAILED, Reason.INTEGRATOR_ERROR, f"integrator error: {sol.message}"
    if sol.status == 1:
        z = sol.t[-1]
        if sol.t_events[0].size:
            return (Status.STOPPED, Reason.PRESSURE_FLOOR,
                    f"pressure fell to {case.numerics.min_pressure:.4g} Pa at z = {z:.4g} m")
        return Status.STOPPED, Reason.TEMPERATURE_CEILING, (
            f"temperature passed the ceiling {case.numerics.temperature_ceiling:.1f} K at z = {z:.4g} m (runaway?)")
    if sol.status != 0:
        return Status.FAILED, Reason.INTEGRATOR_FAILED, f"integrator failed at z = {sol.t[-1]:.4g} m: {sol.message}"
    return Status.OK, Reason.INTEGRATED, "integrated to the tube outlet"


def shoot_countercurrent(case, guess: float | None = None, integrator=None, tc_index: int | None = None):
    """Counter-current coolant enters at z = L: find its outlet temperature at z = 0 such that the
    integrated coolant temperature at z = L equals the inlet value. The residual is nearly linear in the
    guess, so the secant method from ``guess`` usually converges in 3-4 integrations; bracketing plus
    Brent's method is the fallback. ``integrator(case, tc0, dense)`` and ``tc_index`` (the row of Tc in its
    state) default to the axial model's (the radial model passes its own)."""
    integrator = integrate if integrator is None else integrator
    i_tc = StateLayout.of(case).index("Tc") if tc_index is None else tc_index
    tc_in = case.coolant.temperature
    # the shooting passes need no tighter tolerance than 1e-8; the final pass uses the case's own
    shooting = replace(case, numerics=replace(case.numerics, rtol=max(case.numerics.rtol, 1e-8)))

    def residual(tc0):
        with np.errstate(over="ignore", invalid="ignore"):  # a wild probe fails quietly and returns NaN
            sol = integrator(shooting, tc0, dense=False)
        if isinstance(sol, _Failure) or sol.status != 0:
            return np.nan
        return sol.y[i_tc, -1] - tc_in

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



def simulate(case, checks: bool = True, coolant_guess: float | None = None, points=(),
             grid: int = SUMMARY_POINTS) -> SimulationResult:
    """Simulate one case. ``checks`` adds the validity and safety findings (which re-simulate for the
    runaway sensitivities). ``coolant_guess``: a starting guess of the counter-current coolant outlet
    temperature [K] (for re-simulations of a nearby case). ``points``: axial positions [m] the profile
    columns hold exactly (from the dense solution; thermocouples of a kinetics fit). ``grid``: points of the
    summary's grid (a kinetics fit, which reads only profiles and outlet values, takes PROFILE_POINTS)."""
    t0 = time.perf_counter()
    tc_start = None
    if case.coolant.kind.enters_at == "outlet":
        tc_start, why = shoot_countercurrent(case, coolant_guess)
        if tc_start is None:
            sol = integrate(case, case.coolant.temperature)
            return build_result(case, sol, Status.FAILED, Reason.SHOOTING_FAILED,
                                f"counter-current shooting failed: {why}", t0)
    sol = integrate(case, tc_start)
    status, code, reason = stop_reason(case, sol)
    result = build_result(case, sol, status, code, reason, t0, points, grid)
    return add_checks(case, result) if checks else result


def add_checks(case, result: SimulationResult) -> SimulationResult:
    """The validity and safety findings of a simulated case, added to its result (none without a summary:
    nothing was integrated); their time in ``timings["checks_s"]``."""
    if result.summary:
        t1 = time.perf_counter()
        result.findings = run_checks(case, result, partial(simulate, checks=False))
        result.timings["checks_s"] = time.perf_counter() - t1
    return result
