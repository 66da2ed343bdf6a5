"""Weighted least squares of kinetic parameters over all laboratory runs at once, solved by IPOPT through
the bridge: one collocation model per run (the tube model of optimizer.design.collocation, built from the
same balances as the simulator), all sharing the free kinetic parameters (k, E_a, reaction orders); every
run starts from a simulation of its run at the starting parameters. Runs whose models print alike (see
_template_key) are one Pyomo block and its copies in the bridge (nlp.copies): building grows with the
groups, not with the runs. A differential run (measured formation rates only) needs no block: its rates are
the rate law at its feed conditions.

Arrhenius laws are fitted about one reference temperature T_fit inside the data (optimizer.fitting.spec):
the free parameters are k(T_fit) and E_a, and the case's own k_ref (at its T_ref) is the expression
k(T_fit) exp(-E_a/R (1/T_ref - 1/T_fit)). The statistics (optimizer.fitting.statistics) use the Jacobian of
the weighted residuals from the collocation model's sensitivities (optimizer.fitting.sensitivity), with
central differences of adaptive-integrator simulations as the fall-back; the integrator checks the mesh at
the estimate."""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace

import numpy as np
from tubewright.models.backend import NUMPY, pyomo_backend
from tubewright.models.errors import CaseError
from tubewright.models.outcomes import Reason, Status
from tubewright.models.reactions import arrhenius
from tubewright.models.results import PROFILE_POINTS
from tubewright.models.summary import conversion
from tubewright.optimizer.fitting.data import read_runs
from tubewright.optimizer.fitting.sensitivity import residual_jacobian
from tubewright.optimizer.fitting.spec import read_fit
from tubewright.optimizer.fitting.statistics import (
    arrhenius_reference_temperature,
    gauss_newton_statistics,
    lack_of_fit,
)

JACOBIAN_STEP = 1e-4  # relative step of the central differences of the residual Jacobian (fall-back)
MESH_TOLERANCE_SIGMA = 0.1  # collocation and integrator residuals at the estimate further apart: a warning
JACOBIAN_RTOL = 1e-10  # integrator tolerance of those simulations (the step's effect is ~1e-4 relative)
MESH_CHECK_RTOL = 1e-8  # integrator tolerance of the mesh check alone: its error stays far below 0.1 sigma


@dataclass
class FitOutcome:
    status: Status  # OK or FAILED
    reason: Reason
    message: str
    reference_temperature: float = math.nan
    parameters: list = field(default_factory=list)  # names
    estimates: dict = field(default_factory=dict)  # name -> value (k at T_fit, E_a)
    # reaction -> {"k_ref", "activation_energy", "t_ref", "orders", "adsorption": {species: {"k_ref", "heat"}}}
    case_values: dict = field(default_factory=dict)
    statistics: object = None  # FitStatistics
    lack_of_fit: dict | None = None
    residuals: list = field(default_factory=list)  # per observation: row, quantity, measured, fitted, sigma
    excluded: list = field(default_factory=list)  # runs left out, with why
    solver: dict = field(default_factory=dict)
    warnings: list = field(default_factory=list)

    def as_dict(self) -> dict:
        return {"status": self.status, "reason": self.reason, "message": self.message,
                "reference_temperature_K": self.reference_temperature, "estimates": self.estimates,
                "case_values": self.case_values,
                "statistics": self.statistics.as_dict() if self.statistics is not None else None,
                "lack_of_fit": self.lack_of_fit, "observations": self.residuals, "excluded_runs": self.excluded,
                "solver": self.solver, "warnings": self.warnings}


