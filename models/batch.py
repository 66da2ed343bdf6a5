"""Many samples of one case in one integration: the states of all samples are stacked, the balances are
evaluated once for all of them (numpy broadcasting), and the Jacobian is block-diagonal and sparse
(one block per sample, by the complex step). scipy's BDF with a sparse LU then integrates them together.

A sample that passes a trap temperature leaves the batch (its steep runaway would set tiny steps for all)
and is simulated on its own; the others go on from where they are. Counter-current coolant needs a
shooting per sample and is not batched (the screening falls back to one-at-a-time simulation). The same
integration carries the axial model (axial_model) or the two-dimensional one (radial_model).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, replace

import numpy as np
from scipy.integrate import BDF, solve_ivp
from scipy.sparse import csc_matrix
from scipy.sparse.linalg import splu

from .limits import LIMITS
from .outcomes import Reason, Status
from .parameters import apply
from .results import PROFILE_POINTS
from .simulator import complex_step_columns, simulate, state_rhs, stop_events
from .state import StateLayout
from .summary import outlet_figures, pointwise_maxima, profile_columns

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


def batch_rhs(physics, ns: int, n: int):
    """The balances ``physics(z, y)`` (y of shape (ns, samples)) of ``n`` samples on one flat state vector.
    The vector is sample-major (sample 0's states, then sample 1's, ...) so that the Jacobian is
    block-diagonal with contiguous blocks."""

    def rhs(z, y):
        return physics(z, y.reshape(n, ns).T).T.ravel()

    rhs.physics = physics
    return rhs


def block_jacobian(rhs, ns: int, n: int):
    """The sparse block-diagonal Jacobian of ``batch_rhs``, one complex-step block per sample."""
    i, kk, s = np.meshgrid(np.arange(ns), np.arange(ns), np.arange(n), indexing="ij")
    rows = (s * ns + i).ravel()
    cols = (s * ns + kk).ravel()

    def jac(z, y):
        d = complex_step_columns(rhs.physics, z, y.reshape(n, ns).T)  # (state, component, sample)
        return csc_matrix((d.ravel(), (rows, cols)), shape=(ns * n, ns * n))

    return jac


@dataclass(frozen=True)
class BatchModel:
    """What the batch integration needs of a model: the axial one (axial_model) or the radial one
    (radial_model)."""

    size: int  # states per sample
    physics: object  # case -> f(z, y) for y of shape (size, samples)
    initial: object  # (case, samples) -> (size, samples)
    hottest: object  # y (size, samples) -> its largest temperature per sample (the trap)
    axial: object  # (case, Y (size, samples, points)) -> the axial model's state of Y (models.state) and
    #                the largest temperature per point (the hot spot: the fluid's, or the 2-D model's)
    single: object  # case -> the one-sample result (SimulationResult or models.radial.RadialResult)


def axial_model(base) -> BatchModel:
    """The axial model (models.simulator.state_rhs); its state is already the axial state."""
    layout = StateLayout.of(base)
    i_t = layout.index("T")
    return BatchModel(layout.size, state_rhs, lambda case, n: layout.initial(case, samples=n),
                      lambda y: y[i_t], lambda case, Y: (Y, Y[i_t]), lambda case: simulate(case, checks=False))


def radial_model(base, points: int | None = None) -> BatchModel:
    """The two-dimensional model (models.radial) on ``points`` radial nodes (default [radial] points): its
    axial state is the cross-section mean, its hot spot the largest node or axis temperature."""
    from .radial import RadialLayout, mean_state, radial_initial_state, radial_rhs, simulate_radial
    from .radial_grid import radial_grid

    grid = radial_grid(points or base.radial.points)
    layout = RadialLayout(len(base.species), grid.n + 1)

    def axial(case, Y):
        T = layout.temperatures(Y)  # (nodes, samples, points)
        return mean_state(case, layout, grid, Y), np.maximum(np.max(T, axis=0), np.tensordot(grid.centre, T, 1))

    return BatchModel(layout.size, lambda case: radial_rhs(case, grid),
                      lambda case, n: radial_initial_state(case, layout, samples=n),
                      lambda y: np.max(layout.temperatures(y), axis=0), axial,
                      lambda case: simulate_radial(case, grid.n))


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


def solve_stacked(rhs, span, y0, atol, rtol: float, events=(), first_step=None):
    """solve_ivp of samples stacked sample after sample: ``y0`` and ``atol`` are (state, sample) arrays,
    ``rhs`` a batch_rhs; the block BDF and the block complex-step Jacobian, dense output. Raises as solve_ivp."""
    ns, m = y0.shape
    return solve_ivp(rhs, span, y0.T.ravel(), method=block_bdf(ns), jac=block_jacobian(rhs, ns, m), rtol=rtol,
                     atol=atol.T.ravel(), dense_output=True, events=list(events), first_step=first_step)


def simulate_batch(base, values: dict, n: int, trap: float | None = None, model: BatchModel | None = None
                   ) -> BatchResult:
    """Integrate ``n`` samples of ``base`` with parameters ``values`` (path -> array of n, see
    models.parameters) together, with the axial model or the given ``model`` (radial_model). A sample whose
    temperature passes ``trap`` [K] is taken out of the batch (a steep runaway would dictate tiny steps to
    all) and simulated on its own; so are all samples if the batch integration fails. Results equal
    one-at-a-time simulation within the integrator tolerance and the GRID's resolution of the hot spot."""
    t0 = time.perf_counter()
    model = model or axial_model(base)
    layout = StateLayout.of(base)
    ns = model.size
    num = base.numerics
    trap = num.temperature_ceiling if trap is None else min(trap, num.temperature_ceiling)
    length = base.tube.length
    case = apply(base, values)
    y = model.initial(case, n)
    atol_all = num.atol * np.maximum(np.abs(y), 1.0)
    y1, hot = model.axial(case, y[:, :, None])
    maxima = pointwise_maxima(case, layout.get(y1, "T").T, layout.get(y1, "Tc").T)  # the inlet, until a segment
    fluid_max = maxima["max_temperature_K"].copy()  # of the axial (or mean) temperature: locates the hot spot
    maxima["max_temperature_K"] = np.array(hot[:, 0], dtype=float)  # a copy: hot may be a view of y
    pos = np.zeros(n)
    end = np.full((ns, n), np.nan)
    handover = np.zeros(n, dtype=bool)
    active = np.arange(n)
    z0 = 0.0
    first_step = None  # after a hand-over, restart with the last step size instead of a tiny first step
    while active.size:
        sub = apply(base, {p: (v[active] if np.ndim(v) else v) for p, v in values.items()})
        m = active.size
        rhs = batch_rhs(model.physics(sub), ns, m)

        def passed_trap(z, yy, m=m):
            return trap - np.max(model.hottest(yy.reshape(m, ns).T))

        passed_trap.terminal, passed_trap.direction = True, -1
        try:
            sol = solve_stacked(rhs, (z0, length), y[:, active], atol_all[:, active], num.rtol, [passed_trap],
                                first_step)
        except (ValueError, ArithmeticError, np.linalg.LinAlgError):
            sol = None
        if sol is None or sol.status == -1:
            handover[active] = True
            break
        z_end = float(sol.t[-1])
        grid = np.linspace(z0, z_end, max(int(GRID * (z_end - z0) / length), 3))
        Yg = np.moveaxis(sol.sol(grid).reshape(m, ns, grid.size), 1, 0)  # (state, sample, grid)
        ya, hottest = model.axial(sub, Yg)
        T, Tc = layout.get(ya, "T").T, layout.get(ya, "Tc").T  # (grid, sample)
        i_max = np.argmax(T, axis=0)
        better = T[i_max, np.arange(m)] > fluid_max[active]
        pos[active[better]] = grid[i_max][better]
        fluid_max[active] = np.fmax(fluid_max[active], T[i_max, np.arange(m)])
        for name, value in pointwise_maxima(sub, T, Tc).items():
            if name == "max_temperature_K":
                value = np.max(hottest, axis=1)  # (sample, grid): the hot spot of the model
            maxima[name][active] = np.fmax(maxima[name][active], value)
        last = sol.y[:, -1].reshape(m, ns).T
        y[:, active] = last
        if sol.status == 0:
            end[:, active] = last
            break
        # hand over, with the sample that reached the trap, those close behind it: each hand-over restarts
        # the batch integration, and a sample this hot is likely to reach the trap soon
        over = model.hottest(last) >= trap - TRAP_BAND
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
    with np.errstate(all="ignore"):  # samples handed over carry zeros here; their figures are replaced below
        y_in, _ = model.axial(case, model.initial(case, n)[:, :, None])
        y_out, _ = model.axial(case, np.nan_to_num(end)[:, :, None])
    figures = outlet_figures(case, y_in[..., 0], y_out[..., 0], maxima, pos)
    outputs = {key: np.array(np.broadcast_to(figures[key], (n,)), dtype=float) for key in OUTPUTS if key in figures}
    censored = {key: v.copy() for key, v in outputs.items()}
    for j in np.flatnonzero(handover):
        single = model.single(apply(base, {p: (v[j] if np.ndim(v) else v) for p, v in values.items()}))
        status[j], reason[j], codes[j] = single.status, single.reason, single.reason_code
        for target, flag in ((outputs, False), (censored, True)):
            for key, val in single_outputs(single, flag).items():
                if key in target:
                    target[key][j] = val
    return BatchResult(status, reason, outputs, time.perf_counter() - t0, censored, int(handover.sum()), codes)


