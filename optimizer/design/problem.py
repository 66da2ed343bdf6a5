"""The design problem: the façade that builds the collocation model once, adds the design figures, the
limits (models.limits) and the goal (optimizer.design.goals), compiles it for IPOPT, solves and re-solves
(parameters change without recompiling), reports each limit with its multiplier and verifies a design
against the adaptive integrator."""

from __future__ import annotations

import math
import time
from dataclasses import replace

import numpy as np
import pyomo.core as pyo
from tubewright.models.backend import NUMPY, pyomo_backend
from tubewright.models.correlations import water_saturation_pressure, water_saturation_temperature
from tubewright.models.errors import ComputationFailed
from tubewright.models.figures import POINTWISE, correlation_range_excesses, critical_reaction, layout_figures
from tubewright.models.limits import LIMITS
from tubewright.models.outcomes import Reason
from tubewright.models.simulator import simulate
from tubewright.models.summary import conversion, key_lost, product_figures
from tubewright.optimizer.design.collocation import (
    build_tube_model,
    initialise_from_simulation,
    state_scaling,
    tube_scale_factors,
)
from tubewright.optimizer.design.costs import cost_figures, shells_for
from tubewright.optimizer.design.goals import GOALS
from tubewright.optimizer.design.outcome import LimitRow
from tubewright.optimizer.design.spec import DESIGN_KEYS, read_design
from tubewright.optimizer.nlp.bridge import CompiledNLP
from tubewright.optimizer.nlp.families import origin
from tubewright.optimizer.nlp.garbage_collection import paused_collection


def design_case(case, values: dict):
    """The numeric case at the design ``values`` (SI, keys of DESIGN_KEYS)."""
    parts = {"tube": {}, "feed": {}, "coolant": {}}
    for name, v in values.items():
        section, attr = DESIGN_KEYS[name][1].split(".")
        parts[section][attr] = int(round(v)) if name == "tube_count" and abs(v - round(v)) < 1e-9 else v
    if case.coolant.kind.temperature_source == "saturation":  # boiling water: pressure and temperature agree
        c = parts["coolant"]
        if "pressure" in c:
            c["temperature"] = water_saturation_temperature(c["pressure"])
        elif "temperature" in c:
            c["pressure"] = water_saturation_pressure(c["temperature"])
    return replace(case, tube=replace(case.tube, **parts["tube"]), feed=replace(case.feed, **parts["feed"]),
                   coolant=replace(case.coolant, **parts["coolant"]))