def kinetics_at(case, spec, t_fit, values, backend):
    """The case's reactions with the free parameters at ``values`` (fitted coordinates), as numbers or
    Pyomo expressions: {reaction index: {"k_ref": k at the case's T_ref, "activation_energy": E_a,
    "orders": {...}}} for the reactions with a free parameter."""
    out = {}
    for p, v in zip(spec.parameters, values):
        out.setdefault(p.index, {})[p.kind] = v
    kinetics = {}
    for j, entry in out.items():
        rx = case.reactions[j]
        e_act = entry.get("activation_energy", rx.activation_energy)
        k_fit = entry.get("k_ref", arrhenius(NUMPY, rx.k_ref, rx.activation_energy, rx.t_ref, t_fit))
        orders = {s: entry.get(f"orders.{s}", o) for s, o in rx.orders.items()}
        terms = []
        for a in rx.adsorption:  # K at T_fit and the heat of adsorption, like k and E_a
            heat = entry.get(f"adsorption.{a.species}.heat", a.heat)
            k_ads = entry.get(f"adsorption.{a.species}.k_ref", arrhenius(NUMPY, a.k_ref, a.heat, rx.t_ref, t_fit))
            terms.append(replace(a, k_ref=arrhenius(backend, k_ads, heat, t_fit, rx.t_ref), heat=heat))
        kinetics[j] = {"k_ref": arrhenius(backend, k_fit, e_act, t_fit, rx.t_ref), "activation_energy": e_act,
                       "orders": orders, "adsorption": tuple(terms)}
    return kinetics


def with_kinetics(case, kinetics):
    reactions = list(case.reactions)
    for j, entry in kinetics.items():
        reactions[j] = replace(reactions[j], **entry)
    return replace(case, reactions=tuple(reactions))


def start_values(case, spec, t_fit) -> np.ndarray:
    values = []
    for p in spec.parameters:
        rx = case.reactions[p.index]
        if p.kind == "activation_energy":
            values.append(rx.activation_energy)
        elif p.kind.startswith("orders."):
            values.append(rx.orders[p.kind.split(".", 1)[1]])
        elif p.kind.startswith("adsorption."):
            _, species, field = p.kind.split(".")
            a = rx.adsorption_term(species)
            values.append(a.heat if field == "heat" else arrhenius(NUMPY, a.k_ref, a.heat, rx.t_ref, t_fit))
        else:
            values.append(arrhenius(NUMPY, rx.k_ref, rx.activation_energy, rx.t_ref, t_fit))
    return np.asarray(values, dtype=float)


def predicted(case, name: str, f_in, f_out, T_out, n_tubes, temperature_at=None):
    """A measured quantity from the inlet and outlet flows per tube, the outlet temperature and
    ``temperature_at(thermocouple)`` for the axial temperatures (any backend: numbers or Pyomo expressions)."""
    kind, _, species = name.partition(".")
    if kind == "conversion":
        return conversion(case, f_in, f_out)
    if kind == "outlet_temperature":
        return T_out
    if kind == "axial_temperature":
        return temperature_at(species)
    k = case.index(species)
    if kind == "outlet_flow":
        return n_tubes * f_out[k]
    return f_out[k] / sum(f_out)  # outlet_mole_fraction


def is_rate(name: str) -> bool:
    """A formation rate of a differential run: predicted at the feed conditions, no tube integrated."""
    return name.startswith("rate.")


def predicted_rate(m, case, name: str):
    """The measured formation rate ``rate.SPECIES`` at the run's feed conditions (any backend)."""
    from tubewright.models.balances import formation_rate

    feed = case.feed
    return formation_rate(m, case, name.partition(".")[2], list(feed.molar_flows), feed.temperature, feed.pressure)


def sigma_of(spec, name: str, measured: float) -> float:
    how, value = spec.errors[name.partition(".")[0]]
    return value if how == "absolute" else value * max(abs(measured), 1e-300)


def weighted_residuals(run, spec, predictions) -> list:
    """(predicted - measured) / sigma of each measured quantity of ``run``, in the order of run.measured."""
    return [(p - y) / sigma_of(spec, q, y) for p, (q, y) in zip(predictions, run.measured.items())]


def is_differential(run) -> bool:
    """A run that measures formation rates only: no tube to integrate."""
    return all(is_rate(q) for q in run.measured)


def _cases_at(runs, spec, t_fit, values) -> list:
    """Each run's case with the kinetics of the estimator's ``values``."""
    return [with_kinetics(run.case, kinetics_at(run.case, spec, t_fit, values, NUMPY)) for run in runs]


def _simulate_tubes(runs, cases, rtol: float | None = None, points=()) -> dict:
    """{position: profiles} of the runs with a tube to integrate, from their ``cases``: profiles only, runs
    that differ only in feed and coolant conditions in one integration (models.batch.simulate_profiles)."""
    from tubewright.models.batch import simulate_profiles

    tube = [i for i, run in enumerate(runs) if not is_differential(run)]
    return dict(zip(tube, simulate_profiles([cases[i] for i in tube], rtol, points, PROFILE_POINTS)))


