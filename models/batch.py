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

from .backend import NUMPY
from .balances import axial_derivatives
from .summary import formed_yield_selectivity

TRAP_BAND = 25.0  # K
GRID = 801  # axial points on which the hot spot is located (then refined by a parabola through the maximum)


@dataclass
class BatchResult:
    status: np.ndarray  # "ok" | "stopped" | "failed" per sample
    reason: list
    outputs: dict  # name -> array (NaN where the sample did not reach the outlet)
    seconds: float
    censored: dict = None  # the same, with the values where a stopped sample stopped
    handed_over: int = 0  # samples simulated one at a time (passed the trap, or the batch failed)


def _n_state(case):
    return len(case.species) + 5


def batch_rhs(case, n: int):
    ns = _n_state(case)
    k = len(case.species)

    def rhs(z, y):
        # y is sample-major (sample 0's states, then sample 1's, ...), so that the Jacobian is block-diagonal
        # with contiguous blocks; the physics wants (state, sample): Y is that view
        Y = y.reshape(n, ns).T if y.ndim == 1 else y
        F = np.where(Y[:k].real < 0.0, 0.0 * Y[:k], Y[:k])
        d = axial_derivatives(NUMPY, case, list(F), Y[k], Y[k + 1], Y[k + 2])
        parts = [*d.dF, d.dT, d.dP, d.dTc, d.dQ, d.dtau]
        out = np.array([np.broadcast_to(p, Y.shape[1:]) for p in parts])
        return out.T.ravel() if y.ndim == 1 else out

    return rhs


def block_jacobian(case, rhs, n: int):
    ns = _n_state(case)
    h = 1e-30
    i, kk, s = np.meshgrid(np.arange(ns), np.arange(ns), np.arange(n), indexing="ij")
    rows = (s * ns + i).ravel()
    cols = (s * ns + kk).ravel()

    def jac(z, y):
        Y = y.reshape(n, ns).T
        step = h * np.maximum(1.0, np.abs(Y))
        cols_y = np.repeat(Y[:, None, :].astype(complex), ns, axis=1)  # (state, perturbed component, sample)
        cols_y[np.arange(ns), np.arange(ns), :] += 1j * step
        d = rhs(z, cols_y).imag / step[None, :, :]
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
    from .parameters import apply
    from .simulator import simulate

    t0 = time.perf_counter()
    ns, k = _n_state(base), len(base.species)
    num = base.numerics
    trap = num.temperature_ceiling if trap is None else min(trap, num.temperature_ceiling)
    length = base.tube.length
    case = apply(base, values)
    N = case.tube.count
    y = np.zeros((ns, n))
    for i, f in enumerate(case.feed.molar_flows):
        y[i] = np.broadcast_to(f, (n,)) / N
    y[k] = np.broadcast_to(case.feed.temperature, (n,))
    y[k + 1] = np.broadcast_to(case.feed.pressure, (n,))
    tc = case.coolant.temperature if case.coolant.temperature is not None else case.feed.temperature
    y[k + 2] = np.broadcast_to(tc, (n,))
    atol_all = num.atol * np.maximum(np.abs(y), 1.0)
    hot = y[k].copy()
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
            return trap - np.max(yy.reshape(m, ns)[:, k])

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
        Yg = sol.sol(grid).reshape(m, ns, grid.size)[:, k]
        i_max = np.argmax(Yg, axis=1)
        better = Yg[np.arange(m), i_max] > hot[active]
        hot[active[better]] = Yg[np.arange(m), i_max][better]
        pos[active[better]] = grid[i_max][better]
        last = sol.y[:, -1].reshape(m, ns).T
        y[:, active] = last
        if sol.status == 0:
            end[:, active] = last
            break
        # hand over, with the sample that reached the trap, those close behind it: each hand-over restarts
        # the batch integration, and a sample this hot is likely to reach the trap soon
        over = last[k] >= trap - TRAP_BAND
        handover[active[over]] = True
        active = active[~over]
        if sol.t.size > 2:
            first_step = min(float(sol.t[-2] - sol.t[-3]), 0.5 * (length - z_end)) or None
        z0 = z_end
    # a sharp peak can pass the trap and fall back within one step, unseen by the event: the dense
    # solution shows it, and such a sample is simulated on its own too
    handover |= hot >= trap
    status = np.array(["ok"] * n, dtype=object)
    reason = ["integrated to the tube outlet"] * n
    outputs = summary_arrays(case, np.nan_to_num(end), hot, pos, n)
    censored = {key: v.copy() for key, v in outputs.items()}
    for j in np.flatnonzero(handover):
        single = simulate(apply(base, {p: (v[j] if np.ndim(v) else v) for p, v in values.items()}), checks=False)
        status[j], reason[j] = single.status, single.reason
        for target, flag in ((outputs, False), (censored, True)):
            for key, val in single_outputs(single, flag).items():
                if key in target:
                    target[key][j] = val
    return BatchResult(status, reason, outputs, time.perf_counter() - t0, censored, int(handover.sum()))


def summary_arrays(case, end, hot, pos, n) -> dict:
    """The screening outputs per sample from the outlet state (per tube) and the hot spot."""
    k = len(case.species)
    N = case.tube.count
    key = case.index(case.key_reactant)
    f_in = np.array([np.broadcast_to(f, (n,)) for f in case.feed.molar_flows])
    f_out = end[:k] * N
    converted = f_in[key] - f_out[key]
    out = {
        "max_temperature_K": np.array(hot, dtype=float),
        "max_temperature_position_m": np.array(pos, dtype=float),
        "conversion": converted / f_in[key],
        "pressure_drop_Pa": np.broadcast_to(case.feed.pressure, (n,)) - end[k + 1],
        "outlet_temperature_K": end[k],
        "heat_removed_W": end[k + 3],
    }
    if case.product:
        formed, yld, sel = formed_yield_selectivity(case, case.product, f_in, f_out)
        out["production_rate_mol_s"] = np.array(formed, dtype=float)
        out["product_selectivity"] = np.array(sel, dtype=float)
        out["product_yield"] = np.array(yld, dtype=float)
    return out


OUTPUTS = ("max_temperature_K", "max_temperature_position_m", "conversion", "pressure_drop_Pa",
           "outlet_temperature_K", "heat_removed_W", "production_rate_mol_s", "product_selectivity", "product_yield")


def single_outputs(result, censored: bool = False) -> dict:
    """The same outputs from one SimulationResult: NaN where it did not reach the outlet; with ``censored``,
    a stopped simulation gives its values where it stopped (the hot spot of a runaway is then the ceiling it
    passed, a lower bound)."""
    s = result.summary
    keep = result.ok or (censored and bool(s))
    return {k: (float(s[k]) if keep and k in s else np.nan) for k in OUTPUTS}


