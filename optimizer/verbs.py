"""One function per reactor verb (simulate, optimize, pareto, screen). The command line (optimizer.cli) and
the study tasks (optimizer.study.tasks) both call these, so that a verb gives the same answer from either:
the same defaults, the same standard-tube ranking, the same ideal bound. Each returns a typed result; none
prints. The study verbs (run, status, report) live in optimizer.study, which calls these.

The design and screening layers import Pyomo and IPOPT: they are imported inside the verbs that need
them, so that simulating never pays for them."""

from __future__ import annotations

from tubewright.models.casefile import apply_overrides, build_case
from tubewright.models.errors import option_error


def _simulate_with_checks(case, checks: bool = True):
    from tubewright.models.simulator import simulate as run  # the integrators only when a verb simulates

    return run(case, checks=checks)


MIN_STANDARD_INNER, MAX_STANDARD_INNER = 0.01, 0.06  # m: the TEMA tubes ranked by standard_tubes = true
DEFAULT_MAX_HOURS = 2.0  # a screening estimated to take longer is refused unless the budget is raised
PROBE_FREE_ROWS, PROBE_ROWS = 600, 40  # screenings up to this many evaluations are not timed first


def simulate(case, on_profiles=None):
    """Simulate a case with every validity and safety check: a models.results.SimulationResult.
    ``on_profiles(result)`` is called once the profiles are known, before the checks (which re-simulate):
    the command line hands the figure to its second process then."""
    if on_profiles is None:
        return _simulate_with_checks(case, checks=True)
    from tubewright.models.simulator import add_checks

    result = _simulate_with_checks(case, checks=False)
    on_profiles(result)
    return add_checks(case, result)


def radial_check(case, points: int | None = None, one_d=None, grid_check: bool = True):
    """The two-dimensional model beside the one-dimensional one: a models.radial.RadialCheck. The case needs
    its [radial] table (CaseError otherwise)."""
    from tubewright.models.errors import CaseError
    from tubewright.models.radial import radial_check as check

    if case.radial is None:
        raise CaseError(case.source, "radial", "missing: the two-dimensional model needs the [radial] table "
                        "(solid_conductivity for a packed bed, or lambda_er and alpha_w; docs/case-reference.md)")
    if points is not None and not 1 <= points <= 20:
        raise option_error("--radial-points", f"must be 1..20 (the grid check doubles it), got {points}")
    return check(case, points, grid_check=grid_check, one_d=one_d)


def fit(case_path, data_path):
    """Kinetic parameters from laboratory runs: an optimizer.fitting.estimate.FitOutcome."""
    from tubewright.optimizer.fitting.estimate import fit as estimate

    return estimate(case_path, data_path)


