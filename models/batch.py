"""Many samples of one case in one integration: the states of all samples are stacked, the balances are
evaluated once for all of them (numpy broadcasting), and the Jacobian is block-diagonal and sparse
(one block per sample, by the complex step). scipy's BDF with a sparse LU then integrates them together.

A sample that passes a trap temperature leaves the batch (its steep runaway would set tiny steps for all)
and is simulated on its own; the others go on from where they are. Counter-current coolant needs a
shooting per sample and is not batched (the screening falls back to one-at-a-time simulation).
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
from scipy.integrate import BDF, solve_ivp
from scipy.sparse import csc_matrix
from scipy.sparse.linalg import splu

from .limits import LIMITS
from .outcomes import Reason, Status
from .parameters import apply
from .simulator import complex_step_columns, simulate, state_rhs
from .state import StateLayout
from .summary import outlet_figures, pointwise_maxima

TRAP_BAND = 25.0  # K
GRID = 801  # axial points per tube length on which the hot spot and the other pointwise maxima are located


@dataclass
class BatchResult:
    status: np.ndarray  # Status per sample
    reason: list
    outputs: dict  # name -> array (NaN where the sample did not reach the outlet)
    seconds: float
    censored: dict = None  # the same, with the values where a stopped sample stopped
    handed_over: int = 0  # samples simulated one at a time (passed the trap, or the batch failed)
    reason_code: np.ndarray = None  # Reason per sample


def batch_rhs(case, n: int):
    """The balances of ``n`` samples on one flat state vector. The vector is sample-major (sample 0's
    states, then sample 1's, ...) so that the Jacobian is block-diagonal with contiguous blocks; the
    physics (models.simulator.state_rhs) takes the (state, sample) view."""
    ns = StateLayout.of(case).size
    physics = state_rhs(case)

    def rhs(z, y):
        return physics(z, y.reshape(n, ns).T).T.ravel()

    rhs.physics = physics
    return rhs


def block_jacobian(case, rhs, n: int):
    """The sparse block-diagonal Jacobian of ``batch_rhs``, one complex-step block per sample."""
    ns = StateLayout.of(case).size
    i, kk, s = np.meshgrid(np.arange(ns), np.arange(ns), np.arange(n), indexing="ij")
    rows = (s * ns + i).ravel()
    cols = (s * ns + kk).ravel()

    def jac(z, y):
        d = complex_step_columns(rhs.physics, z, y.reshape(n, ns).T)  # (state, component, sample)
        return csc_matrix((d.ravel(), (rows, cols)), shape=(ns * n, ns * n))

    return jac


def block_bdf(block: int):
    """scipy's BDF with the Newton matrices I - c J factored block by block (one small dense inverse per
    sample, batched in numpy) instead of by a general sparse LU: the stacked system is block-diagonal."""

    class BlockBDF(BDF):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)

            def lu(A):
                self.nlu += 1
                bsr = A.tobsr(blocksize=(block, block))
                bsr.sort_indices()
                nb = A.shape[0] // block
                if bsr.indices.size == nb and np.array_equal(bsr.indices, np.arange(nb)):
                    return ("blocks", np.linalg.inv(bsr.data))
                return ("sparse", splu(A.tocsc()))  # not block-diagonal after all: the general path

            def solve_lu(LU, b):
                kind, f = LU
                if kind == "blocks":
                    return np.einsum("sij,sj->si", f, b.reshape(-1, block)).reshape(b.shape)
                return f.solve(b)

            self.lu = lu
            self.solve_lu = solve_lu

    return BlockBDF


def simulate_batch(base, values: dict, n: int, trap: float | None = None) -> BatchResult:
    """Integrate ``n`` samples of ``base`` with parameters ``values`` (path -> array of n, see
    models.parameters) together. A sample whose temperature passes ``trap`` [K] is taken out of the batch
    (a steep runaway would dictate tiny steps to all) and simulated on its own with the adaptive simulator;
    so are all samples if the batch integration fails. Results equal one-at-a-time simulation within the
    integrator tolerance."""
    t0 = time.perf_counter()
    layout = StateLayout.of(base)
    ns, i_t = layout.size, layout.index("T")
    num = base.numerics
    trap = num.temperature_ceiling if trap is None else min(trap, num.temperature_ceiling)
    length = base.tube.length
    case = apply(base, values)
    y = layout.initial(case, samples=n)
    atol_all = num.atol * np.maximum(np.abs(y), 1.0)
    i_tc = layout.index("Tc")
    maxima = pointwise_maxima(case, y[i_t][None], y[i_tc][None])  # the inlet, until the first segment
    pos = np.zeros(n)
    end = np.full((ns, n), np.nan)
    handover = np.zeros(n, dtype=bool)
    active = np.arange(n)
    z0 = 0.0
    first_step = None  # after a hand-over, restart with the last step size instead of a tiny first step
    while active.size:
        sub = apply(base, {p: (v[active] if np.ndim(v) else v) for p, v in values.items()})
        m = active.size
        rhs = batch_rhs(sub, m)

        def passed_trap(z, yy, m=m):
            return trap - np.max(yy.reshape(m, ns)[:, i_t])

        passed_trap.terminal, passed_trap.direction = True, -1
        try:
            sol = solve_ivp(rhs, (z0, length), y[:, active].T.ravel(), method=block_bdf(ns),
                            jac=block_jacobian(sub, rhs, m),
                            rtol=num.rtol, atol=atol_all[:, active].T.ravel(), dense_output=True,
                            events=[passed_trap], first_step=first_step)
        except (ValueError, ArithmeticError, np.linalg.LinAlgError):
            sol = None
        if sol is None or sol.status == -1:
            handover[active] = True
            break
        z_end = float(sol.t[-1])
        grid = np.linspace(z0, z_end, max(int(GRID * (z_end - z0) / length), 3))
        Yg = sol.sol(grid).reshape(m, ns, grid.size)
        T, Tc = Yg[:, i_t].T, Yg[:, i_tc].T  # (grid, sample)
        i_max = np.argmax(T, axis=0)
        better = T[i_max, np.arange(m)] > maxima["max_temperature_K"][active]
        pos[active[better]] = grid[i_max][better]
        for name, value in pointwise_maxima(sub, T, Tc).items():
            maxima[name][active] = np.fmax(maxima[name][active], value)
        last = sol.y[:, -1].reshape(m, ns).T
        y[:, active] = last
        if sol.status == 0:
            end[:, active] = last
            break
        # hand over, with the sample that reached the trap, those close behind it: each hand-over restarts
        # the batch integration, and a sample this hot is likely to reach the trap soon
        over = last[i_t] >= trap - TRAP_BAND
        handover[active[over]] = True
        active = active[~over]
        if sol.t.size > 2:
            first_step = min(float(sol.t[-2] - sol.t[-3]), 0.5 * (length - z_end)) or None
        z0 = z_end
    # a sharp peak can pass the trap and fall back within one step, unseen by the event: the dense
    # solution shows it, and such a sample is simulated on its own too
    handover |= maxima["max_temperature_K"] >= trap
    status = np.array([Status.OK] * n, dtype=object)
    codes = np.array([Reason.INTEGRATED] * n, dtype=object)
    reason = ["integrated to the tube outlet"] * n
    figures = outlet_figures(case, layout.initial(case, samples=n), np.nan_to_num(end), maxima, pos)
    outputs = {key: np.array(np.broadcast_to(figures[key], (n,)), dtype=float) for key in OUTPUTS if key in figures}
    censored = {key: v.copy() for key, v in outputs.items()}
    for j in np.flatnonzero(handover):
        single = simulate(apply(base, {p: (v[j] if np.ndim(v) else v) for p, v in values.items()}), checks=False)
        status[j], reason[j], codes[j] = single.status, single.reason, single.reason_code
        for target, flag in ((outputs, False), (censored, True)):
            for key, val in single_outputs(single, flag).items():
                if key in target:
                    target[key][j] = val
    return BatchResult(status, reason, outputs, time.perf_counter() - t0, censored, int(handover.sum()), codes)


_REPORTED = ("max_temperature_K", "max_temperature_position_m", "conversion", "pressure_drop_Pa",
             "outlet_temperature_K", "heat_removed_W", "production_rate_mol_s", "product_selectivity",
             "product_yield")
# every figure a limit bounds is an output, so that screening judges each limit (models.limits)
OUTPUTS = _REPORTED + tuple(dict.fromkeys(row.figure for row in LIMITS.values() if row.figure not in _REPORTED))


def single_outputs(result, censored: bool = False) -> dict:
    """The same outputs from one SimulationResult: NaN where it did not reach the outlet; with ``censored``,
    a stopped simulation gives its values where it stopped (the hot spot of a runaway is then the ceiling it
    passed, a lower bound)."""
    s = result.summary
    keep = result.ok or (censored and bool(s))
    return {k: (float(s[k]) if keep and s.get(k) is not None else np.nan) for k in OUTPUTS}


