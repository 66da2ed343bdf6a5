"""Alternatives around one optimum, each re-solving the compiled problem (no rebuild per point):
a cost-selectivity Pareto front by the epsilon-constraint method, multi-start for non-convex cases, and the
ranking of standard tube sizes."""

from __future__ import annotations

import multiprocessing
import os

import numpy as np
import pyomo.core as pyo
from tubewright.optimizer.design.collocation import initialise_from_simulation
from tubewright.optimizer.design.goals import GOALS
from tubewright.optimizer.design.problem import DesignProblem, design_case
from tubewright.optimizer.design.spec import read_design
from tubewright.optimizer.design.tubes import standard_tubes
from tubewright.optimizer.processes import process_context


def _processes(workers: int | None) -> int:
    """Processes for independent solves: as asked, by default up to two (the cores of the reference machine);
    one inside a study worker, which may not start processes of its own (a daemon process)."""
    if multiprocessing.current_process().daemon:
        return 1
    return min(2, os.cpu_count() or 1) if workers is None else max(1, workers)


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
    # the top of the front stops just short of the best selectivity: there the epsilon constraint meets
    # the most selective design exactly, a degenerate point on which IPOPT spends its iteration limit
    top = s_high - 1e-4 * (s_high - s_low)
    for k, eps in enumerate(np.linspace(s_low, top, max(points, 2)), 1):
        cheap.say(f"Pareto point {k} of {max(points, 2)} (selectivity >= {eps:.5f})")
        cheap.model.pareto_eps = float(eps)
        out = cheap.solve_nlp(warm_start=True, options={"max_iter": 100})  # a warm step needs far fewer
        if not out.success and best.success:  # far from its neighbour: start again from the most selective design
            for mine, theirs in zip(cheap.nlp.variables, selective.nlp.variables):
                mine.set_value(theirs.value, skip_validation=True)
            cheap.model.shells = 1
            out = cheap.solve_nlp()
        selectivity = float(pyo.value(cheap.model.figures["product_selectivity"]))
        point = {"epsilon": float(eps), "selectivity": selectivity, "annual_cost_per_year": float(out.objective),
                 "status": out.status_name, "design": cheap.design_values()}
        (front if out.success else apart).append(point)  # a point that did not converge is not on the front
    return {"cheapest": {"status": first.status_name, "annual_cost_per_year": first.objective,
                         "selectivity": s_low},
            "most_selective": {"status": best.status_name, "selectivity": s_high}, "points": front,
            "not_converged": apart}


MAX_DRAWS_PER_START = 50  # a draw costs one simulation (a few hundredths of a second)


def multistart(case, starts: int, seed: int = 0, progress=None, workers: int | None = None) -> dict:
    """Solve from ``starts`` random designs (uniform within the free bounds, ``numpy.random.default_rng(seed)``;
    seed 0 is a seed) and report the spread of the local optima. A random design whose simulation does not
    reach the outlet (runaway, pressure floor) is no starting point: it is recorded as skipped and another
    is drawn, up to MAX_DRAWS_PER_START draws per start. The starts are drawn here, in order, and solved on
    up to two processes (``workers``), each compiling the problem once; each start is initialised from its
    own simulation, so the results do not depend on the number of processes."""
    from tubewright.models.simulator import simulate

    spec = read_design(case)
    base = DesignProblem(case)
    rng = np.random.default_rng(seed)
    chosen, skipped = [], []
    draws = 0
    while len(chosen) < starts and draws < MAX_DRAWS_PER_START * starts:
        draws += 1
        start = {name: float(rng.uniform(fv.lower, fv.upper)) for name, fv in spec.free.items()}
        if "tube_count" in start:
            start["tube_count"] = float(round(start["tube_count"]))
        sim = simulate(design_case(case, {**base.start_values(), **start}), checks=False)
        if not sim.ok:
            skipped.append({"start": start, "reason": sim.reason})
            continue
        chosen.append(start)
    workers = _processes(workers)
    numbered = list(enumerate(chosen, 1))
    if workers > 1 and len(chosen) > 1:
        if progress is not None:
            progress(f"{len(chosen)} starts on {workers} processes")
        with process_context().Pool(workers) as pool:
            parts = pool.starmap(_solve_starts, [(case, numbered[k::workers], len(chosen), None)
                                                 for k in range(workers)])
        runs = sorted((r for part in parts for r in part), key=lambda r: r["number"])
    else:
        runs = _solve_starts(case, numbered, len(chosen), progress)
    found = [r["objective"] for r in runs if r["objective"] is not None]
    pick = min if GOALS[spec.goal].sense == "min" else max
    return {"seed": seed, "starts": starts, "draws": draws, "max_draws": MAX_DRAWS_PER_START * starts,
            "runs": runs, "skipped": skipped, "converged": len(found),
            "best": pick(found) if found else None, "spread": (max(found) - min(found)) if found else None}