def optimize(case, ideal: bool = False, starts: int | None = None, seed: int = 0, pareto: int | None = None,
             progress=None, on_optimum=None, scenarios: int | None = None, verify_samples: int | None = None,
             radial_tighten: bool = False, on_profiles=None, run_elsewhere=None):
    """The cheapest (or best) layout of a case: an OptimizationResult whose ``extras`` hold, as asked, the
    ranking of standard tubes (``[design] standard_tubes = true``: the best tube is then optimised), the
    ideal bound with its gap (``ideal``), a multi-start (``starts``, ``seed``) and a cost-selectivity front
    (``pareto`` points). ``result.case`` is the case that was optimised (with the chosen standard tube).
    ``progress``: see output.progress.Phases; ``on_optimum(result)`` is called as soon as the main optimum
    is known, before the alternatives are computed (the command line prints it then); ``on_profiles(design
    case, simulation, limit rows)`` as soon as its profiles are, before its checks (see design.optimise.optimise:
    the command line hands the figure to its second process then). ``scenarios``: also
    a robust design over that many scenarios of [uncertain] (optimizer.design.robust), verified on
    ``verify_samples`` fresh samples. When the radial criterion warns at the optimum (or ``radial_tighten``
    asks), the 2-D model checks it (optimizer.design.radial_check); ``radial_tighten`` re-optimises with the
    hot-spot limit tightened until the 2-D hot spot meets it. ``run_elsewhere(fn, *args)``: runs a function in
    another process and returns an object whose ``result()`` is its answer (output.second_process.SecondProcess.run);
    given, the 2-D check runs there beside the checks of the optimum."""
    from tubewright.optimizer.design.alternatives import multistart, pareto_front, rank_standard_tubes
    from tubewright.optimizer.design.ideal import ideal_bound
    from tubewright.optimizer.design.optimise import optimise
    from tubewright.optimizer.design.spec import read_design

    if starts is not None and starts < 1:
        raise option_error("--starts", f"must be at least 1, got {starts}")
    if scenarios is not None and scenarios < 1:
        raise option_error("--scenarios", f"must be at least 1, got {scenarios}")
    if verify_samples is not None and verify_samples < 10:
        raise option_error("--verify-samples", f"must be at least 10, got {verify_samples}")
    if pareto is not None and pareto < 2:
        raise option_error("--pareto", f"a front needs at least 2 points, got {pareto}")
    extras = {}
    if read_design(case).standard_tubes:
        ranking = rank_standard_tubes(case, MIN_STANDARD_INNER, MAX_STANDARD_INNER, progress)
        extras["standard_tubes"] = ranking
        best = next((r for r in ranking if r["objective"] is not None), None)
        if best is not None:
            diameter = f"{best['inner_diameter_m']} m"
            chosen = {"tube.inner_diameter": diameter, "tube.wall_thickness": f"{best['wall_thickness_m']} m",
                      "design.standard_tubes": False}
            if "inner_diameter" in case.raw.get("design", {}):  # a fixed design diameter would override the tube
                chosen["design.inner_diameter"] = diameter
            case = build_case(apply_overrides(case.raw, chosen, case.source), case.source)
    from tubewright.optimizer.design.radial_check import radial_design_check, start_early

    started = {}

    def profiles(design, simulation, limits):
        if on_profiles is not None:
            on_profiles(design, simulation, limits)
        if run_elsewhere is not None:
            started["check"] = start_early(design, simulation, radial_tighten, run_elsewhere)

    res = optimise(case, progress=progress, on_profiles=profiles)
    res.extras["base"] = base_design(case)
    res.case = case
    if on_optimum is not None:
        on_optimum(res)
    radial = radial_design_check(res, radial_tighten, progress, started.get("check"))
    if radial is not None:
        extras["radial_check"] = radial
    if ideal and res.ok:
        if progress is not None:
            progress("ideal bound (free temperature profile)")
        bound = ideal_bound(case)
        bound["gap"] = (res.objective - bound["objective"]) if bound["success"] else None
        extras["ideal_bound"] = bound
    if starts:
        extras["multistart"] = multistart(case, starts, seed, progress)
    if pareto:
        extras["pareto"] = pareto_front(case, pareto, progress)  # the same front as the pareto verb
    from tubewright.optimizer.design.robust import DEFAULT_SCENARIOS, DEFAULT_VERIFY_SAMPLES, read_robust, robust_design

    settings = read_robust(case)  # [robust] of the case; --scenarios (with its --seed), --verify-samples override
    if scenarios or settings:
        settings = settings or {"scenarios": DEFAULT_SCENARIOS, "seed": 0, "goal": "nominal",
                                "verify_samples": DEFAULT_VERIFY_SAMPLES}
        if scenarios:
            settings.update(scenarios=scenarios, seed=seed)
        if verify_samples:
            settings["verify_samples"] = verify_samples
        extras["robust"] = robust_design(case, settings["scenarios"], settings["seed"], settings["verify_samples"],
                                         nominal=res, progress=progress, goal=settings["goal"],
                                         nominal_weight=settings.get("nominal_weight", 0.5))
    res.extras.update(extras)
    res.case = case
    return res


COMPARED = ("max_temperature_K", "pressure_drop_Pa", "conversion", "product_selectivity", "production_rate_mol_s",
            "heat_removed_W", "steam_raised_kg_s")


def base_design(case) -> dict:
    """The design of the case as written (before optimisation) and its simulated key figures, to show
    beside the optimum."""
    from tubewright.optimizer.design.spec import DESIGN_FIELDS, DESIGN_KEYS, case_value

    design = {DESIGN_FIELDS[k]: case_value(case, k) for k in DESIGN_KEYS if case_value(case, k) is not None}
    sim = _simulate_with_checks(case, checks=False)
    figures = {k: sim.summary.get(k) for k in COMPARED if sim.summary.get(k) is not None}
    return {"design": design, "figures": figures, "status": sim.status}