def simulate_predictions(run_case, names, thermocouples=None, rtol: float = JACOBIAN_RTOL):
    """The measured quantities of one run: outlet quantities and the temperatures at the thermocouples
    (name -> position [m]) from the adaptive integrator at ``rtol`` (None where it stops early), formation
    rates at the feed conditions."""
    from tubewright.models.simulator import simulate

    if all(is_rate(q) for q in names):
        return [float(predicted_rate(NUMPY, run_case, q)) for q in names], None
    sim = simulate(replace(run_case, numerics=replace(run_case.numerics, rtol=rtol)), checks=False,
                   points=thermocouple_points(names, thermocouples), grid=PROFILE_POINTS)
    return (predictions_from(run_case, names, thermocouples, sim.columns) if sim.ok else None), sim


def thermocouple_points(names, thermocouples) -> list:
    """The positions [m] of the measured axial temperatures among ``names``."""
    return [(thermocouples or {})[q.partition(".")[2]] for q in names if q.startswith("axial_temperature.")]


def predictions_from(run_case, names, thermocouples, cols) -> list:
    """The measured quantities ``names`` of one run from its simulated profile columns (SimulationResult's,
    holding the thermocouple positions exactly)."""
    thermocouples = thermocouples or {}
    n = run_case.tube.count
    f_in = [cols[f"F_{s}_mol_s"][0] / n for s in run_case.names]
    f_out = [cols[f"F_{s}_mol_s"][-1] / n for s in run_case.names]

    def temperature_at(tc):  # a profile point: exact from the dense solution (simulate's points)
        return float(np.interp(thermocouples[tc], cols["z_m"], cols["T_K"]))

    return [float(predicted_rate(NUMPY, run_case, q) if is_rate(q) else
                  predicted(run_case, q, f_in, f_out, cols["T_K"][-1], n, temperature_at)) for q in names]


