"""The ideal bound: the best goal when the fluid temperature itself is a free profile within bounds
(perfect temperature control along the tube), reported beside the real optimum as the distance of the
layout from ideal temperature control."""

from __future__ import annotations

import pyomo.core as pyo
from tubewright.optimizer.design.collocation import energy_balance_rows
from tubewright.optimizer.design.problem import DesignProblem


def temperature_bounds(problem) -> tuple[float, float]:
    spec, case = problem.spec, problem.case
    if spec.temperature_profile is not None:
        return spec.temperature_profile
    low = min(case.feed.temperature, case.coolant.temperature or case.feed.temperature)
    high = spec.limits.get("max_temperature", case.feed.temperature + 100.0)
    return low, high


def free_temperature_profile(problem):
    """The model change of the ideal bound (for ``DesignProblem.build(modify=...)``): the energy balance
    and the inlet temperature are dropped, the temperature at every point is free within its bounds."""
    low, high = temperature_bounds(problem)

    def modify(m):
        for c in energy_balance_rows(m):
            c.deactivate()
        for x in m.xi:
            m.T[x].setlb(low)
            m.T[x].setub(high)
        m.inlet_T.deactivate()

    return modify


def ideal_bound(case, nfe=None, ncp=None) -> dict:
    """Solve the design problem with the energy balance replaced by a free temperature profile."""
    problem = DesignProblem(case, nfe, ncp)
    low, high = temperature_bounds(problem)
    problem.build(modify=free_temperature_profile(problem))
    outcome = problem.solve_nlp()
    m = problem.model
    length = pyo.value(m.design["length"])
    return {
        "status": outcome.status_name,
        "success": outcome.success,
        "objective": outcome.objective,
        "temperature_bounds_K": [low, high],
        "profile": [{"z_m": float(x * length), "T_K": float(pyo.value(m.T[x]))} for x in m.xi],
        "design": {k: float(v) for k, v in problem.design_values().items()},
        "iterations": outcome.iterations,
    }
