"""A design that holds under uncertainty: K scenarios drawn from [uncertain] (seeded, quasi-random: scrambled
Sobol points mapped by each distribution, correlated sets included), one NLP in which the design is shared
and every limit holds in the nominal case and in every scenario (optimizer.design.problem), the goal the
nominal one. Then both designs, nominal and robust, are simulated on M fresh random samples with the
batched integrator: the probability of passing every limit with its exact binomial interval, and
P5/P50/P95 of the hot spot and of the production rate.

The scenario approach (Campi and Garatti 2008, SIAM J. Optim. 19, 1211-1230, Theorem 1): for a convex
program with d decision variables and K independent scenarios, the probability that the violation
probability exceeds eps is at most sum_{i<d} C(K, i) eps^i (1 - eps)^(K - i). The reported guarantee is the
eps at which that sum is BETA. The tube design is not convex and the scenarios are quasi-random, not
independent: the bound is an indication beside the measured probability, not a proof."""

from __future__ import annotations

import math

import numpy as np
from tubewright.models.errors import CaseError

BETA = 0.01  # confidence parameter of the scenario guarantee (the guarantee holds with 1 - BETA)
DEFAULT_VERIFY_SAMPLES = 1000
DEFAULT_SCENARIOS = 8
# the goal at the nominal values (default), its mean over the nominal case and the scenarios, or a mix:
# nominal_weight * nominal + (1 - nominal_weight) * expected
GOALS = ("nominal", "expected", "mix")


def read_robust(case) -> dict | None:
    """``[robust]`` of a design case: scenarios (default 8), seed (0), goal ("nominal", the default;
    "expected": the mean over the nominal case and the scenarios; "mix" with nominal_weight, default 0.5),
    verify_samples (1000); None without it."""
    from tubewright.models.casefile import Table

    if "robust" not in case.raw:
        return None
    t = Table(case.raw["robust"], case.source, "robust",
              {"scenarios", "seed", "goal", "verify_samples", "nominal_weight"})
    out = {"scenarios": t.number("scenarios", default=DEFAULT_SCENARIOS, low=1, high=1000, integer=True),
           "seed": t.number("seed", default=0, low=0, high=2**31 - 1, integer=True),
           "goal": t.choice("goal", GOALS, default="nominal"),
           "verify_samples": t.number("verify_samples", default=DEFAULT_VERIFY_SAMPLES, low=10, high=1_000_000,
                                      integer=True)}
    if out["goal"] == "mix":
        out["nominal_weight"] = t.number("nominal_weight", default=0.5, low=0.0, high=1.0)
    elif t.has("nominal_weight"):
        raise CaseError(case.source, "robust.nominal_weight", f'applies to goal = "mix" only, not "{out["goal"]}"')
    t.finish()
    return out


def draw_scenarios(case, k: int, seed: int):
    """K scenarios {parameter path: SI value} from the case's [uncertain] block (scrambled Sobol points)."""
    from scipy.stats import qmc
    from tubewright.optimizer.design.spec import DESIGN_KEYS
    from tubewright.optimizer.screening.sampling import to_parameters
    from tubewright.optimizer.screening.uncertain import read_uncertain, refuse_unused_radial_data

    items = read_uncertain(case)
    refuse_unused_radial_data(case, items, two_dimensional=False)  # the design model is one-dimensional
    design_paths = {where for _, where in DESIGN_KEYS.values()}
    for u in items:
        if u.path in design_paths:
            raise CaseError(case.source, u.entry,
                            f'"{u.path}" is a design quantity: a robust design shares it between the scenarios, '
                            "so it cannot vary by scenario; screen it instead")
    # the first K points of a scrambled Sobol sequence (drawn as the next power of two, which Sobol wants)
    sobol = qmc.Sobol(len(items), scramble=True, seed=np.random.default_rng([seed, 11]))
    unit = sobol.random_base2(max(0, math.ceil(math.log2(k))))[:k]
    unit = np.clip(unit, 1e-6, 1 - 1e-6)  # unbounded distributions: no infinite draws
    values = to_parameters(items, unit)
    return items, [{p: float(v[i]) for p, v in values.items()} for i in range(k)]