def pareto(case, points: int) -> dict:
    """A cost-selectivity front of ``points`` designs (epsilon constraint on the compiled cost problem)."""
    from tubewright.optimizer.design.alternatives import pareto_front

    if points < 2:
        raise option_error("points", f"a front needs at least 2 points, got {points}")
    return pareto_front(case, points)


def screen(case, method: str = "morris", samples: int | None = None, seed: int = 0, policy: str = "censor",
           reoptimise: bool = False, batched: bool = True, workers: int = 1, progress=None,
           max_hours: float | None = DEFAULT_MAX_HOURS, radial: bool = False):
    """Rank the [uncertain] quantities of a case: a ScreeningResult. ``radial``: the outputs of every sample
    from the two-dimensional model (the case needs [radial]; batched like the 1-D model, about 3x slower).
    ``samples`` defaults to DEFAULT_SAMPLES[method] (Morris trajectories or Sobol base samples) for every
    caller and is checked by the method's rules. A screening whose estimated time (a timed probe of a few
    samples, extrapolated) passes ``max_hours`` is refused before it starts; ``max_hours=None`` accepts any
    time."""
    from tubewright.optimizer.screening.analysis import DEFAULT_SAMPLES, METHODS, POLICIES, check_samples, rows_for
    from tubewright.optimizer.screening.screen import screen as _screen
    from tubewright.optimizer.screening.uncertain import read_uncertain, salib_problem

    if method not in METHODS:
        raise option_error("--method", f"{method!r} is not allowed; allowed: {', '.join(METHODS)}")
    if policy not in POLICIES:
        raise option_error("--policy", f"{policy!r} is not allowed; allowed: {', '.join(POLICIES)}")
    if workers < 1:
        raise option_error("--workers", f"must be at least 1, got {workers}")
    if radial and reoptimise:
        raise option_error("--radial", "does not combine with --reoptimise (the design model is one-dimensional)")
    if radial and case.radial is None:
        from tubewright.models.errors import CaseError

        raise CaseError(case.source, "radial", "missing: screening with the two-dimensional model needs the "
                        "[radial] table")
    n = DEFAULT_SAMPLES[method] if samples is None else samples
    problem = check_samples(method, n)
    if problem:
        raise option_error("--samples", problem)
    if max_hours is not None:
        items = read_uncertain(case)
        rows = rows_for(salib_problem(items), method, n)
        hours = estimated_hours(case, items, rows, reoptimise, batched, workers, radial)
        if hours > max_hours:
            raise option_error("--samples", f"{rows} evaluations would take about {hours:.2g} h (estimated from a "
                               f"timed probe), more than the budget of {max_hours:g} h: use fewer samples, or "
                               "raise the budget (--max-hours H, or --yes to accept any time)")
    return _screen(case, method, n, seed, policy, batched=batched, progress=progress, reoptimise=reoptimise,
                   workers=workers, radial=radial)


def estimated_hours(case, items, rows: int, reoptimise: bool, batched: bool, workers: int,
                    radial: bool = False) -> float:
    """Hours for ``rows`` evaluations, from timing a probe (skipped for screenings below a few hundred
    evaluations, which take seconds). A probe costs at most a few seconds."""
    import time

    import numpy as np
    from tubewright.optimizer.screening.evaluation import evaluate

    if rows <= PROBE_FREE_ROWS:
        return 0.0
    probe = np.random.default_rng(0).uniform(0.05, 0.95, size=(PROBE_ROWS, len(items)))
    t0 = time.perf_counter()
    if reoptimise:
        from tubewright.optimizer.screening.reoptimise import reoptimise_evaluator

        reoptimise_evaluator(case, items)(probe[:2])
        per_row = (time.perf_counter() - t0) / 2
    else:
        evaluate(case, items, probe, batched=batched, radial=radial)
        per_row = (time.perf_counter() - t0) / PROBE_ROWS / max(1, min(workers, 2) * 0.9)
    return per_row * rows / 3600.0
