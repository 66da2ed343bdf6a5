"""One function per reactor verb (simulate, optimize, pareto, screen). The command line (optimizer.cli) and
the study tasks (optimizer.study.tasks) both call these, so that a verb gives the same answer from either:
the same defaults, the same standard-tube ranking, the same ideal bound. Each returns a typed result; none
prints. The study verbs (run, status, report) live in optimizer.study, which calls these.

The design and screening layers import Pyomo and IPOPT: they are imported inside the verbs that need
them, so that simulating never pays for them."""

from __future__ import annotations

from tubewright.models.casefile import apply_overrides, build_case
from tubewright.models.simulator import simulate as _simulate_with_checks

MIN_STANDARD_INNER, MAX_STANDARD_INNER = 0.01, 0.06  # m: the TEMA tubes ranked by standard_tubes = true


def simulate(case):
    """Simulate a case with every validity and safety check: a models.results.SimulationResult."""
    return _simulate_with_checks(case, checks=True)


def optimize(case, ideal: bool = False, starts: int | None = None, seed: int = 0, pareto: int | None = None):
    """The cheapest (or best) layout of a case: an OptimizationResult whose ``extras`` hold, as asked, the
    ranking of standard tubes (``[design] standard_tubes = true``: the best tube is then optimised), the
    ideal bound with its gap (``ideal``), a multi-start (``starts``, ``seed``) and a cost-selectivity front
    (``pareto`` points). ``result.case`` is the case that was optimised (with the chosen standard tube)."""
    from tubewright.optimizer.design.alternatives import multistart, pareto_front, rank_standard_tubes
    from tubewright.optimizer.design.ideal import ideal_bound
    from tubewright.optimizer.design.optimise import optimise
    from tubewright.optimizer.design.spec import read_design

    if starts is not None and starts < 1:
        raise ValueError("starts must be at least 1")
    if pareto is not None and pareto < 2:
        raise ValueError("a Pareto front needs at least 2 points")
    extras = {}
    if read_design(case).standard_tubes:
        ranking = rank_standard_tubes(case, MIN_STANDARD_INNER, MAX_STANDARD_INNER)
        extras["standard_tubes"] = ranking
        best = next((r for r in ranking if r["objective"] is not None), None)
        if best is not None:
            chosen = {"tube.inner_diameter": f"{best['inner_diameter_m']} m",
                      "tube.wall_thickness": f"{best['wall_thickness_m']} m", "design.standard_tubes": False}
            case = build_case(apply_overrides(case.raw, chosen, case.source), case.source)
    res = optimise(case)
    if ideal and res.ok:
        bound = ideal_bound(case)
        bound["gap"] = (res.objective - bound["objective"]) if bound["success"] else None
        extras["ideal_bound"] = bound
    if starts:
        extras["multistart"] = multistart(case, starts, seed)
    if pareto:
        extras["pareto"] = pareto_front(case, pareto)  # the same front as the pareto verb
    res.extras.update(extras)
    res.case = case
    return res


def pareto(case, points: int) -> dict:
    """A cost-selectivity front of ``points`` designs (epsilon constraint on the compiled cost problem)."""
    from tubewright.optimizer.design.alternatives import pareto_front

    if points < 2:
        raise ValueError("a Pareto front needs at least 2 points")
    return pareto_front(case, points)


def screen(case, method: str = "morris", samples: int | None = None, seed: int = 0, policy: str = "report",
           reoptimise: bool = False, batched: bool = True, workers: int = 1, progress=None):
    """Rank the [uncertain] quantities of a case: a ScreeningResult. ``samples`` defaults to
    DEFAULT_SAMPLES[method] (Morris trajectories or Sobol base samples) for every caller."""
    from tubewright.optimizer.screening.analysis import DEFAULT_SAMPLES, METHODS
    from tubewright.optimizer.screening.screen import screen as _screen

    if method not in METHODS:
        raise ValueError(f"method must be one of {', '.join(METHODS)}")
    n = DEFAULT_SAMPLES[method] if samples is None else int(samples)
    if n < 2:
        raise ValueError("samples must be at least 2")
    return _screen(case, method, n, seed, policy, batched=batched, progress=progress, reoptimise=reoptimise,
                   workers=workers)
