"""Alternatives around one optimum, each re-solving the compiled problem (no rebuild per point):
a cost-selectivity Pareto front by the epsilon-constraint method, multi-start for non-convex cases, and the
ranking of standard tube sizes."""

from __future__ import annotations

import numpy as np
import pyomo.environ as pyo
from tubewright.optimizer.design.collocation import initialise_from_simulation
from tubewright.optimizer.design.problem import DesignProblem, design_case
from tubewright.optimizer.design.tubes import standard_tubes


def pareto_front(case, points: int, progress=None) -> dict:
    """Minimum annual cost for selectivities from that of the cheapest design up to the best achievable
    (epsilon constraint product_selectivity >= eps on the compiled cost problem)."""
    if case.product is None:
        raise ValueError("a cost-selectivity front needs chemistry.product")
    cheap = DesignProblem(case, goal="min_cost", progress=progress).build()
    first = cheap.solve_nlp()
    s_low = float(pyo.value(cheap.model.figures["product_selectivity"]))
    selective = DesignProblem(case, goal="max_selectivity").build()
    best = selective.solve_nlp()
    s_high = float(best.objective) if best.success else s_low
    front, apart = [], []
    for k, eps in enumerate(np.linspace(s_low, s_high, max(points, 2)), 1):
        cheap.say(f"Pareto point {k} of {max(points, 2)} (selectivity >= {eps:.5f})")
        cheap.model.pareto_eps = float(eps)
        out = cheap.solve_nlp(warm_start=True)
        selectivity = float(pyo.value(cheap.model.figures["product_selectivity"]))
        point = {"epsilon": float(eps), "selectivity": selectivity, "annual_cost_per_year": float(out.objective),
                 "status": out.status_name, "design": cheap.design_values()}
        (front if out.success else apart).append(point)  # a point that did not converge is not on the front
    return {"cheapest": {"status": first.status_name, "annual_cost_per_year": first.objective,
                         "selectivity": s_low},
            "most_selective": {"status": best.status_name, "selectivity": s_high}, "points": front,
            "not_converged": apart}


def multistart(case, starts: int, seed: int = 0, progress=None) -> dict:
    """Solve from ``starts`` random designs (uniform within the free bounds, ``numpy.random.default_rng(seed)``;
    seed 0 is a seed) and report the spread of the local optima. The model is built and compiled once. A
    random design whose simulation does not reach the outlet (runaway, pressure floor) is no starting point:
    it is recorded as skipped and another is drawn, up to 5 draws per start."""
    from tubewright.models.simulator import simulate

    problem = DesignProblem(case, progress=progress).build()
    rng = np.random.default_rng(seed)
    runs, skipped = [], []
    draws = 0
    while len(runs) < starts and draws < 5 * starts:
        draws += 1
        start = {name: float(rng.uniform(fv.lower, fv.upper)) for name, fv in problem.spec.free.items()}
        if "tube_count" in start:
            start["tube_count"] = float(round(start["tube_count"]))
        values = {**problem.start_values(), **start}
        start_case = design_case(case, values)
        sim = simulate(start_case, checks=False)
        if not sim.ok:
            skipped.append({"start": start, "reason": sim.reason})
            continue
        for name, comp in problem.model.design.items():
            if name in start:
                comp.set_value(start[name])
        initialise_from_simulation(problem.model, start_case, sim)
        problem.say(f"start {len(runs) + 1} of {starts}")
        out = problem.solve_nlp()
        runs.append({"start": start, "status": out.status_name, "objective": out.objective if out.success else None,
                     "iterations": out.iterations, "design": problem.design_values()})
    found = [r["objective"] for r in runs if r["objective"] is not None]
    pick = min if problem.model.goal.sense == pyo.minimize else max
    return {"seed": seed, "starts": starts, "draws": draws, "max_draws": 5 * starts, "runs": runs,
            "skipped": skipped, "converged": len(found),
            "best": pick(found) if found else None, "spread": (max(found) - min(found)) if found else None}


def rank_standard_tubes(case, min_inner: float = 0.01, max_inner: float = 0.06, progress=None) -> list[dict]:
    """Optimise the remaining free design for each TEMA tube size (inner diameter and wall fixed per size) by
    re-solving the compiled problem, and rank the sizes by the goal."""
    problem = DesignProblem(case, progress=progress)
    if "inner_diameter" in problem.spec.free:
        raise ValueError("rank standard tubes with a fixed inner diameter")
    problem.build()
    model = problem.model
    ranked = []
    sense = model.goal.sense
    tubes = standard_tubes(min_inner, max_inner)
    for k, tube in enumerate(tubes, 1):
        problem.say(f"standard tube {k} of {len(tubes)}: {tube['label']}")
        model.design["inner_diameter"].set_value(tube["inner_diameter_m"])
        model.wall_thickness.set_value(tube["wall_thickness_m"])
        out = problem.solve_nlp()
        ranked.append({**tube, "status": out.status_name, "objective": out.objective if out.success else None,
                       "design": problem.design_values()})
    good = [r for r in ranked if r["objective"] is not None]
    good.sort(key=lambda r: r["objective"], reverse=(sense == pyo.maximize))
    return good + [r for r in ranked if r["objective"] is None]
