"""The two-dimensional pseudo-homogeneous tube: axial convection (plug flow, a flat velocity profile), radial
heat conduction with lambda_er, radial mass dispersion with D_er, a wall coefficient at r = R and symmetry at
the axis (Froment and Bischoff, Chemical Reactor Analysis and Design, 2nd ed., 1990, the fixed-bed chapter).

The radius is discretised by orthogonal collocation in its weak form (models.radial_grid): n interior nodes
and the wall node carry the species flows F_ij (the flow the whole tube would have at node j's flux density)
and the temperature T_j. With w_j the quadrature weights, K the weak-Laplacian matrix, A_c the cross-section,
d_t the tube diameter, u_s the superficial velocity and C_j = sum_i F_ij cp_i(T_j):

    w_j dF_ij/dz = w_j S_ij - D_er/(u_s R^2) (K F_i)_j
    w_j C_j dT_j/dz = w_j G_j - pi lambda_er (K T)_j - [j = wall] pi d_t U_w (T_wall - Tc)
                      + sum_i (h_i(T_j) - h_i(T_mean)) D_er/(u_s R^2) (K F_i)_j

S_ij and G_j are the species sources and the heat released of the axial model (balances.reaction_sources, the
same rate laws) at node j. The dispersive flux is Fick's law on the mole fraction at a radially uniform total
flux (j_i = -D_er/u_s dn_i/dr); the last term is the enthalpy the dispersing species carry, written so that
the total enthalpy flow is conserved exactly. U_w is alpha_w in series with the wall and the coolant side
(balances.radial_transport). Pressure, coolant temperature, the heat to the coolant and the residence time
stay one-dimensional, from the cross-section mean state: the mean flows sum_j w_j F_ij and the mixing-cup
temperature sum_j w_j C_j T_j / sum_j w_j C_j.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace

import numpy as np

from .backend import NUMPY
from .balances import (
    coolant_gradient,
    local_properties,
    pressure_gradient,
    radial_transport,
    reaction_sources,
    residence_gradient,
)
from .outcomes import Reason, Status
from .radial_grid import radial_grid
from .simulator import run_ivp, shoot_countercurrent, stop_events, stop_reason
from .state import StateLayout
from .summary import summarise

MAP_POINTS = 11  # evenly spaced radii of the reported T(z, r) and hot-spot profile (interpolated exactly)


@dataclass(frozen=True)
class RadialLayout:
    """y = [F_1 (nodes) .. F_s (nodes), T (nodes), P, Tc, Q, tau]; nodes = n interior + the wall."""

    species: int
    nodes: int

    @property
    def size(self) -> int:
        return (self.species + 1) * self.nodes + 4

    def flows(self, y):
        return y[: self.species * self.nodes].reshape(self.species, self.nodes, *y.shape[1:])

    def temperatures(self, y):
        return y[self.species * self.nodes: (self.species + 1) * self.nodes]

    def tail_index(self, state: str) -> int:
        return (self.species + 1) * self.nodes + ("P", "Tc", "Q", "tau").index(state)


def _points(case, points):
    if points is None:
        points = case.radial.points if case.radial is not None else 6
    return radial_grid(int(points))


def radial_rhs(case, grid):
    """f(z, y) of the radial model (trailing axes of y broadcast, as for the axial model)."""
    layout = RadialLayout(len(case.species), grid.n + 1)
    w, K = grid.mean, grid.stiffness
    tube, mode = case.tube, case.coolant.kind
    radius = tube.inner_diameter / 2.0
    i_p, i_tc = layout.tail_index("P"), layout.tail_index("Tc")

    def rhs(z, y):
        y2 = y if y.ndim > 1 else y[:, None]  # trailing axes: samples, the complex step's columns
        extra = y2.shape[1:]
        wj = w.reshape(-1, *([1] * len(extra)))
        F = layout.flows(y2)  # (species, nodes, ...)
        F = np.where(F.real < 0.0, 0.0 * F, F)
        T = layout.temperatures(y2)  # (nodes, ...)
        P, Tc = y2[i_p], y2[i_tc]
        local, src, gen = reaction_sources(NUMPY, case, list(F), T, P[None])
        C = local.cp_molar_flow
        mean_F, t_mix = cross_section_mean(w, F, T, C)
        mean = local_properties(NUMPY, case, list(mean_F), t_mix, P, compositions=False)
        tr = radial_transport(NUMPY, case, mean)
        disp = tr.dispersion / (mean.mass_flow / (tube.area * mean.density) * radius**2)  # 1/m
        spread = disp * over_nodes(K, F, 1)  # (species, nodes, ...)
        dF = -spread / wj
        for i, s_i in enumerate(src):
            dF[i] += s_i
        to_coolant = math.pi * tube.inner_diameter * tr.wall_u * (T[-1] - Tc)  # W/m per tube
        if mode.holds_temperature:
            dT = 0.0 * T
            dQ = tube.count * over_nodes(w, np.broadcast_to(gen, T.shape), 0)
        else:
            conduct = math.pi * tr.lambda_er * over_nodes(K, T, 0)
            conduct[-1] = conduct[-1] + to_coolant
            both = np.concatenate([T, t_mix[None]])  # one enthalpy call per species for nodes and mean
            h = np.stack([sp.enthalpy(NUMPY, both) for sp in case.species])  # (species, nodes + 1, ...)
            carried = np.sum((h[:, :-1] - h[:, -1:]) * spread, axis=0)
            dT = (gen + (carried - conduct) / wj) / C
            dQ = tube.count * to_coolant
        ones = np.ones_like(Tc)
        out = np.concatenate([dF.reshape(-1, *extra), dT, [
            pressure_gradient(NUMPY, case, mean) * ones, coolant_gradient(case, to_coolant, Tc) * ones,
            dQ * ones, residence_gradient(case, mean) * ones]]).reshape(y.shape)
        rhs.last = out
        return out

    rhs.last = None
    rhs.layout = layout
    return rhs


def radial_initial_state(case, layout: RadialLayout, coolant_start=None, samples: int | None = None) -> np.ndarray:
    """The flat inlet: every node at the feed state (the axial model's inlet, models.state); shape (size,) or
    (size, samples) for a case carrying arrays of samples."""
    y1 = StateLayout.of(case).initial(case, coolant_start, samples)
    n, s = layout.nodes, layout.species
    return np.concatenate([np.repeat(y1[:s], n, axis=0), np.repeat(y1[s:s + 1], n, axis=0), y1[s + 1:s + 5]])


def integrate_radial(case, grid, coolant_start=None, dense=True):
    """solve_ivp of the radial model with the case's method and tolerances (models.simulator.run_ivp)."""
    rhs = radial_rhs(case, grid)
    layout = rhs.layout
    events = stop_events(case, lambda y: y[layout.tail_index("P")], lambda y: np.max(layout.temperatures(y)))
    return run_ivp(case, rhs, radial_initial_state(case, layout, coolant_start), events, dense)


@dataclass
class RadialResult:
    """Typed outcome of one two-dimensional simulation. ``columns``: axial profiles (centre line, mixing-cup
    mean, wall, coolant, pressure, conversion; SI, unit in the name). ``radius_m`` and ``temperature_map_K``
    (axial points x radial points, the axis first and the wall last) give T(z, r). ``summary`` holds the
    figures of the mean state (as the axial model's summary) and the radial figures."""

    status: Status
    reason: str
    reason_code: Reason
    points: int
    summary: dict = field(default_factory=dict)
    columns: dict = field(default_factory=dict)
    radius_m: np.ndarray | None = None
    temperature_map_K: np.ndarray | None = None
    hot_spot_profile: dict = field(default_factory=dict)  # radius_m, T_K at the centre-line hot spot
    timings: dict = field(default_factory=dict)

    @property
    def ok(self) -> bool:
        return self.status == Status.OK


def over_nodes(M, a, axis: int):
    """M (weights (nodes,) or a matrix (nodes, nodes)) applied along the node axis ``axis`` of ``a``; the
    result keeps a's other axes in place. A batched matrix product when one axis follows the nodes (one
    state or one batch: the fast case), tensordot otherwise (the complex step's columns of a batch)."""
    if a.ndim - axis == 2:
        return M @ a
    out = np.tensordot(M, a, axes=(M.ndim - 1, axis))
    return np.moveaxis(out, 0, axis) if M.ndim == 2 else out


def cross_section_mean(w, F, T, C):
    """The cross-section mean flows sum_j w_j F_ij and the mixing-cup temperature sum_j w_j C_j T_j /
    sum_j w_j C_j (C_j = sum_i F_ij cp_i(T_j)): F is (species, nodes, ...), T and C (nodes, ...)."""
    return over_nodes(w, F, 1), over_nodes(w, C * T, 0) / over_nodes(w, C, 0)


def mean_state(case, layout, grid, y):
    """The axial model's state (models.state) of the cross-section mean: mean flows, mixing-cup T; y may carry
    any trailing axes (points, samples)."""
    if y.ndim > 2:
        flat = mean_state(case, layout, grid, y.reshape(y.shape[0], -1))
        return flat.reshape(flat.shape[0], *y.shape[1:])
    F = layout.flows(y)
    T = layout.temperatures(y)
    s = StateLayout.of(case)
    out = np.empty((s.size, *y.shape[1:]))
    local = local_properties(NUMPY, case, list(F), T, y[layout.tail_index("P")][None])
    out[s.flows], out[s.index("T")] = cross_section_mean(grid.mean, F, T, local.cp_molar_flow)
    for state in ("P", "Tc", "Q", "tau"):
        out[s.index(state)] = y[layout.tail_index(state)]
    return out


def inlet_transport(case):
    """lambda_er, alpha_w, D_er and the wall coefficient (balances.RadialTransport) at the feed state."""
    feed = local_properties(NUMPY, case, [f / case.tube.count for f in case.feed.molar_flows],
                            case.feed.temperature, case.feed.pressure)
    return radial_transport(NUMPY, case, feed)


def simulate_radial(case, points: int | None = None, coolant_guess: float | None = None) -> RadialResult:
    """Simulate the case with the two-dimensional model (``points`` interior radial nodes; default
    [radial] points). Never raises for a physical failure: the status and reason say what happened."""
    from scipy.optimize import minimize_scalar

    t0 = time.perf_counter()
    if case.radial is None:
        raise ValueError(f"{case.source}: the case has no [radial] table (the data of the two-dimensional model)")
    grid = _points(case, points)
    layout = RadialLayout(len(case.species), grid.n + 1)
    inlet = inlet_transport(case)
    if case.coolant.kind.exchanges_heat and not (np.isfinite(inlet.wall_u) and inlet.wall_u > 0):
        return RadialResult(Status.FAILED, f"the given heat_transfer.overall is above what radial conduction can "
                            f"carry (8 lambda_er/d_t = {8 * inlet.lambda_er / case.tube.inner_diameter:.4g} "
                            "W/(m^2 K)): no positive wall coefficient makes the 2-D model consistent with it",
                            Reason.RADIAL_DATA, grid.n, timings={"simulate_s": time.perf_counter() - t0})
    tc_start = None
    if case.coolant.kind.enters_at == "outlet":
        tc_start, why = shoot_countercurrent(
            case, coolant_guess, integrator=lambda c, tc, dense: integrate_radial(c, grid, tc, dense),
            tc_index=layout.tail_index("Tc"))
        if tc_start is None:
            return RadialResult(Status.FAILED, f"counter-current shooting failed: {why}", Reason.SHOOTING_FAILED,
                                grid.n, timings={"simulate_s": time.perf_counter() - t0})
    sol = integrate_radial(case, grid, tc_start)
    status, code, reason = stop_reason(case, sol)
    result = RadialResult(status, reason, code, grid.n)
    if getattr(sol, "t", None) is None or len(sol.t) < 2 or sol.sol is None:
        result.timings["simulate_s"] = time.perf_counter() - t0
        return result
    z_end = float(sol.t[-1])
    z = np.union1d(np.linspace(0.0, z_end, 2001), sol.t)
    y = sol.sol(z)
    y[:, -1] = sol.y[:, -1]
    T_nodes = layout.temperatures(y)  # (nodes, z)

    def centre(zz):
        return float(grid.centre @ layout.temperatures(sol.sol(zz)))

    t_centre = grid.centre @ T_nodes
    i = int(np.argmax(t_centre))
    z_hot = float(z[i])
    if 0 < i < z.size - 1:
        best = minimize_scalar(lambda x: -centre(x), bounds=(z[i - 1], z[i + 1]), method="bounded",
                               options={"xatol": 1e-10 * max(z_end, 1.0)})
        if best.success and -best.fun >= t_centre[i]:
            z_hot = float(best.x)
    mean_y = mean_state(case, layout, grid, y)
    summary = summarise(case, z, mean_y, mean_state(case, layout, grid, sol.y[:, -1:])[:, 0])
    radius = case.tube.inner_diameter / 2.0
    x = np.linspace(0.0, 1.0, MAP_POINTS)
    to_x = grid.interpolation(x**2)  # the radial polynomial on evenly spaced radii, the axis first
    t_map = (to_x @ T_nodes).T  # (z, radial points)
    hot_profile = to_x @ layout.temperatures(sol.sol(z_hot))
    summary.update({
        "status": status, "reason": reason, "reason_code": code, "radial_points": grid.n,
        "mean_max_temperature_K": summary["max_temperature_K"],
        "centre_hot_spot_K": max(float(np.max(t_centre)), float(hot_profile[0])),
        "centre_hot_spot_position_m": z_hot,
        "max_temperature_K": float(max(np.max(t_map), np.max(hot_profile))),
        "hot_spot_radial_difference_K": float(hot_profile[0] - hot_profile[-1]),
        "max_wall_temperature_K": float(np.max(T_nodes[-1])),
    })
    s = StateLayout.of(case)
    pick = np.unique(np.concatenate([np.searchsorted(z, np.linspace(0.0, z_end, 201)).clip(0, z.size - 1),
                                     [int(np.argmin(np.abs(z - z_hot)))]]))
    key = case.index(case.key_reactant)
    result.columns = {
        "z_m": z[pick], "T_centre_K": t_centre[pick], "T_mean_K": mean_y[s.index("T"), pick],
        "T_wall_K": T_nodes[-1, pick], "Tc_K": y[layout.tail_index("Tc"), pick],
        "P_Pa": y[layout.tail_index("P"), pick],
        "conversion": 1.0 - mean_y[key, pick] * case.tube.count / case.feed.molar_flows[key],
    }
    result.summary = summary
    result.radius_m = x * radius
    result.temperature_map_K = t_map[pick]
    result.hot_spot_profile = {"radius_m": x * radius, "T_K": hot_profile, "z_m": z_hot}
    result.timings["simulate_s"] = time.perf_counter() - t0
    return result


def lumped_case(case):
    """The case for the axial model with the bed-side coefficient lumped from the radial data
    (heat_transfer.inside = "radial_lumped"): the 1-D model consistent with the 2-D one. A case with
    heat_transfer.overall given is already consistent (the 2-D wall coefficient is derived from it)."""
    ht = case.heat_transfer
    if not case.coolant.kind.exchanges_heat or ht.overall is not None or ht.inside == "radial_lumped":
        return case
    return replace(case, heat_transfer=replace(ht, inside="radial_lumped"))


@dataclass
class RadialCheck:
    """The 2-D model beside the 1-D one: ``result`` (2-D), ``one_d`` (the case as written), ``lumped`` (the 1-D
    model with the bed-side coefficient lumped from the radial data; None when the case already is that
    model) and ``grid`` (the 2-D hot spot on a doubled radial grid; None when not asked)."""

    result: RadialResult
    one_d: object  # models.results.SimulationResult
    lumped: object | None
    grid: RadialResult | None
    transport: dict  # lambda_er, alpha_w, dispersion, wall_u at the inlet

    def figures(self) -> dict:
        """The comparison in one flat dict (SI, unit in the name; differences end in _difference_K)."""
        s = self.result.summary
        hot = s.get("centre_hot_spot_K")
        out = {"radial_points": self.result.points, "status_2d": self.result.status,
               "reason_2d": self.result.reason, "centre_hot_spot_K": hot,
               "centre_hot_spot_position_m": s.get("centre_hot_spot_position_m"),
               "hot_spot_radial_difference_K": s.get("hot_spot_radial_difference_K"),
               "one_d_hot_spot_K": self.one_d.summary.get("max_temperature_K"),
               **{f"inlet_{k}": v for k, v in self.transport.items()}}
        out["one_d_difference_K"] = None if hot is None or out["one_d_hot_spot_K"] is None else (
            hot - out["one_d_hot_spot_K"])
        if self.lumped is not None:
            out["lumped_hot_spot_K"] = self.lumped.summary.get("max_temperature_K")
            out["lumped_difference_K"] = (None if hot is None or out["lumped_hot_spot_K"] is None else
                                          hot - out["lumped_hot_spot_K"])
        if self.grid is not None:
            other = self.grid.summary.get("centre_hot_spot_K")
            out["grid_points"] = self.grid.points
            out["grid_difference_K"] = None if hot is None or other is None else other - hot
        return out


def radial_check(case, points: int | None = None, grid_check: bool = True, one_d=None) -> RadialCheck:
    """Simulate the case in 2-D and in 1-D (as written and, when different, with the lumped coefficient);
    ``grid_check`` repeats the 2-D run on twice the radial points. ``one_d``: a 1-D result already computed."""
    from .simulator import simulate

    result = simulate_radial(case, points)
    if one_d is None:
        one_d = simulate(case, checks=False)
    lumped = lumped_case(case)
    lumped_result = simulate(lumped, checks=False) if lumped is not case else None
    grid = simulate_radial(case, 2 * result.points) if grid_check and result.summary else None
    t = inlet_transport(case)
    transport = {"lambda_er_W_m_K": float(t.lambda_er), "alpha_w_W_m2_K": float(t.alpha_w),
                 "dispersion_m2_s": float(t.dispersion), "wall_u_W_m2_K": float(t.wall_u)}
    return RadialCheck(result, one_d, lumped_result, grid, transport)
