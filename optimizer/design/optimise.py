"""``optimise``: solve the design problem, round the tube count and re-solve, verify the optimum against
the adaptive integrator (refining the mesh once if needed), and report limits, costs and findings."""

from __future__ import annotations

import math
import time

import pyomo.core as pyo
from tubewright.models.errors import ComputationFailed
from tubewright.models.limits import LIMITS
from tubewright.models.outcomes import Reason, Status
from tubewright.models.simulator import add_checks, simulate
from tubewright.optimizer.design.goals import GOALS
from tubewright.optimizer.design.outcome import LimitRow, OptimizationResult
from tubewright.optimizer.design.precheck import infeasible_duties
from tubewright.optimizer.design.problem import DesignProblem, design_case
from tubewright.optimizer.design.spec import DESIGN_FIELDS


def optimise(case, nfe=None, ncp=None, progress=None, scenarios=None, start=None,
             scenario_goal="nominal", shells: int | None = None, on_profiles=None) -> OptimizationResult:
    """The whole `optimize` verb: solve, round the tube count and re-solve, verify (refining the mesh once
    if needed), and report. ``scenarios`` ([{parameter path: value}]): every limit must also hold in each
    (a robust design; the goal stays the nominal one); the result's extras then carry the scenario rows.
    ``start``: the starting design {design key: SI value} (default: the starts of [design]); ``shells``: the
    number of shells to start with (a known optimum's; solve_nlp corrects it if the area says otherwise).
    ``on_profiles(design case, simulation, limit rows)`` is called once a converged design's profiles are
    known, before its checks (which re-simulate): the command line hands the figure to its second process then."""
    t0 = time.perf_counter()
    problem = DesignProblem(case, nfe, ncp, progress=progress, scenarios=scenarios, scenario_goal=scenario_goal)
    spec = problem.spec
    if not spec.has_freedom:
        sim = simulate(design_case(case, problem.start_values()))
        return OptimizationResult(Status.NOT_OPTIMISED, "no design variable is free in [design]: the case was "
                                  "simulated, not optimised", spec.goal, None, simulation=sim,
                                  reason_code=Reason.NOTHING_FREE)
    notes = []
    ruled_out = infeasible_duties(case, spec.limits)
    if ruled_out:
        rows = [LimitRow(r["limit"], r["maximum"], r["bound"], LIMITS[r["limit"]].kind, False, None, r["unit"])
                for r in ruled_out]
        worst = ruled_out[0]
        return OptimizationResult(Status.INFEASIBLE, f"limits.{worst['limit']} = {worst['bound']:.6g} "
                                  f"{worst['unit']} cannot be met: {worst['why']} (checked before IPOPT)", spec.goal,
                                  None, limits=rows, reason_code=Reason.BEYOND_STOICHIOMETRY,
                                  timings={"total_s": time.perf_counter() - t0},
                                  hint=f"lower limits.{worst['limit']} below {worst['maximum']:.6g} {worst['unit']} "
                                  "or raise the feed")
    try:
        problem.build(start)
        if shells:
            problem.model.shells = shells
    except ComputationFailed as err:
        sim = simulate(design_case(case, problem.start_values()), checks=False)
        return OptimizationResult(Status.FAILED, str(err), spec.goal, None, simulation=sim, reason_code=err.code,
                                  hint="start from a design that can be simulated: set design.*.start")
    notes += problem.start_notes
    problem.say("solving with IPOPT")
    outcome = problem.solve_nlp()
    solves = [outcome]
    notes += problem.shell_notes
    if outcome.success and "tube_count" in spec.free and spec.round_tube_count:
        n = problem.model.design["tube_count"]
        rounded = float(max(round(n.value), math.ceil(spec.free["tube_count"].lower)))
        notes.append(f"tube count {n.value:.2f} rounded to {rounded:.0f} and re-solved")
        problem.say(f"tube count rounded to {rounded:.0f}: re-solving")
        n.setlb(rounded)
        n.setub(rounded)
        outcome = problem.solve_nlp(warm_start=True)
        solves.append(outcome)
        notes += problem.shell_notes
    values = problem.design_values()
    problem.say("verifying the design with the adaptive integrator")
    verification, sim = problem.verify(values) if outcome.success else ({}, None)
    if outcome.success and verification["max_relative_deviation"] > problem.verify_tolerance:
        notes.append(f"verification deviation {verification['max_relative_deviation']:.2e} above tolerance "
                     f"{problem.verify_tolerance:g}: mesh refined from {problem.nfe} to {2 * problem.nfe} elements")
        finer = DesignProblem(case, 2 * problem.nfe, problem.ncp, progress=progress, scenarios=scenarios,
                              scenario_goal=scenario_goal)
        finer.build(values)
        if "tube_count" in spec.free and spec.round_tube_count:
            finer.model.design["tube_count"].setlb(values["tube_count"])
            finer.model.design["tube_count"].setub(values["tube_count"])
        finer.model.shells = problem.model.shells.value
        outcome = finer.solve_nlp()
        solves.append(outcome)
        problem = finer
        values = problem.design_values()
        verification, sim = problem.verify(values) if outcome.success else ({}, None)
    for _ in range(2):  # a pointwise limit passed between the collocation points: tighten it and re-solve
        moved = problem.tighten_between_points(sim.summary) if outcome.success and sim is not None else {}
        if not moved:
            break
        problem.say(f"tightening {', '.join(moved)} between the collocation points: re-solving")
        for name, (value, enforced) in moved.items():
            notes.append(f"limits.{name}: the re-simulated design reaches {value:.6g} between the collocation "
                         f"points; its bound in the NLP tightened to {enforced:.6g} and re-solved")
        outcome = problem.solve_nlp(warm_start=True)
        solves.append(outcome)
        values = problem.design_values()
        verification, sim = problem.verify(values) if outcome.success else ({}, None)
    limits = problem.limit_rows(outcome)
    if not outcome.success:  # the best point found: its simulation shows where it stands, and its findings
        sim = simulate(design_case(case, values))
    elif sim is not None and sim.summary:  # every check of the final design, as simulate reports it
        final = design_case(case, values)
        if on_profiles is not None and sim.columns:
            on_profiles(final, sim, limits)
        add_checks(final, sim)
    if outcome.success:
        status, code = Status.OPTIMAL, Reason.CONVERGED
    elif outcome.status in (2, -2):
        status, code = Status.INFEASIBLE, Reason.NO_FEASIBLE_POINT
    else:
        status, code = Status.FAILED, Reason.SOLVER_FAILED
    hint = ""
    if not outcome.success:
        violated = [r for r in limits if r.violated]
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
            costs = problem.cost_parts()
        except (ValueError, ZeroDivisionError):
            costs = {}
    for name, fv in spec.free.items():
        v = values.get(name)
        if v is not None and outcome.success and min(v - fv.lower, fv.upper - v) <= 1e-4 * (fv.upper - fv.lower):
            side = "lower" if v - fv.lower < fv.upper - v else "upper"
            notes.append(f"design.{name} sits at its {side} bound: widening it would improve the goal")
    area = float(pyo.value(problem.model.figures["outer_area_m2"]))
    shells = int(pyo.value(problem.model.shells))
    if spec.goal == "min_cost" and not (spec.costs.area_min <= area / shells <= spec.costs.area_max):
        notes.append(f"tube area {area / shells:.4g} m^2 per shell lies outside the cost correlation's range "
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
    res = OptimizationResult(status, reason, spec.goal, outcome.objective, _design_fields(values), limits, costs,
                             verification, solver, timings, sim, notes, hint, code)
    res.extras["shells"] = {"count": shells, "area_per_shell_m2": area / shells, "area_m2": area}
    if scenarios:
        res.extras["scenario_limits"] = problem.scenario_limit_rows(outcome)
        res.extras["nominal_goal"] = float(pyo.value(GOALS[spec.goal].value(problem.model.figures)))
    return res


def _design_fields(values: dict) -> dict:
    return {DESIGN_FIELDS[k]: v for k, v in values.items()}