def fit(case_path, data_path, nfe: int | None = None, ncp: int | None = None,
        share_blocks: bool = True) -> FitOutcome:
    """Fit the free kinetic parameters of ``case_path``'s [fit] to the runs of ``data_path``.
    ``share_blocks``: runs whose tube blocks print alike share one built block (the others are its copies in
    the bridge); False builds every run's block (the same problem, slower: a check)."""
    from tubewright.models import load_case

    t0 = time.perf_counter()
    base = load_case(case_path)
    spec = read_fit(base)
    runs = read_runs(data_path, case_path, spec.thermocouples)
    for run in runs:
        for name in run.measured:
            if name.partition(".")[0] not in spec.errors:
                raise CaseError(str(case_path), f"fit.errors.{name.partition('.')[0]}",
                                f"missing: the data ({data_path}) measure {name}; state its error (absolute, or "
                                'relative as "2 %")')
    # the inputs are read and checked: only now the heavy imports (the simulator, in _simulate_tubes)
    t_fit = spec.reference_temperature or arrhenius_reference_temperature([r.case.feed.temperature for r in runs])
    theta0 = start_values(base, spec, t_fit)
    lower = np.array([p.lower * s if p.is_constant else p.lower for p, s in zip(spec.parameters, theta0)])
    upper = np.array([p.upper * s if p.is_constant else p.upper for p, s in zip(spec.parameters, theta0)])
    names = [p.name for p in spec.parameters]
    out = FitOutcome(Status.FAILED, Reason.SOLVER_FAILED, "", t_fit, names)

    phases = {}  # seconds per phase, in out.solver["phases_s"]
    t_phase = time.perf_counter()
    # the runs that the model can simulate at the start; the others are listed, not fitted
    usable = []
    start_cases = _cases_at(runs, spec, t_fit, theta0)
    start_sims = _simulate_tubes(runs, start_cases)
    for i, (run, start_case) in enumerate(zip(runs, start_cases)):
        if i not in start_sims:  # a differential run: no tube to integrate
            rates = [predicted_rate(NUMPY, start_case, q) for q in run.measured]
            if not np.all(np.isfinite(rates)):
                out.excluded.append({"row": run.row, "reason": "its rates are not finite at the starting parameters"})
                continue
            usable.append((run, None))
            continue
        sim = start_sims[i]
        if not sim.ok:
            out.excluded.append({"row": run.row, "reason": f"cannot be simulated at the starting parameters: "
                                 f"{sim.reason}"})
            continue
        usable.append((run, sim))
    n_obs = sum(len(r.measured) for r, _ in usable)
    if n_obs <= len(names):
        out.reason = Reason.TOO_FEW_MEASUREMENTS
        out.message = (f"{n_obs} usable measurements for {len(names)} parameters: nothing to fit "
                       f"({len(out.excluded)} runs excluded)")
        return out

    # IPOPT works on ln k (rate constants span decades; k = exp(ln k) stays positive) and on E_a
    is_k = np.array([p.is_constant for p in spec.parameters])
    internal0, low_i, up_i = (on_rate_constants(a, is_k, np.log) for a in (theta0, lower, upper))
    phases["start_simulations"] = time.perf_counter() - t_phase
    t_phase = time.perf_counter()
    m, nlp, place, observations, weighted, scaling = _fit_model(usable, spec, t_fit, is_k, (low_i, up_i), internal0,
                                                                (nfe, ncp), share_blocks)
    num = base.numerics
    # constr_mult_init_max 0: the constraint multipliers start at zero instead of from a least-squares estimate
    # (one factorization fewer, 0.05 s at 20 runs; the same 7 iterations: the start is feasible, from simulations)
    opts = {"max_iter": 500, "tol": 1e-9, "mu_strategy": "adaptive", "mumps_pivtol": 1e-4, "constr_mult_init_max": 0.0,
            "mumps_pivot_order": num.mumps_pivot_order,
            "mumps_scaling": num.mumps_scaling, "mumps_permuting_scaling": num.mumps_permuting_scaling}
    phases["build_and_compile"] = time.perf_counter() - t_phase
    t_phase = time.perf_counter()
    solved = nlp.solve(options=opts, scaling=scaling, multipliers=False)
    if spec.starts > 1:
        solved = _more_starts(m, nlp, usable, place, spec, t_fit, (low_i, up_i, is_k), solved, opts, scaling, out)
    theta = on_rate_constants([v.value for v in m.theta.values()], is_k, np.exp)
    out.solver = {**solved.as_dict(), "variables": nlp.n, "ipopt_variables": nlp.times["ipopt_variables"],
                  "forms": nlp.times["forms"], "copied_runs": nlp.times["copies"],
                  "compile_s": nlp.times["compile_s"], "runs": len(usable), **out.solver}
    if not solved.success:
        out.message = f"IPOPT did not converge: {solved.status_name} ({solved.message})"
        return out
    at_bound = [n for n, v, lo, hi in zip(names, theta, lower, upper) if min(v - lo, hi - v) <= 1e-6 * abs(v)]
    if at_bound:
        out.warnings.append(f"{', '.join(at_bound)} at a bound of [fit.parameters]: the intervals do not hold there; "
                            "widen the bounds or check the data")

    phases["estimation"] = time.perf_counter() - t_phase
    t_phase = time.perf_counter()
    at_estimate = residual_jacobian(nlp, list(m.theta.values()), weighted)
    checked, sim_failed = _residuals_and_jacobian(usable, spec, t_fit, theta, jacobian=at_estimate is None)
    if at_estimate is not None:  # the collocation model's own residuals and sensitivities
        residuals, jac = at_estimate[0], at_estimate[1] / np.where(is_k, theta, 1.0)  # d/d ln k -> d/dk
        out.solver["statistics_from"] = "collocation sensitivities"
    else:
        residuals, jac = checked
        out.solver["statistics_from"] = "central differences of the adaptive integrator"
    phases["statistics_jacobian"] = time.perf_counter() - t_phase
    out.solver["phases_s"] = phases
    if sim_failed:
        out.message = f"the adaptive integrator could not simulate run {sim_failed} at or near the estimate"
        out.reason = Reason.RUN_NOT_SIMULATED
        return out
    if at_estimate is not None:  # the integrator checks the mesh: its residuals at the estimate beside the model's
        gap = np.abs(checked[0] - residuals)
        worst = int(np.argmax(gap))
        out.solver["mesh_check_sigma"] = float(gap[worst])
        if gap[worst] > MESH_TOLERANCE_SIGMA:
            run, name, _, _ = observations[worst]
            out.warnings.append(f"the collocation mesh and the adaptive integrator differ by {gap[worst]:.2g} sigma "
                                f"on {name} of row {run.row} at the estimate: refine [numerics] finite_elements")
    stats = gauss_newton_statistics(names, theta, residuals, jac, error_model=spec.error_model)
    groups = [f"{sorted(run.conditions.items())}|{name}" for run, name, _, _ in observations]
    out.lack_of_fit = lack_of_fit(residuals, groups, len(names))
    out.statistics = stats
    out.warnings.extend(stats.warnings)
    if out.lack_of_fit is not None and out.lack_of_fit["p_value"] < 0.01:
        out.warnings.append(f"lack of fit against the replicates (F = {out.lack_of_fit['F']:.3g}, "
                            f"p = {out.lack_of_fit['p_value']:.2g}): the model misses systematic features of the data")
    out.estimates = dict(zip(names, map(float, theta)))
    kin = kinetics_at(base, spec, t_fit, theta, NUMPY)
    out.case_values = {base.reactions[j].name: {
        "k_ref": float(e["k_ref"]), "activation_energy": float(e["activation_energy"]),
        "t_ref": float(base.reactions[j].t_ref), "orders": {s: float(o) for s, o in e["orders"].items()},
        "adsorption": {a.species: {"k_ref": float(a.k_ref), "heat": float(a.heat)} for a in e["adsorption"]}}
        for j, e in kin.items()}
    scale = math.sqrt(stats.residual_variance) if spec.error_model == "estimated" else 1.0
    out.residuals = [{"row": run.row, "quantity": name, "measured": y, "sigma": sigma * scale,
                      "fitted": y + r * sigma} for (run, name, y, sigma), r in zip(observations, residuals)]
    out.status, out.reason = Status.OK, Reason.FITTED
    out.message = f"{len(names)} parameters from {n_obs} measurements of {len(usable)} runs"
    out.solver["seconds"] = time.perf_counter() - t0
    return out