@dataclass
class Profiles:
    """The axial profiles of one case from an integration shared with other cases (``simulate_profiles``):
    the part of a SimulationResult that a kinetics fit reads (no summary, no checks)."""

    columns: dict  # as SimulationResult.columns: "z_m", the state columns (flows of the whole reactor), ...
    status: Status = Status.OK
    reason: str = "integrated to the tube outlet (with other cases)"

    @property
    def ok(self) -> bool:
        return self.status == Status.OK


def sample_values(case) -> dict:
    """The values of ``case`` at the paths that the balances take as arrays of samples (models.parameters):
    feed temperature, pressure and flows, coolant temperature and mass flow (those set)."""
    values = {"feed.temperature": case.feed.temperature, "feed.pressure": case.feed.pressure,
              **{f"feed.molar_flows.{s}": f for s, f in zip(case.names, case.feed.molar_flows)}}
    for key in ("temperature", "mass_flow"):
        if getattr(case.coolant, key) is not None:
            values[f"coolant.{key}"] = getattr(case.coolant, key)
    return values


def sample_groups(cases) -> list[list[int]]:
    """The cases (by position) in groups whose members differ only in ``sample_values``: the cases with
    those values set to zero (and the raw TOML tables aside, which keep the overrides as text) are equal, so
    that each member is the group's first case with the member's sample values set. One integration can
    carry a group. A field derived from a sample value at loading that is not one itself keeps the cases
    apart (never together wrongly). The text of the zeroed case sorts the cases into buckets first, so that
    many groups do not cost a comparison of every pair."""
    buckets: dict[str, list] = {}
    groups = []
    for i, case in enumerate(cases):
        zeroed = replace(apply(case, dict.fromkeys(sample_values(case), 0.0)), raw={})
        bucket = buckets.setdefault(repr(zeroed), [])
        for first, members in bucket:
            if _equal(first, zeroed):
                members.append(i)
                break
        else:
            bucket.append((zeroed, [i]))
            groups.append(bucket[-1][1])
    return groups