def scenario_guarantee(k: int, d: int, beta: float = BETA) -> dict:
    """The violation level eps of the scenario approach for K scenarios and d decision variables."""
    from scipy.optimize import brentq
    from scipy.stats import binom

    if k < d:
        return {"scenarios": k, "decision_variables": d, "beta": beta, "epsilon": None,
                "note": "fewer scenarios than decision variables: no guarantee"}
    eps = brentq(lambda e: binom.cdf(d - 1, k, e) - beta, 1e-12, 1 - 1e-12)
    return {"scenarios": k, "decision_variables": d, "beta": beta, "epsilon": float(eps),
            "pass_probability_at_least": float(1 - eps),
            "note": f"with confidence {1 - beta:g} for a convex program and independent scenarios (Campi and "
                    "Garatti 2008); indicative here"}


def verify_design(case, items, values: dict, samples: int, seed: int) -> dict:
    """The design ``values`` simulated on ``samples`` fresh random draws of [uncertain] (batched)."""
    from tubewright.optimizer.design.problem import design_case
    from tubewright.optimizer.screening.analysis import clopper_pearson
    from tubewright.optimizer.screening.evaluation import evaluate

    unit = np.random.default_rng([seed, 13]).random((samples, len(items)))
    ev = evaluate(design_case(case, values), items, np.clip(unit, 1e-9, 1 - 1e-9))
    passes = ev.outputs.get("passes_limits")
    unknown = int(np.sum(~np.isfinite(passes))) if passes is not None else samples
    passed = int(np.nansum(passes)) if passes is not None else 0  # a failed sample counts as not passing
    low, high = clopper_pearson(passed, samples)
    out = {"samples": samples, "passed": passed, "failed_samples": unknown, "probability": passed / samples,
           "interval_95": [low, high]}
    for name in ("max_temperature_K", "production_rate_mol_s"):
        v = ev.censored.get(name)
        if v is not None and np.any(np.isfinite(v)):
            out[name] = dict(zip(("P5", "P50", "P95"), map(float, np.nanpercentile(v, [5, 50, 95]))))
    hot = ev.censored.get("max_temperature_K")
    out["hot_spot_samples_K"] = [] if hot is None else [round(float(t), 3) for t in hot]  # for the plot
    return out


def robust_design(case, k: int, seed: int = 0, samples: int = DEFAULT_VERIFY_SAMPLES, nominal=None,
                  progress=None, goal: str = "nominal", nominal_weight: float = 0.5) -> dict:
    """The robust optimum beside the nominal one (``nominal``: its OptimizationResult, solved when not
    given), the price of robustness (the goal at the nominal values, robust against nominal design), the
    scenarios with the limits they bind, both designs verified on fresh samples, and the scenario
    guarantee."""
    from tubewright.optimizer.design.optimise import optimise
    from tubewright.optimizer.design.spec import read_design, values_by_key

    items, scenarios = draw_scenarios(case, k, seed)
    if nominal is None:
        nominal = optimise(case, progress=progress)
    if progress is not None:
        progress(f"robust design: {k} scenarios")
    start = None
    if nominal.ok:  # from the nominal optimum: the scenarios then move it only as far as they must
        free = read_design(case).free
        start = {k: min(max(v, free[k].lower), free[k].upper)
                 for k, v in values_by_key(nominal.design).items() if k in free}
    shells = nominal.extras.get("shells", {}).get("count") if nominal.ok else None
    robust = optimise(case, progress=progress, scenarios=scenarios, start=start, shells=shells,
                      scenario_goal=goal if goal != "mix" else ("mix", nominal_weight))
    out = {"scenarios": k, "seed": seed, "goal": goal, **({"nominal_weight": nominal_weight} if goal == "mix" else {}),
           "status": str(robust.status), "reason": robust.reason,
           "objective": robust.objective, "design": robust.design, "limits": [r.as_dict() for r in robust.limits],
           "scenario_limits": robust.extras.get("scenario_limits", []), "notes": robust.notes}
    if nominal.ok and robust.ok:
        at_nominal = robust.extras.get("nominal_goal", robust.objective)  # "expected": the objective differs
        out["nominal_goal"] = at_nominal
        out["price"] = at_nominal - nominal.objective
        out["price_percent"] = 100.0 * out["price"] / abs(nominal.objective) if nominal.objective else None
    verification = {}
    for label, res in (("nominal", nominal), ("robust", robust)):
        if res.ok:
            values = values_by_key(res.design)
            verification[label] = verify_design(case, items, values, samples, seed)
    out["verification"] = verification
    out["guarantee"] = scenario_guarantee(k + 1, len(read_design(case).free))  # the nominal case is a scenario too
    out["verification_seed"] = seed
    return out