def _fit_model(usable, spec, t_fit, is_k, box, internal0, mesh, share_blocks):
    """The fit's Pyomo model and its compiled NLP: the shared parameters ``m.theta`` (ln k and E_a within
    ``box``, from ``internal0``), one tube block per group of alike runs (the others its copies in the
    bridge), loaded with every run's data and starting values. Returns (model, CompiledNLP, place: usable
    index -> (template block, store or None, copy number), observations (run, name, y, sigma) and weighted
    residuals (expression, store or None, copy number) per measurement, IPOPT scaling)."""
    import pyomo.core as pyo
    from tubewright.optimizer.design.collocation import build_tube_model
    from tubewright.optimizer.design.spec import DesignSpec
    from tubewright.optimizer.nlp.bridge import CompiledNLP
    from tubewright.optimizer.nlp.copies import Copies
    from tubewright.optimizer.nlp.families import origin
    from tubewright.optimizer.nlp.garbage_collection import paused_collection

    (low_i, up_i), (nfe, ncp) = box, mesh
    with paused_collection():  # the run blocks and their compilation: see nlp.garbage_collection
        m = pyo.ConcreteModel(name="fit")
        m.theta = pyo.Var(range(len(is_k)), bounds=lambda m, i: (low_i[i], up_i[i]),
                          initialize=lambda m, i: internal0[i])
        values = [pyo.exp(m.theta[k]) if is_k[k] else m.theta[k] for k in range(len(is_k))]
        # runs whose tube blocks would print alike are built once: the first as a Pyomo block (the template),
        # the others as its copies in the bridge (nlp.copies), loaded with their own data
        groups: dict = {}
        for i, (run, sim) in enumerate(usable):
            if sim is not None:
                groups.setdefault(_template_key(run, spec, nfe, ncp) if share_blocks else i, []).append(i)
        m.run = pyo.Block(range(len(groups)))
        templates = {}  # usable index of a group's first run -> its block
        for g, members in enumerate(groups.values()):
            run, sim = usable[members[0]]
            b = templates[members[0]] = m.run[g]
            _, pcase = build_tube_model(run.case, DesignSpec(), int(nfe or run.case.numerics.finite_elements),
                                        int(ncp or run.case.numerics.collocation_points), block=b,
                                        kinetics=kinetics_at(run.case, spec, t_fit, values, pyomo_backend()),
                                        outputs=False)  # no measured quantity reads Q or tau
            _add_residuals(b, run, spec, pcase)
        differential = []  # the weighted residuals of the differential runs: rate laws of the parameters
        for run, sim in usable:
            if sim is None:
                case = with_kinetics(run.case, kinetics_at(run.case, spec, t_fit, values, pyomo_backend()))
                differential += weighted_residuals(run, spec, [predicted_rate(pyomo_backend(), case, name)
                                                               for name in run.measured])
        m.objective = pyo.Objective(expr=sum(b.objective_term for b in templates.values())
                                    + 0.5 * sum(r**2 for r in differential))
        copied = [members for members in groups.values() if len(members) > 1]
        nlp = CompiledNLP(m, copies=[Copies(templates[ms[0]], len(ms) - 1, templates[ms[0]].objective_term)
                                     for ms in copied])
        place = {}  # usable index -> (template block, its store or None, copy number)
        for members in groups.values():
            store = nlp.copy_stores[copied.index(members)] if len(members) > 1 else None
            for k, i in enumerate(members):
                place[i] = (templates[members[0]], store, k)
        x_scale, g_scale, copy_scales = _load_runs(usable, spec, place, [sim for _, sim in usable])
        observations, weighted = [], []  # per measurement: (run, name, y, sigma), (expression, store, copy)
        d = iter(differential)
        for i, (run, sim) in enumerate(usable):
            for j, (name, y) in enumerate(run.measured.items()):
                observations.append((run, name, y, sigma_of(spec, name, y)))
                if sim is None:
                    weighted.append((next(d), None, 0))
                else:
                    b, store, k = place[i]
                    weighted.append((b.residual[j], store if k else None, k))
    for k, v in enumerate(m.theta.values()):
        x_scale[id(v)] = 1.0 / max(abs(internal0[k]), 1.0)
    n_model, m_model = nlp.model_size  # the copies' factors follow from copy_scales
    x_s, g_s = np.ones(nlp.n), np.ones(nlp.m)
    x_s[:n_model] = [x_scale.get(id(v), 1.0) for v in nlp.variables[:n_model]]
    g_s[:m_model] = [g_scale.get(id(origin(c)), 1.0) for c in nlp.constraints[:m_model]]
    for store, k, var_s, con_s in copy_scales:
        x_s[store.columns(k)], g_s[store.rows(k)] = var_s, con_s
    scaling = (1.0 / max(nlp.objective_value(), 1.0), x_s, g_s)
    return m, nlp, place, observations, weighted, scaling


