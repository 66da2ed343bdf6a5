"""Design optimisation: the façade that builds the collocation model once, adds the goal and the limits,
compiles it for IPOPT, solves, rounds the tube count, verifies against the adaptive integrator, and reports
each limit with its multiplier in objective units per unit of the limit."""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace

import numpy as np
import pyomo.environ as pyo
from tubewright.models.backend import pyomo_backend
from tubewright.models.simulator import simulate
from tubewright.models.state import TAIL
from tubewright.models.summary import stoichiometric_factor
from tubewright.models.thermo import R_GAS
from tubewright.optimizer.design import costs as C
from tubewright.optimizer.design.collocation import build_tube_model, initialise_from_simulation, state_scaling
from tubewright.optimizer.design.spec import DESIGN_FIELDS, DESIGN_KEYS, read_design
from tubewright.optimizer.nlp.bridge import CompiledNLP

DEFAULT_NFE, DEFAULT_NCP, DEFAULT_VERIFY = 40, 3, 0.01

OBJECTIVE_UNITS = {"min_cost": "per_year", "max_selectivity": "", "max_yield": "", "max_productivity": "mol_m3_s",
                   "min_volume": "m3"}
LIMIT_UNITS = {"production_rate": "mol/s", "min_conversion": "-", "min_selectivity": "-", "max_temperature": "K",
               "max_temperature_difference": "K", "max_pressure_drop": "Pa", "min_velocity": "m/s",
               "max_velocity": "m/s", "min_reynolds": "-", "max_reynolds": "-", "min_length_to_diameter": "-",
               "max_length_to_diameter": "-", "max_coolant_outlet_temperature": "K", "runaway_margin": "-"}


def design_case(case, values: dict):
    """The numeric case at the design ``values`` (SI, keys of DESIGN_KEYS)."""
    parts = {"tube": {}, "feed": {}, "coolant": {}}
    for name, v in values.items():
        section, attr = DESIGN_KEYS[name][1].split(".")
        parts[section][attr] = int(round(v)) if name == "tube_count" and abs(v - round(v)) < 1e-9 else v
    return replace(case, tube=replace(case.tube, **parts["tube"]), feed=replace(case.feed, **parts["feed"]),
                   coolant=replace(case.coolant, **parts["coolant"]))


@dataclass
class LimitRow:
    name: str
    value: float
    bound: float
    kind: str  # "min" or "max"
    binding: bool
    multiplier: float  # d objective / d bound
    unit: str

    def as_dict(self):
        return {"limit": self.name, "value": self.value, "bound": self.bound, "kind": self.kind,
                "binding": self.binding, "multiplier_per_unit": self.multiplier, "unit": self.unit}


@dataclass
class OptimizationResult:
    status: str  # "optimal", "infeasible", "failed", "not_optimised"
    reason: str
    goal: str
    objective: float | None
    design: dict = field(default_factory=dict)
    limits: list = field(default_factory=list)
    costs: dict = field(default_factory=dict)
    verification: dict = field(default_factory=dict)
    solver: dict = field(default_factory=dict)
    timings: dict = field(default_factory=dict)
    simulation: object = None  # models SimulationResult at the final design
    notes: list = field(default_factory=list)
    hint: str = ""

    @property
    def ok(self):
        return self.status == "optimal"

    def as_dict(self) -> dict:
        """The report fields (SI, units in the names); JSON-safe after ``jsonsafe.finite``."""
        return {"status": self.status, "reason": self.reason, "goal": self.goal, "objective": self.objective,
                "design": self.design, "limits": [r.as_dict() for r in self.limits], "costs_per_year": self.costs,
                "verification": self.verification, "solver": self.solver, "timings_s": self.timings,
                "notes": self.notes, "hint": self.hint,
                "summary": self.simulation.summary if self.simulation is not None else {}}


