"""Re-optimising the design for each uncertainty sample: the compiled design problem is re-solved with the
sample as a parameter change and a warm start from the previous solution (never rebuilt per sample)."""

from __future__ import annotations

import time

import numpy as np
import pyomo.core as pyo
from tubewright.models.errors import CaseError, ComputationFailed
from tubewright.models.outcomes import Reason
from tubewright.optimizer.design.problem import DesignProblem
from tubewright.optimizer.screening.evaluation import Evaluations
from tubewright.optimizer.screening.sampling import to_parameters

DESIGN_INPUTS = {"feed.temperature": "inlet_temperature", "feed.pressure": "inlet_pressure",
                 "coolant.temperature": "coolant_temperature", "coolant.mass_flow": "coolant_flow"}


def parameter_setter(problem, case, path: str):
    """A function that writes one sampled value into the compiled model's inputs."""
    m = problem.model
    parts = path.split(".")
    if path == "heat_transfer.multiplier":
        return lambda v: m.u_multiplier.set_value(v)
    if path.startswith("chemistry.reactions.") and parts[3] in ("k_ref", "activation_energy"):
        j = [r.name for r in case.reactions].index(parts[2])
        target = m.k_ref[j] if parts[3] == "k_ref" else m.e_act[j]
        return lambda v: target.set_value(v)
    name = DESIGN_INPUTS.get(path)
    if name is not None and name in m.design and name not in problem.spec.free:
        comp = m.design[name]
        return lambda v: comp.set_value(v)
    raise CaseError(case.source, "uncertain", f'"{path}" is not an input of the compiled design model; '
                    "re-optimisation takes k_ref, activation_energy, heat_transfer.multiplier and fixed feed or "
                    "coolant conditions")


def reoptimise_evaluator(case, items, progress=None):
    problem = DesignProblem(case).build()
    if not problem.spec.free:
        raise CaseError(case.source, "design", "re-optimisation needs at least one free design variable")
    first = problem.solve_nlp()
    if not first.success:
        raise ComputationFailed(Reason.SOLVER_FAILED, f"{case.source}: the nominal design problem does not solve "
                                f"({first.status_name}), so there is no optimum to re-optimise from")
    setters = [parameter_setter(problem, case, u.path) for u in items]
    names = list(problem.spec.free)

    def evaluator(unit_x):
        t0 = time.perf_counter()
        values = to_parameters(items, unit_x)
        n = unit_x.shape[0]
        out = {"optimal_objective": np.full(n, np.nan), **{f"optimal_{k}": np.full(n, np.nan) for k in names}}
        status = np.array(["ok"] * n, dtype=object)
        reason = [""] * n
        for i in range(n):
            for u, setter in zip(items, setters):
                setter(float(values[u.path][i]))
            res = problem.solve_nlp(warm_start=True)
            if not res.success:  # one cold retry from the nominal optimum before giving up on the sample
                res = problem.solve_nlp(warm_start=False)
            status[i], reason[i] = ("ok", res.status_name) if res.success else ("failed", res.status_name)
            if res.success:
                out["optimal_objective"][i] = res.objective
                for k in names:
                    out[f"optimal_{k}"][i] = float(pyo.value(problem.model.design[k]))
            if progress is not None:
                progress(i + 1, n, int(np.sum(status[: i + 1] != "ok")))
        return Evaluations(out, out, status, reason, time.perf_counter() - t0)

    return evaluator