def _template_key(run, spec, nfe, ncp):
    """Runs with equal keys have tube blocks that print alike: one is built, the others are its copies. The
    key holds the mesh, the case beyond what becomes inputs (collocation.replica_key), the reactions as they
    are (the fitted kinetics' constants come from them), the measured quantities in order and, when axial
    temperatures are measured, the tube length (it places the thermocouples on the mesh)."""
    from tubewright.optimizer.design.collocation import replica_key

    case = run.case
    axial = any(name.startswith("axial_temperature.") for name in run.measured)
    return (int(nfe or case.numerics.finite_elements), int(ncp or case.numerics.collocation_points),
            replica_key(case), repr(case.reactions), tuple(run.measured), case.tube.length if axial else None)


def _add_residuals(b, run, spec, pcase):
    """The run's weighted residuals on its tube block: ``b.residual[j]`` = (prediction - b.measured[j]) /
    b.sigma[j] for its j-th measured quantity (measured values and sigmas are inputs, so that the block
    stands for any run of its group), and ``b.objective_term`` = half their sum of squares."""
    import pyomo.core as pyo
    from tubewright.optimizer.design.collocation import collocation_value

    names = list(run.measured)
    f_in = [b.F[s, 0.0] for s in run.case.names]
    f_out = [b.F[s, 1.0] for s in run.case.names]
    length = run.case.tube.length
    # a rate measured beside outlet quantities: the rate law at the feed, whose flows are the block's inputs
    at_feed = replace(pcase, feed=replace(pcase.feed, molar_flows=tuple(b.feed_flow.values())))

    def temperature_at(tc):
        return collocation_value(b, b.T, spec.thermocouples[tc] / length)

    def prediction(name):
        if is_rate(name):
            return predicted_rate(pyomo_backend(), at_feed, name)
        return predicted(run.case, name, f_in, f_out, b.T[1.0], pcase.tube.count, temperature_at)

    b.measured = pyo.Param(range(len(names)), mutable=True, initialize=0.0)
    b.sigma = pyo.Param(range(len(names)), mutable=True, initialize=1.0)
    b.residual = pyo.Expression(range(len(names)), rule=lambda b, j: (prediction(names[j]) - b.measured[j])
                                / b.sigma[j])
    b.objective_term = pyo.Expression(expr=0.5 * sum(r**2 for r in b.residual.values()))