class DesignProblem:
    """Build once, solve many: the compiled NLP is kept; parameters (k_ref, E_a, U multiplier, limit values,
    fixed design values) change through ``set_parameter`` and re-solve without recompiling."""

    def __init__(self, case, nfe: int | None = None, ncp: int | None = None, goal: str | None = None):
        self.case = case
        self.spec = read_design(case)
        if goal is not None:
            self.spec = replace(self.spec, goal=goal)
        num = case.raw.get("numerics", {})
        self.nfe = int(nfe or num.get("finite_elements", DEFAULT_NFE))
        self.ncp = int(ncp or num.get("collocation_points", DEFAULT_NCP))
        self.verify_tolerance = float(num.get("verify_tolerance", DEFAULT_VERIFY))
        self.model = None
        self.nlp = None

    # --- building ---------------------------------------------------------------------------------------
    def start_values(self) -> dict:
        values = {k: v.start for k, v in self.spec.free.items()}
        values.update(self.spec.fixed)
        return values

    def build(self, start: dict | None = None, modify=None):
        """Build, initialise from a simulation of the starting design, add goal and limits, compile.
        ``modify(model)`` may change the model (deactivate equations, free profiles) before compilation."""
        t0 = time.perf_counter()
        start_case = design_case(self.case, start or self.start_values())
        sim = simulate(start_case, checks=False)
        if not sim.columns:
            raise RuntimeError(f"the starting design cannot be simulated: {sim.reason}")
        m, pcase = build_tube_model(self.case, self.spec, self.nfe, self.ncp)
        for name, comp in m.design.items():
            if name in self.spec.free:
                comp.set_value(start[name] if start and name in start else self.spec.free[name].start)
        initialise_from_simulation(m, start_case, sim)
        self.model, self.pcase = m, pcase
        self._expressions(m, pcase)
        self._limits(m, pcase)
        if self.case.product:  # the epsilon constraint of Pareto fronts; -1e6 leaves it slack
            m.pareto_eps = pyo.Param(mutable=True, initialize=-1.0e6)
            m.pareto_cut = pyo.Constraint(expr=m.e_selectivity >= m.pareto_eps)
        self._objective(m, pcase)
        if modify is not None:
            modify(m)
        self.nlp = CompiledNLP(m)
        self._scales = state_scaling(m, start_case, sim)
        self.obj_scale = 1.0 / max(abs(pyo.value(m.goal)), 1e-12)
        self.build_s = time.perf_counter() - t0
        return self

    def _expressions(self, m, pcase):
        case = self.case
        key = case.key_reactant
        N = pcase.tube.count
        m.e_key_in = m.F[key, 0.0]
        m.e_key_out = m.F[key, 1.0]
        if case.product:
            p = case.product
            factor = stoichiometric_factor(case, p)
            m.e_production = N * (m.F[p, 1.0] - m.F[p, 0.0])
            m.e_selectivity = factor * (m.F[p, 1.0] - m.F[p, 0.0]) / (m.F[key, 0.0] - m.F[key, 1.0])
            m.e_yield = factor * (m.F[p, 1.0] - m.F[p, 0.0]) / m.F[key, 0.0]
            m.e_key_lost = N * (m.F[key, 0.0] - m.F[key, 1.0] - factor * (m.F[p, 1.0] - m.F[p, 0.0]))
        m.e_conversion = 1.0 - m.F[key, 1.0] / m.F[key, 0.0]
        tube = pcase.tube
        m.e_volume = N * tube.area * tube.length
        m.e_area = N * math.pi * (tube.inner_diameter + 2.0 * tube.wall_thickness) * tube.length
        mass_flow_tube = sum(case.feed.molar_flows[i] * s.molar_mass for i, s in enumerate(case.species)) / N
        if case.phase == "gas":
            vdot_tube = sum(case.feed.molar_flows) / N * R_GAS * pcase.feed.temperature / pcase.feed.pressure
        else:
            vdot_tube = mass_flow_tube / case.feed.density
        m.e_velocity = vdot_tube / tube.area
        dchar = case.bed.particle_diameter if case.bed is not None else tube.inner_diameter
        m.e_reynolds = mass_flow_tube / tube.area * dchar / case.feed.viscosity
        m.e_vdot = N * vdot_tube
        m.e_dp = m.P[0.0] - m.P[1.0]

    def _limits(self, m, pcase):
        lim = self.spec.limits
        case = self.case
        m.limit_value = pyo.Param(list(lim), mutable=True, initialize=lim)
        points = list(m.xi)
        self.limit_components = {}

        def add(name, comp, kind, value_expr):
            m.add_component(f"limit_{name}", comp)
            self.limit_components[name] = (comp, kind, value_expr)

        b = m.limit_value
        if "production_rate" in lim:
            add("production_rate", pyo.Constraint(expr=m.e_production >= b["production_rate"]), "min", m.e_production)
        if "min_conversion" in lim:
            add("min_conversion", pyo.Constraint(expr=m.e_conversion >= b["min_conversion"]), "min", m.e_conversion)
        if "min_selectivity" in lim:
            add("min_selectivity", pyo.Constraint(expr=m.e_selectivity >= b["min_selectivity"]), "min",
                m.e_selectivity)
        if "max_temperature" in lim:
            add("max_temperature", pyo.Constraint(points, rule=lambda m, x: m.T[x] <= b["max_temperature"]), "max",
                lambda: max(pyo.value(m.T[x]) for x in points))
        if "max_temperature_difference" in lim:
            add("max_temperature_difference", pyo.Constraint(
                points, rule=lambda m, x: m.T[x] - m.Tc[x] <= b["max_temperature_difference"]), "max",
                lambda: max(pyo.value(m.T[x] - m.Tc[x]) for x in points))
        if "max_pressure_drop" in lim:
            add("max_pressure_drop", pyo.Constraint(expr=m.e_dp <= b["max_pressure_drop"]), "max", m.e_dp)
        for name, kind, expr in (("min_velocity", "min", m.e_velocity), ("max_velocity", "max", m.e_velocity),
                                 ("min_reynolds", "min", m.e_reynolds), ("max_reynolds", "max", m.e_reynolds)):
            if name in lim:
                add(name, pyo.Constraint(expr=(expr >= b[name]) if kind == "min" else (expr <= b[name])), kind, expr)
        ratio = pcase.tube.length / pcase.tube.inner_diameter
        for name, kind in (("min_length_to_diameter", "min"), ("max_length_to_diameter", "max")):
            if name in lim:
                add(name, pyo.Constraint(expr=(ratio >= b[name]) if kind == "min" else (ratio <= b[name])), kind, ratio)
        if "max_coolant_outlet_temperature" in lim:
            end = 0.0 if case.coolant.kind.enters_at == "outlet" else 1.0
            add("max_coolant_outlet_temperature", pyo.Constraint(expr=m.Tc[end] <= b["max_coolant_outlet_temperature"]),
                "max", m.Tc[end])
        if "runaway_margin" in lim:
            e_max = max(rx.activation_energy for rx in case.reactions)
            def margin(x):  # hot-spot excess over the coolant in units of R Tc^2 / E (Semenov-type bound)
                return (m.T[x] - m.Tc[x]) * e_max / (R_GAS * m.Tc[x] ** 2)

            add("runaway_margin", pyo.Constraint(points, rule=lambda m, x: margin(x) <= b["runaway_margin"]), "max",
                lambda: max(pyo.value(margin(x)) for x in points))

    def cost_parts(self, backend, m_or_values):
        """Annual cost parts through the one cost model (Pyomo expressions or numbers)."""
        case = self.case
        m = m_or_values
        bed = case.bed
        catalyst = m.e_volume * bed.density if bed is not None else 0.0
        coolant = m.design["coolant_flow"] if "coolant_flow" in m.design else 0.0
        lost = m.e_key_lost if case.product else 0.0
        return C.annual_cost(backend, self.spec.costs, area=m.e_area, catalyst_mass=catalyst,
                             inlet_volumetric_flow=m.e_vdot, pressure_drop=m.e_dp, coolant_flow=coolant,
                             key_lost=lost, key_molar_mass=case.species_map[case.key_reactant].molar_mass)

    def _objective(self, m, pcase):
        goal = self.spec.goal
        if goal == "min_cost":
            expr, sense = self.cost_parts(pyomo_backend(), m)["total"], pyo.minimize
        elif goal == "max_selectivity":
            expr, sense = m.e_selectivity, pyo.maximize
        elif goal == "max_yield":
            expr, sense = m.e_yield, pyo.maximize
        elif goal == "max_productivity":
            expr, sense = m.e_production / m.e_volume, pyo.maximize
        else:
            expr, sense = m.e_volume, pyo.minimize
        m.goal = pyo.Objective(expr=expr, sense=sense)

    # --- solving ----------------------------------------------------------------------------------------
    def scaling(self):
        m, s = self.model, self._scales
        factors = {}
        for (sp, x), v in m.F.items():
            factors[id(v)] = 1.0 / s["F"][sp]
            factors[id(m.dF[sp, x])] = 1.0 / s["F"][sp]
        for state in TAIL:
            for x in m.xi:
                factors[id(getattr(m, state)[x])] = 1.0 / s[state]
                factors[id(getattr(m, f"d{state}")[x])] = 1.0 / s[state]
        for name, comp in m.design.items():
            if name in self.spec.free:
                factors[id(comp)] = 1.0 / max(abs(comp.value), 1e-12)
        x_s = np.array([factors.get(id(v), 1.0) for v in self.nlp.variables])
        g_s = np.ones(self.nlp.m)
        row = {id(c): i for i, c in enumerate(self.nlp.constraints)}
        for (sp, _), c in m.ode_F.items():
            g_s[row[id(c)]] = 1.0 / s["F"][sp]
        for (state, _), c in m.ode.items():
            if id(c) in row:
                g_s[row[id(c)]] = 1.0 / s[state]
        for state in ("F", *TAIL):
            disc = getattr(m, f"d{state}_disc_eq")
            for idx, c in disc.items():
                ref = s["F"][idx[0]] if state == "F" else s[state]
                g_s[row[id(c)]] = 1.0 / ref
        feed = self.case.feed.molar_flows
        for sp, c in m.inlet_F.items():
            g_s[row[id(c)]] = 1.0 / max(feed[self.case.index(sp)], 1e-3 * sum(feed))
        for c, ref in ((m.inlet_T, s["T"]), (m.inlet_P, s["P"]), (m.coolant_in, s["Tc"]), (m.inlet_Q, s["Q"]),
                       (m.inlet_tau, s["tau"])):
            if id(c) in row:
                g_s[row[id(c)]] = 1.0 / ref
        for name, (comp, _, _) in self.limit_components.items():
            bound = abs(self.spec.limits[name]) or 1.0
            for c in (comp.values() if comp.is_indexed() else [comp]):
                g_s[row[id(c)]] = 1.0 / bound
        return self.obj_scale, x_s, g_s

    def solve_nlp(self, warm_start=False, options=None):
        # a larger MUMPS pivot tolerance than IPOPT's default (1e-6) avoids failed step computations on the
        # nearly singular KKT systems of counter-current cases (measured on the coil demo)
        opts = {"max_iter": 500, "tol": 1e-7, "acceptable_tol": 1e-5, "mumps_pivtol": 1e-4}
        opts.update(options or {})
        return self.nlp.solve(options=opts, warm_start=warm_start, scaling=self.scaling())

    def design_values(self) -> dict:
        return {name: float(pyo.value(comp)) for name, comp in self.model.design.items()}

    def limit_rows(self, outcome) -> list[LimitRow]:
        rows = []
        index = {id(c): i for i, c in enumerate(self.nlp.constraints)}
        sign = -1.0 if self.spec.goal in ("min_cost", "min_volume") else 1.0  # d f / d bound = -sign_min * lambda
        for name, (comp, kind, value_expr) in self.limit_components.items():
            cons = list(comp.values()) if comp.is_indexed() else [comp]
            lam = sum(outcome.multipliers[index[id(c)]] for c in cons)
            value = value_expr() if callable(value_expr) else float(pyo.value(value_expr))
            bound = float(pyo.value(self.model.limit_value[name]))
            scale = max(abs(bound), 1e-12)
            binding = abs(value - bound) <= 1e-5 * scale + 1e-9 and abs(lam) > 1e-12
            # IPOPT: L = f_min + lambda g; d f_min*/d bound = -lambda. For a maximised goal f = -f_min.
            # An inactive limit costs nothing: its multiplier is reported as 0 (IPOPT leaves ~1e-8 there).
            rows.append(LimitRow(name, value, bound, kind, bool(binding), float(sign * lam) if binding else 0.0,
                                 LIMIT_UNITS[name]))
        return rows

    def verify(self, values) -> tuple[dict, object]:
        """Re-simulate the design with the adaptive integrator and compare the states at the collocation
        points: the largest deviation of T, P (relative) and of each flow (relative to the feed of the key
        reactant)."""
        case = design_case(self.case, values)
        sim = simulate(case)
        m = self.model
        if not sim.columns:
            return {"max_relative_deviation": math.inf, "status": sim.status, "reason": sim.reason}, sim
        z = sim.columns["z_m"]
        L = values["length"]
        n_t = values["tube_count"]
        ref_f = max(case.feed.molar_flows) / n_t
        worst = {"T": 0.0, "P": 0.0, "F": 0.0}
        for x in m.xi:
            zz = x * L
            if zz > z[-1] + 1e-12:
                worst["T"] = math.inf
                break
            for state, col in (("T", "T_K"), ("P", "P_Pa")):
                here = pyo.value(getattr(m, state)[x])
                worst[state] = max(worst[state], abs(here - np.interp(zz, z, sim.columns[col])) / here)
            for s in case.names:
                f_sim = np.interp(zz, z, sim.columns[f"F_{s}_mol_s"]) / n_t
                worst["F"] = max(worst["F"], abs(pyo.value(m.F[s, x]) - f_sim) / ref_f)
        return {"max_relative_deviation": max(worst.values()), "temperature": worst["T"], "pressure": worst["P"],
                "flows": worst["F"], "tolerance": self.verify_tolerance, "status": sim.status}, sim