def _solve_starts(case, numbered, total: int, progress=None) -> list[dict]:
    """Solve the numbered starts one after another on one compiled problem."""
    from tubewright.models.simulator import simulate

    problem = DesignProblem(case, progress=progress).build()
    runs = []
    for number, start in numbered:
        start_case = design_case(case, {**problem.start_values(), **start})
        sim = simulate(start_case, checks=False)
        for name, comp in problem.model.design.items():
            if name in start:
                comp.set_value(start[name])
        problem.model.shells = 1
        initialise_from_simulation(problem.model, start_case, sim)
        problem.say(f"start {number} of {total}")
        out = problem.solve_nlp()
        runs.append({"number": number, "start": start, "status": out.status_name,
                     "objective": out.objective if out.success else None, "iterations": out.iterations,
                     "design": problem.design_values()})
    return runs


def rank_standard_tubes(case, min_inner: float = 0.01, max_inner: float = 0.06, progress=None,
                        workers: int | None = None) -> list[dict]:
    """Optimise the remaining free design for each TEMA tube size (inner diameter and wall fixed per size) by
    re-solving the compiled problem, and rank the sizes by the goal. Every size starts from the same point
    (the simulation of the case's design), so the ranking does not depend on the order of the sizes or on
    the number of ``workers`` (processes; default: up to two, each building the problem once)."""
    if "inner_diameter" in read_design(case).free:
        raise ValueError("rank standard tubes with a fixed inner diameter")
    tubes = standard_tubes(min_inner, max_inner)
    workers = _processes(workers)
    if workers > 1 and len(tubes) > 1:
        shares = [tubes[k::workers] for k in range(workers)]
        if progress is not None:
            progress(f"{len(tubes)} standard tube sizes on {workers} processes")
        with process_context().Pool(workers) as pool:
            parts = pool.starmap(_rank_share, [(case, share, None) for share in shares])
        by_label = {r["label"]: r for part in parts for r in part}
        ranked = [by_label[t["label"]] for t in tubes]
    else:
        ranked = _rank_share(case, tubes, progress)
    sense = GOALS[read_design(case).goal].sense
    good = [r for r in ranked if r["objective"] is not None]
    good.sort(key=lambda r: r["objective"], reverse=(sense == "max"))
    return good + [r for r in ranked if r["objective"] is None]


def _rank_share(case, tubes, progress=None) -> list[dict]:
    """Solve ``tubes`` one after another on one compiled problem, each from the same starting point."""
    problem = DesignProblem(case, progress=progress).build()
    model = problem.model
    start = [(v, v.value) for v in problem.nlp.variables]
    out_rows = []
    for k, tube in enumerate(tubes, 1):
        problem.say(f"standard tube {k} of {len(tubes)}: {tube['label']}")
        for v, x in start:
            v.set_value(x, skip_validation=True)
        model.shells = 1
        model.design["inner_diameter"].set_value(tube["inner_diameter_m"])
        model.wall_thickness.set_value(tube["wall_thickness_m"])
        out = problem.solve_nlp()
        out_rows.append({**tube, "status": out.status_name, "objective": out.objective if out.success else None,
                         "design": problem.design_values()})
    return out_rows