def _load_runs(usable, spec, place, sims):
    """Every tube run's data into its block or its copy (``place``: usable index -> (template block, store,
    copy number)): its case's inputs, its measured values and sigmas, its states from ``sims[i]`` (a copy's
    as an array, collocation.state_positions). Returns IPOPT's scale factors: by id of variable and of
    constraint for the built blocks, and per copy (store, copy number, factors of the template's variables,
    of its constraints). Each template ends holding its own run."""
    from tubewright.optimizer.design.collocation import (
        flat_states,
        initialise_from_simulation,
        load_case_inputs,
        scale_factor,
        simulation_states,
        state_positions,
        state_scaling,
        tube_scale_factors,
        tube_scale_keys,
    )
    from tubewright.optimizer.design.spec import DesignSpec
    from tubewright.optimizer.nlp.families import origin

    x_scale, g_scale, copy_scales = {}, {}, []
    layouts = {}  # per store: where its template's variables sit among the states, and their scale keys
    copies_first = sorted(place, key=lambda i: place[i][2] == 0)
    for i in copies_first:
        run, sim = usable[i][0], sims[i]
        b, store, k = place[i]
        load_case_inputs(b, run.case, DesignSpec())
        for j, (name, y) in enumerate(run.measured.items()):
            b.measured[j] = y
            b.sigma[j] = sigma_of(spec, name, y)
        scales = state_scaling(b, run.case, sim)
        if not k:
            initialise_from_simulation(b, run.case, sim)
            var_s, con_s = tube_scale_factors(b, run.case, scales)
            x_scale.update(var_s)
            g_scale.update(con_s)
            continue
        if id(store) not in layouts:
            var_keys, con_keys = tube_scale_keys(b, run.case)
            keys = sorted({*var_keys.values(), *con_keys.values()}, key=repr)
            slot = {key: n for n, key in enumerate(keys)}  # len(keys): no key, factor 1
            layouts[id(store)] = (state_positions(b, run.case, store.variables),
                                  np.array([0.0 if v.value is None else v.value for v in store.variables]), keys,
                                  np.array([slot.get(var_keys.get(id(v)), len(keys)) for v in store.variables]),
                                  np.array([slot.get(con_keys.get(id(origin(c))), len(keys))
                                            for c in store.constraints]))
        positions, others, keys, var_slot, con_slot = layouts[id(store)]
        values = np.where(positions >= 0, flat_states(simulation_states(b, run.case, sim))[positions], others)
        # build_tube_model's variable bounds come from the case's numerics, which replica_key keeps: alike runs
        # share them, and the copy keeps the template's
        store.capture(k, values, bounds=False)
        factors = np.array([scale_factor(key, run.case, scales) for key in keys] + [1.0])
        copy_scales.append((store, k, factors[var_slot], factors[con_slot]))
    return x_scale, g_scale, copy_scales


def on_rate_constants(values, is_k, fn):
    """``fn`` (ln or exp) applied to the rate-constant entries only (E_a stays as it is)."""
    out = np.array(values, dtype=float)
    out[is_k] = fn(out[is_k])
    return out


MAX_DRAWS_PER_START = 20  # random starts whose runs cannot all be simulated are drawn again, up to this many