def _equal(a, b) -> bool:
    try:
        return bool(a == b)
    except ValueError:  # an array among the fields: not comparable as a whole, so kept apart
        return False


def simulate_profiles(cases, rtol: float | None = None, points=(), grid: int = PROFILE_POINTS) -> list:
    """The profiles of many cases: the members of each ``sample_groups`` group integrated together (scipy's
    BDF on the stacked states, block-diagonal Jacobian by the complex step), with the columns of
    SimulationResult on ``grid`` points plus ``points`` [m]. A case alone in its group, counter-current
    coolant (shooting), a group whose integration fails or reaches the temperature ceiling or the pressure
    floor: simulated one at a time (``simulate``, whose result tells why it stopped). ``rtol``: instead of
    the cases' own. Returns per case a ``Profiles`` or a SimulationResult (``ok``, ``reason``, ``columns``)."""
    cases = [c if rtol is None else replace(c, numerics=replace(c.numerics, rtol=rtol)) for c in cases]
    out: list = [None] * len(cases)
    for members in sample_groups(cases):
        first = cases[members[0]]
        if len(members) > 1 and first.coolant.kind.enters_at != "outlet":
            columns = _integrate_group(first, [cases[i] for i in members], points, grid)
            if columns is not None:
                for i, col in zip(members, columns):
                    out[i] = Profiles(col)
                continue
        for i in members:
            out[i] = simulate(cases[i], checks=False, points=points, grid=grid)
    return out


def _integrate_group(first, members, points, grid):
    """The profile columns of ``members`` (cases equal to ``first`` but for their sample values) from one
    integration, or None when it fails or stops (the caller simulates them one at a time)."""
    n = len(members)
    values = [sample_values(c) for c in members]
    arrays = {path: np.array([v[path] for v in values]) for path in values[0]}
    case = apply(first, arrays)
    layout = StateLayout.of(first)
    ns, num, length = layout.size, first.numerics, first.tube.length
    y0 = layout.initial(case, samples=n)
    rhs = batch_rhs(state_rhs(case), ns, n)
    events = stop_events(first, lambda y: np.min(layout.get(y.reshape(n, ns).T, "P")),
                         lambda y: np.max(layout.get(y.reshape(n, ns).T, "T")))
    try:
        with np.errstate(all="ignore"):
            sol = solve_stacked(rhs, (0.0, length), y0, num.atol * np.maximum(np.abs(y0), 1.0), num.rtol, events)
    except (ValueError, ArithmeticError, np.linalg.LinAlgError):
        return None
    if sol.status != 0:  # failed, or an event stopped it short of the outlet
        return None
    z = np.union1d(np.linspace(0.0, length, grid), np.asarray([p for p in points if 0.0 <= p <= length], float))
    Y = sol.sol(z).reshape(n, ns, z.size)
    Y[:, :, -1] = sol.y[:, -1].reshape(n, ns)
    if not np.all(np.isfinite(Y)):
        return None
    return [profile_columns(c, z, Y[k]) for k, c in enumerate(members)]


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