def optimise(case, nfe=None, ncp=None) -> OptimizationResult:
    """The whole `optimize` verb: solve, round the tube count and re-solve, verify (refining the mesh once
    if needed), and report."""
    t0 = time.perf_counter()
    problem = DesignProblem(case, nfe, ncp)
    spec = problem.spec
    if not spec.has_freedom:
        sim = simulate(design_case(case, problem.start_values()))
        return OptimizationResult("not_optimised", "no design variable is free in [design]: the case was simulated, "
                                  "not optimised", spec.goal, None, simulation=sim)
    notes = []
    problem.build()
    outcome = problem.solve_nlp()
    solves = [outcome]
    if outcome.success and "tube_count" in spec.free and spec.round_tube_count:
        n = problem.model.design["tube_count"]
        rounded = float(max(round(n.value), math.ceil(spec.free["tube_count"].lower)))
        notes.append(f"tube count {n.value:.2f} rounded to {rounded:.0f} and re-solved")
        n.setlb(rounded)
        n.setub(rounded)
        outcome = problem.solve_nlp(warm_start=True)
        solves.append(outcome)
    values = problem.design_values()
    verification, sim = problem.verify(values) if outcome.success else ({}, None)
    if outcome.success and verification["max_relative_deviation"] > problem.verify_tolerance:
        notes.append(f"verification deviation {verification['max_relative_deviation']:.2e} above tolerance "
                     f"{problem.verify_tolerance:g}: mesh refined from {problem.nfe} to {2 * problem.nfe} elements")
        finer = DesignProblem(case, 2 * problem.nfe, problem.ncp)
        finer.build(values)
        if "tube_count" in spec.free and spec.round_tube_count:
            finer.model.design["tube_count"].setlb(values["tube_count"])
            finer.model.design["tube_count"].setub(values["tube_count"])
        outcome = finer.solve_nlp()
        solves.append(outcome)
        problem = finer
        values = problem.design_values()
        verification, sim = problem.verify(values) if outcome.success else ({}, None)
    limits = problem.limit_rows(outcome)
    status = "optimal" if outcome.success else ("infeasible" if outcome.status in (2, -2) else "failed")
    hint = ""
    if not outcome.success:
        violated = [r for r in limits if (r.kind == "max" and r.value > r.bound * (1 + 1e-6) + 1e-9)
                    or (r.kind == "min" and r.value < r.bound * (1 - 1e-6) - 1e-9)]
        if violated:
            worst = max(violated, key=lambda r: abs(r.value - r.bound) / max(abs(r.bound), 1e-12))
            hint = (f"relax limits.{worst.name} (bound {worst.bound:.6g} {worst.unit}, best point found "
                    f"{worst.value:.6g}) or widen the design bounds")
        else:
            at_bound = [r.name for r in limits if abs(r.value - r.bound) <= 1e-4 * max(abs(r.bound), 1e-12)]
            if at_bound:
                hint = (f"the balances cannot be met at the bounds of {', '.join('limits.' + n for n in at_bound)}: "
                        "relax one of them or widen the design bounds")
            else:
                hint = "widen the design bounds or start from another point (--starts)"
    costs = {}
    if case.product is not None or spec.goal == "min_cost":
        try:
            costs = {k: float(pyo.value(v)) for k, v in problem.cost_parts(pyomo_backend(), problem.model).items()}
        except (ValueError, ZeroDivisionError):
            costs = {}
    for name, fv in spec.free.items():
        v = values.get(name)
        if v is not None and outcome.success and min(v - fv.lower, fv.upper - v) <= 1e-4 * (fv.upper - fv.lower):
            side = "lower" if v - fv.lower < fv.upper - v else "upper"
            notes.append(f"design.{name} sits at its {side} bound: widening it would improve the goal")
    area = float(pyo.value(problem.model.e_area))
    if spec.goal == "min_cost" and not (spec.costs.area_min <= area <= spec.costs.area_max):
        notes.append(f"tube area {area:.4g} m^2 lies outside the cost correlation's range "
                     f"{spec.costs.area_min:g}-{spec.costs.area_max:g} m^2 (extrapolated)")
    solver = outcome.as_dict()
    solver["solves"] = len(solves)
    solver["iterations_total"] = sum(o.iterations for o in solves)
    solver["finite_elements"], solver["collocation_points"] = problem.nfe, problem.ncp
    solver.update(variables=problem.nlp.n, constraints=problem.nlp.m, forms=problem.nlp.times["forms"])
    timings = {"build_s": problem.build_s, "compile_s": problem.nlp.times["compile_s"],
               "ipopt_s": sum(o.times["ipopt_s"] for o in solves),
               "callbacks_s": sum(o.times["callbacks_s"] for o in solves), "total_s": time.perf_counter() - t0}
    reason = outcome.message if outcome.success else f"IPOPT: {outcome.status_name} ({outcome.message})"
    return OptimizationResult(status, reason, spec.goal, outcome.objective, _design_fields(values), limits, costs,
                              verification, solver, timings, sim, notes, hint)


def _design_fields(values: dict) -> dict:
    return {DESIGN_FIELDS[k]: v for k, v in values.items()}