def _more_starts(m, nlp, usable, place, spec, t_fit, box, first, opts, scaling, out):
    """Solve again from ``spec.starts - 1`` random points (seeded; ln k and E_a uniform within the bounds),
    each run's block initialised from its simulation there; keep the best converged optimum."""
    low, up, is_k = box
    rng = np.random.default_rng(spec.seed)
    best, best_x = first, [v.value for v in nlp.variables]
    objectives = [first.objective if first.success else None]
    drawn = 0
    while len(objectives) < spec.starts and drawn < MAX_DRAWS_PER_START * spec.starts:
        drawn += 1
        internal = low + rng.random(len(low)) * (up - low)
        kinetics_values = on_rate_constants(internal, is_k, np.exp)
        runs = [run for run, _ in usable]
        drawn_sims = _simulate_tubes(runs, _cases_at(runs, spec, t_fit, kinetics_values))
        if not all(sim.ok for sim in drawn_sims.values()):
            continue  # a run cannot be simulated from this start: draw another
        sims = [drawn_sims.get(k) for k in range(len(usable))]  # None: a differential run
        for k, v in enumerate(m.theta.values()):
            v.set_value(float(internal[k]))
        _load_runs(usable, spec, place, sims)
        solved = nlp.solve(options=opts, scaling=scaling, multipliers=False)
        objectives.append(solved.objective if solved.success else None)
        if solved.success and (not best.success or solved.objective < best.objective):
            best, best_x = solved, [v.value for v in nlp.variables]
    for v, x in zip(nlp.variables, best_x):
        v.set_value(x, skip_validation=True)
    found = [o for o in objectives if o is not None]
    out.solver["starts"] = {"asked": spec.starts, "ran": len(objectives), "converged": len(found),
                            "drawn": drawn + 1, "objectives": objectives, "seed": spec.seed}
    if len(objectives) < spec.starts:
        out.warnings.append(f"multi-start: {len(objectives)} of {spec.starts} starts ran; the other random points "
                            "could not be simulated for every run")
    if found and max(found) - min(found) > 1e-6 * max(1.0, abs(min(found))):
        out.warnings.append(f"multi-start: the starts reached different optima (objective {min(found):.6g} to "
                            f"{max(found):.6g}); the best is kept")
    return best


def _residuals_and_jacobian(usable, spec, t_fit, theta, jacobian: bool = True):
    """((weighted residuals at ``theta``, their Jacobian by central differences or None), the row of a run
    that could not be simulated or None), both from the adaptive integrator."""
    runs = [run for run, _ in usable]

    def residuals_at(values):
        r = []
        for run, case in zip(runs, _cases_at(runs, spec, t_fit, values)):
            pred, _ = simulate_predictions(case, list(run.measured), spec.thermocouples, JACOBIAN_RTOL)
            if pred is None:
                return None, run.row
            r.extend(weighted_residuals(run, spec, pred))
        return np.array(r), None

    if not jacobian:  # the mesh check alone
        return _mesh_check_residuals(usable, spec, t_fit, theta)
    r0, failed = residuals_at(theta)
    if failed is not None:
        return (r0, None), failed
    jac = np.empty((len(r0), len(theta)))
    for k in range(len(theta)):
        h = JACOBIAN_STEP * max(abs(theta[k]), 1e-300)
        up, down = theta.copy(), theta.copy()
        up[k] += h
        down[k] -= h
        r_up, failed = residuals_at(up)
        r_down, failed_down = residuals_at(down)
        if failed is not None or failed_down is not None:
            return (None, None), failed or failed_down
        jac[:, k] = (r_up - r_down) / (2 * h)
    return (r0, jac), None


def _mesh_check_residuals(usable, spec, t_fit, theta):
    """(The weighted residuals at ``theta`` from the adaptive integrator at MESH_CHECK_RTOL, None), or
    ((None, None), the row of a run it cannot simulate). The tube runs that differ only in feed and coolant
    conditions share one integration (models.batch), with every thermocouple position on its grid."""
    runs = [run for run, _ in usable]
    cases = _cases_at(runs, spec, t_fit, theta)
    points = sorted({p for run in runs for p in thermocouple_points(list(run.measured), spec.thermocouples)})
    sims = _simulate_tubes(runs, cases, MESH_CHECK_RTOL, points)
    r = []
    for k, (run, _) in enumerate(usable):
        names = list(run.measured)
        if k in sims and not sims[k].ok:
            return (None, None), run.row
        pred = (predictions_from(cases[k], names, spec.thermocouples, sims[k].columns) if k in sims else
                [float(predicted_rate(NUMPY, cases[k], q)) for q in names])
        r.extend(weighted_residuals(run, spec, pred))
    return (np.array(r), None), None