class DesignProblem:
    """Build once, solve many: the compiled NLP is kept; parameters (k_ref, E_a, U multiplier, limit values,
    fixed design values) change through ``set_parameter`` and re-solve without recompiling."""

    def __init__(self, case, nfe: int | None = None, ncp: int | None = None, goal: str | None = None,
                 progress=None, scenarios=None, scenario_goal="nominal"):
        self.case = case
        self.spec = read_design(case)
        if goal is not None:
            self.spec = replace(self.spec, goal=goal)
        num = case.numerics
        self.nfe = int(nfe or num.finite_elements)
        self.ncp = int(ncp or num.collocation_points)
        self.verify_tolerance = float(num.verify_tolerance)
        self.model = None
        self.nlp = None
        self.tightened = {}  # limit -> NLP bound moved inward so that the limit holds between the points
        self.start_notes: list = []  # set by build: a starting design moved away from a runaway
        self.progress = progress  # optional: progress(text) and progress.iteration(k, objective, infeasibility)
        self.scenarios = list(scenarios or [])  # [{parameter path: SI value}]: every limit holds in each
        self.scenario_blocks = []  # (block, scenario case, limit components, state scales)
        self.scenario_goal = scenario_goal  # "nominal", "expected" (the mean over nominal and scenarios), ("mix", w)

    def say(self, text: str):
        if self.progress is not None:
            self.progress(text)

    # --- building ---------------------------------------------------------------------------------------
    def start_values(self) -> dict:
        values = {k: v.start for k, v in self.spec.free.items()}
        values.update(self.spec.fixed)
        return values

    COOLER = ("coolant_temperature", "coolant_pressure", "inner_diameter", "inlet_temperature")

    def _cooler_start(self, values, case, sim):
        """A starting design that runs away in simulation gives IPOPT a runaway profile to start from, from
        which it rarely recovers ("restoration failed"). Move the free quantities that cool the tube to their
        lower bounds, one more at a time in the order of COOLER (coolant temperature or steam pressure, tube
        diameter, feed temperature), and start from the first design that does not run away; the move is
        noted. Returns (values, case, simulation), the given ones when no such design is found."""
        trial, moved = dict(values), []
        for name in self.COOLER:
            fv = self.spec.free.get(name)
            if fv is None or trial[name] <= fv.lower:
                continue
            trial[name] = fv.lower
            moved.append(f"design.{name}")
            trial_case = design_case(self.case, trial)
            trial_sim = simulate(trial_case, checks=False)
            if trial_sim.columns and trial_sim.reason_code != Reason.TEMPERATURE_CEILING:
                self.start_notes.append(f"the starting design runs away in simulation ({sim.reason}): started "
                                        f"from {', '.join(moved)} at the lower bound instead")
                return trial, trial_case, trial_sim
        return values, case, sim

    def build(self, start: dict | None = None, modify=None):
        """Build, initialise from a simulation of the starting design, add goal and limits, compile.
        ``modify(model)`` may change the model (deactivate equations, free profiles) before compilation.
        Returns the problem."""
        with paused_collection():
            return self._build(start, modify)

    def _build(self, start, modify):
        t0 = time.perf_counter()
        self.say(f"building the collocation model ({self.nfe} elements x {self.ncp} points)")
        chosen = {**self.start_values(), **(start or {})}
        start_case = design_case(self.case, chosen)
        sim = simulate(start_case, checks=False)
        self.start_notes = []
        if start is None and sim.reason_code == Reason.TEMPERATURE_CEILING:
            chosen, start_case, sim = self._cooler_start(chosen, start_case, sim)
        if not sim.columns:
            raise ComputationFailed(Reason.START_NOT_SIMULATED,
                                    f"the starting design cannot be simulated: {sim.reason}")
        m, pcase = build_tube_model(self.case, self.spec, self.nfe, self.ncp, outputs=False)  # no figure reads Q, tau
        for name, comp in m.design.items():
            if name in self.spec.free:
                comp.set_value(chosen[name])
        initialise_from_simulation(m, start_case, sim)
        self.model, self.pcase = m, pcase
        m.figures = self._figures(m, pcase)
        self.limit_components = self._limits(m)
        self._scenario_blocks(m, chosen, sim)
        if self.case.product:  # the epsilon constraint of Pareto fronts; -1e6 leaves it slack
            m.pareto_eps = pyo.Param(mutable=True, initialize=-1.0e6)
            m.pareto_cut = pyo.Constraint(expr=m.figures["product_selectivity"] >= m.pareto_eps)
        self._objective(m)
        if modify is not None:
            modify(m)
        self.say("compiling the NLP for IPOPT")
        self.nlp = CompiledNLP(m, replicas=[[b for b, *_ in self.scenario_blocks]] if self._replicable() else ())
        if self.progress is not None:
            self.nlp.on_iteration = getattr(self.progress, "iteration", None)
        self._scales = state_scaling(m, start_case, sim)
        self.obj_scale = 1.0 / max(abs(pyo.value(m.goal)), 1e-12)
        self.build_s = time.perf_counter() - t0
        return self

    def _replicable(self) -> bool:
        """The scenario blocks differ in mutable Param values only (every scenario path is a rate constant, an
        activation energy or the U multiplier: collocation.parametrised_case), so the bridge may compile one
        block for all; other paths (orders, heats of reaction) reach the expressions as numbers."""
        def param(path):
            parts = path.split(".")
            kinetic = len(parts) == 4 and parts[:2] == ["chemistry", "reactions"]
            return path == "heat_transfer.multiplier" or (kinetic and parts[3] in ("k_ref", "activation_energy"))

        return len(self.scenario_blocks) > 1 and all(param(p) for values in self.scenarios for p in values)

    def _scenario_blocks(self, m, start: dict, nominal_sim):
        """A robust design: one tube block per scenario (the case with the scenario's parameter values),
        sharing the design components, with every limit on the nominal model's bounds. A scenario whose
        starting design cannot be simulated starts from the nominal simulation."""
        from tubewright.models.parameters import apply

        self.scenario_blocks = []
        if not self.scenarios:
            return
        m.scenario = pyo.Block(range(len(self.scenarios)))
        for k, values in enumerate(self.scenarios):
            case_k = apply(self.case, values)
            b = m.scenario[k]
            _, pcase_k = build_tube_model(case_k, self.spec, self.nfe, self.ncp, block=b, shared=m, outputs=False)
            start_k = design_case(case_k, start)
            sim_k = simulate(start_k, checks=False)
            if not sim_k.ok:
                start_k, sim_k = design_case(self.case, start), nominal_sim
            initialise_from_simulation(b, start_k, sim_k)
            b.figures = self._figures(b, pcase_k, nominal=False)
            self.scenario_blocks.append((b, case_k, self._limits(b, m.limit_value), state_scaling(b, start_k, sim_k)))

    def _figures(self, m, pcase, nominal: bool = True) -> dict:
        """The design figures as Pyomo expressions, under the names of the simulation summary (pointwise
        figures as {collocation point: expression}); limits and goals are written against these."""
        case = self.case
        N = pcase.tube.count
        f_in = [m.F[s, 0.0] for s in case.names]  # per tube: ratios stay free of the tube count
        f_out = [m.F[s, 1.0] for s in case.names]
        points = list(m.xi)
        j = critical_reaction(case)
        layout = layout_figures(pcase)
        figures = {
            "conversion": conversion(case, f_in, f_out),
            "pressure_drop_Pa": m.P[0.0] - m.P[1.0],
            **layout,
            "max_correlation_range_excess": correlation_range_excesses(pcase, layout),
            **{name: {x: f(pcase, m.T[x], m.Tc[x], j) for x in points} for name, f in POINTWISE.items()},
        }
        enters = case.coolant.kind.enters_at
        figures["coolant_outlet_temperature_K"] = m.Tc[0.0 if enters == "outlet" else 1.0]
        if case.product:
            formed, yld, selectivity = product_figures(case, case.product, f_in, f_out)
            figures.update(production_rate_mol_s=N * formed, product_yield=yld, product_selectivity=selectivity,
                           key_lost_mol_s=N * key_lost(case, f_in, f_out))
        coolant = m.design["coolant_flow"] if "coolant_flow" in m.design else 0.0
        if nominal:
            m.shells = pyo.Param(mutable=True, initialize=1)  # set by solve_nlp when the area passes one shell
        shells = m.shells if nominal else self.model.shells  # the scenarios share the layout, hence its shells
        costs = cost_figures(pyomo_backend(), self.spec.costs, case, figures, coolant, shells)
        figures["annual_cost_per_year"] = costs["total"]
        if nominal:
            self.cost_expressions = costs
        return figures

    def _limits(self, m, bounds=None) -> dict:
        """One constraint (or one per collocation point) per limit of [limits], from its row of
        models.limits; bounds are mutable parameters (``bounds``, else new ones on ``m``), so a changed limit
        re-solves without recompiling. Returns {limit: constraint component}."""
        lim = self.spec.limits
        if bounds is None:
            m.limit_value = pyo.Param(list(lim), mutable=True, initialize=lim)
            bounds = m.limit_value
        components = {}
        for name in lim:
            row = LIMITS[name]
            q = m.figures[row.figure]
            bound = bounds[name]

            def keep(expr, row=row, bound=bound):
                return expr <= bound if row.kind == "max" else expr >= bound

            if row.pointwise:
                comp = pyo.Constraint(list(q), rule=lambda m, x, q=q, keep=keep: keep(q[x]))
            else:
                comp = pyo.Constraint(expr=keep(q))
            m.add_component(f"limit_{name}", comp)
            components[name] = comp
        return components

    def limit_value(self, name, block=None) -> float:
        """The current value of a limit's figure (its largest, or smallest, value over the points) in the
        nominal model or a scenario ``block``."""
        row = LIMITS[name]
        q = (block if block is not None else self.model).figures[row.figure]
        if row.pointwise:
            values = [pyo.value(e) for e in q.values()]
            return max(values) if row.kind == "max" else min(values)
        return float(pyo.value(q))

    def cost_parts(self) -> dict:
        """The annual cost parts at the current point of the model [per year]."""
        return {k: float(pyo.value(v)) for k, v in self.cost_expressions.items()}

    def _objective(self, m):
        """The goal of the nominal model; with scenarios and ``scenario_goal = "expected"`` its mean over the
        nominal case and the scenarios (equal weights), with ``("mix", w)`` w nominal + (1 - w) expected."""
        goal = GOALS[self.spec.goal]
        value = goal.value(m.figures)
        if self.scenario_goal != "nominal" and self.scenario_blocks:
            expected = (value + sum(goal.value(b.figures) for b, *_ in self.scenario_blocks)) / (
                1 + len(self.scenario_blocks))
            w = self.scenario_goal[1] if isinstance(self.scenario_goal, tuple) else 0.0
            value = w * value + (1.0 - w) * expected
        m.goal = pyo.Objective(expr=value, sense=pyo.minimize if goal.sense == "min" else pyo.maximize)

    # --- solving ----------------------------------------------------------------------------------------
    def scaling(self):
        m = self.model
        factors, con_factors = tube_scale_factors(m, self.case, self._scales)
        for b, case_k, _, scales_k in self.scenario_blocks:
            more_vars, more_cons = tube_scale_factors(b, case_k, scales_k)
            factors.update(more_vars)
            con_factors.update(more_cons)
        for name, comp in m.design.items():
            if name in self.spec.free:
                factors[id(comp)] = 1.0 / max(abs(comp.value), 1e-12)
        x_s = np.array([factors.get(id(v), 1.0) for v in self.nlp.variables])
        g_s = np.array([con_factors.get(id(origin(c)), 1.0) for c in self.nlp.constraints])
        row = {id(c): i for i, c in enumerate(self.nlp.constraints)}
        for components in [self.limit_components, *(blk[2] for blk in self.scenario_blocks)]:
            for name, comp in components.items():
                bound = abs(self.spec.limits[name]) or 1.0
                for c in (comp.values() if comp.is_indexed() else [comp]):
                    g_s[row[id(c)]] = 1.0 / bound
        return self.obj_scale, x_s, g_s

    def linear_solver_options(self) -> dict:
        """IPOPT's options for MUMPS from [numerics] (defaults in models.case.Numerics, chosen with
        tests/benchmarks/bench_linear_solver.py). MUMPS's automatic permutation with scaling of the KKT matrix
        (IPOPT's default) fails on large collocation meshes: the demo at 120 elements took 54 s and the
        A -> B -> C profile problem at 400 elements stopped after one iteration ("matrix is singular" at every
        inertia correction); without it both solve at every mesh, in time roughly linear in the elements."""
        num = self.case.numerics
        # a larger pivot tolerance than IPOPT's default (1e-6) avoids failed step computations on the nearly
        # singular KKT systems of counter-current cases (measured on the coil demo)
        return {"mumps_pivtol": 1e-4, "mumps_pivot_order": num.mumps_pivot_order, "mumps_scaling": num.mumps_scaling,
                "mumps_permuting_scaling": num.mumps_permuting_scaling, "mumps_mem_percent": num.mumps_mem_percent}

    def solve_nlp(self, warm_start=False, options=None, passes: int = 3):
        """Solve (warm from the current point if asked). With the cost goal, a layout whose tube area passes
        the largest shell of the cost correlation is costed as the smallest number of equal shells inside
        its range (costs.shells_for): the number is fixed and the problem re-solved warm while it changes
        (at most ``passes`` times), so that every caller (optimum, rounding, standard tubes, starts, Pareto
        points) reports the same cost definition. The notes of the last solve are in ``shell_notes``."""
        opts = {"max_iter": 500, "tol": 1e-7, "acceptable_tol": 1e-5, "mu_strategy": "adaptive",
                **self.linear_solver_options()}
        opts.update(options or {})
        outcome = self.nlp.solve(options=opts, warm_start=warm_start, scaling=self.scaling())
        self.shell_notes = []
        if self.spec.goal != "min_cost":
            return outcome
        model = self.model
        for _ in range(passes):
            if not outcome.success:
                break
            area = float(pyo.value(model.figures["outer_area_m2"]))
            shells = shells_for(self.spec.costs, area)
            if shells == int(pyo.value(model.shells)):
                break
            self.shell_notes.append(f"tube area {area:.4g} m^2 costed as {shells} equal shells of "
                                    f"{area / shells:.4g} m^2 (the capital correlation holds up to "
                                    f"{self.spec.costs.area_max:g} m^2 per shell); re-solved")
            model.shells = shells
            before = outcome
            outcome = self.nlp.solve(options=opts, warm_start=True, scaling=self.scaling())
            outcome.iterations += before.iterations  # the counters cover every pass
            for key in ("ipopt_s", "callbacks_s", "solve_s"):
                outcome.times[key] = outcome.times.get(key, 0.0) + before.times.get(key, 0.0)
        return outcome

    def design_values(self) -> dict:
        """The design at the current point; a boiling coolant's temperature follows its steam pressure."""
        values = {name: float(pyo.value(comp)) for name, comp in self.model.design.items()}
        if hasattr(self.model, "coolant_saturation"):
            values["coolant_temperature"] = float(pyo.value(self.model.coolant_saturation))
        elif "coolant_pressure" in values:  # the temperature was chosen: the steam pressure that gives it
            values["coolant_pressure"] = water_saturation_pressure(values["coolant_temperature"])
        return values

    def tighten_between_points(self, summary, margin: float = 1.5) -> dict:
        """Pointwise limits are enforced at the collocation points only; where the re-simulated design
        passes one between them, move that limit's NLP bound inward by ``margin`` times the excess (the
        user's bound stays the reported one). Returns {limit: (re-simulated value, new NLP bound)}."""
        moved = {}
        for name, bound in self.spec.limits.items():
            row = LIMITS[name]
            value = summary.get(row.figure)
            if not row.pointwise or value is None or row.passes(value, bound):
                continue
            param = self.model.limit_value[name]
            excess = value - bound if row.kind == "max" else bound - value
            param.set_value(float(pyo.value(param)) + (-1.0 if row.kind == "max" else 1.0) * margin * excess)
            self.tightened[name] = float(pyo.value(param))
            moved[name] = (float(value), self.tightened[name])
        return moved

    def limit_rows(self, outcome) -> list[LimitRow]:
        rows = []
        index = {id(c): i for i, c in enumerate(self.nlp.constraints)}
        sign = -1.0 if GOALS[self.spec.goal].sense == "min" else 1.0  # d f / d bound = -sign_min * lambda
        for name, comp in self.limit_components.items():
            cons = list(comp.values()) if comp.is_indexed() else [comp]
            lam = sum(outcome.multipliers[index[id(c)]] for c in cons)
            value = self.limit_value(name)
            enforced = float(pyo.value(self.model.limit_value[name]))
            scale = max(abs(enforced), 1e-12)
            binding = abs(value - enforced) <= 1e-5 * scale + 1e-9 and abs(lam) > 1e-12
            # a limit tightened to hold between the collocation points is reported against the user's bound
            bound = self.spec.limits[name] if name in self.tightened else enforced
            # IPOPT: L = f_min + lambda g; d f_min*/d bound = -lambda. For a maximised goal f = -f_min.
            # An inactive limit costs nothing: its multiplier is reported as 0 (IPOPT leaves ~1e-8 there).
            row = LIMITS[name]
            # multipliers mean something only at a converged point: None elsewhere
            multiplier = (float(sign * lam) if binding else 0.0) if outcome.success else None
            rows.append(LimitRow(name, value, bound, row.kind, bool(binding) and outcome.success, multiplier, row.unit))
        return rows

    def scenario_limit_rows(self, outcome) -> list[dict]:
        """Per scenario: each limit's value, whether it binds and its multiplier (as ``limit_rows``)."""
        index = {id(c): i for i, c in enumerate(self.nlp.constraints)}
        sign = -1.0 if GOALS[self.spec.goal].sense == "min" else 1.0
        out = []
        for k, (b, _, components, _) in enumerate(self.scenario_blocks):
            rows = []
            for name, comp in components.items():
                cons = list(comp.values()) if comp.is_indexed() else [comp]
                lam = sum(outcome.multipliers[index[id(c)]] for c in cons)
                value = self.limit_value(name, b)
                enforced = float(pyo.value(self.model.limit_value[name]))
                binding = abs(value - enforced) <= 1e-5 * max(abs(enforced), 1e-12) + 1e-9 and abs(lam) > 1e-12
                rows.append({"limit": name, "value": value, "bound": self.spec.limits[name],
                             "binding": bool(binding) and outcome.success,
                             "multiplier": (float(sign * lam) if binding else 0.0) if outcome.success else None})
            out.append({"scenario": k + 1, "parameters": self.scenarios[k], "limits": rows})
        return out

    def verify(self, values) -> tuple[dict, object]:
        """Re-simulate the design with the adaptive integrator and compare the states at the collocation
        points: the largest deviation of T, P (relative) and of each flow (relative to the feed of the key
        reactant)."""
        case = design_case(self.case, values)
        sim = simulate(case, checks=False)  # the checks are run once, on the final design (optimise)
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
                "flows": worst["F"], "tolerance": self.verify_tolerance, "status": sim.status,
                "goal_simulated": self.goal_of(case, sim.summary)}, sim

    def goal_of(self, case, summary) -> float | None:
        """The goal evaluated on a simulation summary by the same row of GOALS as the objective."""
        figures = dict(summary)
        try:
            figures["annual_cost_per_year"] = cost_figures(NUMPY, self.spec.costs, case, figures,
                                                           case.coolant.mass_flow or 0.0,
                                                           int(pyo.value(self.model.shells)))["total"]
            return float(GOALS[self.spec.goal].value(figures))
        except (KeyError, TypeError, ZeroDivisionError):  # a stopped simulation lacks outlet figures
            return None
