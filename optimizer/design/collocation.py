"""The collocation model of the tube: pyomo.dae, Radau collocation on the normalised axial coordinate
xi = z / L (so that the length can be a decision variable), built from the same balance functions as the
simulator (``models.balances.axial_derivatives`` through the Pyomo backend).

States per tube: F_i(xi), T, P, Tc, Q (heat to the coolant, whole reactor), tau (Q and tau only when asked
for: OUTPUT_STATES). For each state X: dX/dxi = L * f_X(state), written once on a one-element template that
the bridge repeats over the elements (nlp.families). Design quantities are Pyomo Vars when free and mutable
Params when fixed; kinetic parameters (k_ref, E_a per reaction) and the U multiplier are mutable Params, so a
study changes them and re-solves without rebuilding.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pyomo.core as pyo  # pyomo.core and pyomo.dae only: pyomo.environ's other packages cost 0.1 s a start
import pyomo.dae as dae
import pyomo.dae.plugins.colloc  # noqa: F401  (registers the "dae.collocation" transformation)
from tubewright.models.backend import NUMPY, pyomo_backend
from tubewright.models.balances import axial_derivatives
from tubewright.models.correlations import water_saturation_temperature
from tubewright.models.state import TAIL, StateLayout
from tubewright.optimizer.design.spec import DESIGN_KEYS, case_value
from tubewright.optimizer.nlp.families import RowFamily, declare_family


def _design_component(model, name, spec):
    """A free design quantity becomes a Var within its bounds, a fixed one a mutable Param (its value set by
    load_case_inputs)."""
    if name in spec.free:
        fv = spec.free[name]
        comp = pyo.Var(bounds=(fv.lower, fv.upper), initialize=fv.start)
    else:
        comp = pyo.Param(mutable=True, initialize=0.0)
    model.add_component(f"design_{name}", comp)
    return comp


def parametrised_case(model, case, spec, kinetics=None, shared=None):
    """The case with every design quantity, the wall thickness, the kinetic parameters and the U multiplier
    replaced by Pyomo components of ``model``. ``kinetics``: {reaction index: {"k_ref": component,
    "activation_energy": component, "orders": {species: component or number}}} to use instead of the
    model's own parameters (a fit shares them between the models of its runs). ``shared``: a model whose
    design components this one uses (the scenarios of a robust design share the design)."""
    if shared is not None:
        d = shared.design
    else:
        d = {}
        for name in DESIGN_KEYS:
            if case_value(case, name) is None:
                continue  # e.g. no coolant flow in a boiling-water case
            d[name] = _design_component(model, name, spec)
    model.design = d
    n_rx = len(case.reactions)
    model.k_ref = pyo.Param(range(n_rx), mutable=True, initialize=0.0)
    model.e_act = pyo.Param(range(n_rx), mutable=True, initialize=0.0)
    model.u_multiplier = pyo.Param(mutable=True, initialize=1.0)
    model.wall_thickness = pyo.Param(mutable=True, initialize=0.0)
    model.feed_flow = pyo.Param(range(len(case.names)), mutable=True, initialize=0.0)  # total over the tubes
    load_case_inputs(model, case, spec)
    tube = replace(case.tube, length=d["length"], inner_diameter=d["inner_diameter"], count=d["tube_count"],
                   wall_thickness=model.wall_thickness)
    feed = replace(case.feed, temperature=d["inlet_temperature"], pressure=d["inlet_pressure"])
    coolant = case.coolant
    if "coolant_temperature" in d:
        coolant = replace(coolant, temperature=d["coolant_temperature"])
    if "coolant_pressure" in d and "coolant_pressure" in spec.free:  # boiling water: T from the steam pressure
        if shared is None:
            model.coolant_saturation = pyo.Expression(expr=water_saturation_temperature(d["coolant_pressure"],
                                                                                         pyomo_backend()))
        saturation = (shared if shared is not None else model).coolant_saturation
        coolant = replace(coolant, temperature=saturation, pressure=d["coolant_pressure"])
    if "coolant_flow" in d:
        coolant = replace(coolant, mass_flow=d["coolant_flow"])
    shared = kinetics or {}
    reactions = tuple(replace(rx, k_ref=shared.get(j, {}).get("k_ref", model.k_ref[j]),
                              activation_energy=shared.get(j, {}).get("activation_energy", model.e_act[j]),
                              orders=shared.get(j, {}).get("orders", rx.orders))
                      for j, rx in enumerate(case.reactions))
    heat = replace(case.heat_transfer, multiplier=model.u_multiplier)
    return replace(case, tube=tube, feed=feed, coolant=coolant, reactions=reactions, heat_transfer=heat)


def load_case_inputs(model, case, spec):
    """Set the mutable Params that ``parametrised_case`` made of ``case`` (fixed design quantities, kinetic
    parameters, U multiplier, wall thickness, feed flows) to the case's values: a built block then stands
    for another case with the same ``replica_key`` (the copies of a fit's runs, nlp.copies)."""
    for name, comp in model.design.items():
        if comp.ctype is pyo.Param and comp.parent_block() is model:
            comp.set_value(spec.fixed.get(name, case_value(case, name)))
    for j, rx in enumerate(case.reactions):
        model.k_ref[j] = rx.k_ref
        model.e_act[j] = rx.activation_energy
    model.u_multiplier = case.heat_transfer.multiplier
    model.wall_thickness = case.tube.wall_thickness
    for i, flow in enumerate(case.feed.molar_flows):
        model.feed_flow[i] = flow


def replica_key(case) -> str:
    """What the printed forms of a tube block depend on beyond its inputs and its constraint bounds: the case
    with every quantity that ``parametrised_case`` turns into a Pyomo component (design quantities, wall
    thickness, k_ref, E_a, U multiplier) and the feed flows (the bounds of the inlet constraints) set to one
    neutral value. Blocks built by build_tube_model from cases with equal keys, at the same mesh and with
    the same shared kinetics, differ only in input values and bounds: the bridge may compile them as
    replicas (CompiledNLP(replicas=...)) instead of printing each, or build one and add the others as
    copies (CompiledNLP(copies=...), with ``load_case_inputs``)."""
    one = 1.0
    coolant = case.coolant
    coolant = replace(coolant, **{k: one for k in ("temperature", "pressure", "mass_flow")
                                  if getattr(coolant, k) is not None})
    neutral = replace(
        case, source="", raw={},
        tube=replace(case.tube, length=one, inner_diameter=one, count=1, wall_thickness=one),
        feed=replace(case.feed, temperature=one, pressure=one, molar_flows=(0.0,) * len(case.feed.molar_flows)),
        coolant=coolant, heat_transfer=replace(case.heat_transfer, multiplier=one),
        reactions=tuple(replace(rx, k_ref=one, activation_energy=one) for rx in case.reactions))
    return repr(neutral)


OUTPUT_STATES = ("Q", "tau")  # the heat removed and the residence time: no balance reads them


def build_tube_model(case, spec, nfe: int = 40, ncp: int = 3, block=None, kinetics=None, shared=None,
                     outputs: bool = True):
    """The discretised Pyomo model (without objective or limits), built into ``block`` if given (a fit
    builds one block per run, a robust design one per scenario), else into a new model. Returns (model,
    parametrised case). ``outputs=False`` leaves out the states of OUTPUT_STATES, for a caller that reads
    neither (``m.tail_states`` lists the tail states built).

    The model holds every state at every point of ``m.xi`` (0, then each element's Radau points, the last
    one 1.0) and the derivatives at the points after 0, as plain Vars. The balance rows and pyomo.dae's
    collocation equations are built once, in ``m.element``: one finite element of length 1 / nfe on its
    own variables, discretised by pyomo.dae; the bridge repeats its rows over the elements as a row family
    (nlp.families), so that building and compiling hardly grow with the mesh. Its rows are evaluated by the
    bridge only (in Pyomo they hold the template's own variables)."""
    m = pyo.ConcreteModel(name="tube") if block is None else block
    pcase = parametrised_case(m, case, spec, kinetics, shared)
    names = case.names
    m.tail_states = tail = TAIL if outputs else tuple(s for s in TAIL if s not in OUTPUT_STATES)
    m.S = pyo.Set(initialize=names, ordered=True)
    e = m.element = pyo.Block()
    e.xi = dae.ContinuousSet(bounds=(0.0, 1.0 / nfe))
    _state_variables(e, m.S, e.xi, case, tail)
    for state in ("F", *tail):
        e.add_component(f"d{state}", dae.DerivativeVar(getattr(e, state), wrt=e.xi))
    pyo.TransformationFactory("dae.collocation").apply_to(e, wrt=e.xi, nfe=1, ncp=ncp, scheme="LAGRANGE-RADAU")
    local = sorted(e.xi)  # the element's start, then its Radau points (the last one its end)
    pm = pyomo_backend()
    L = pcase.tube.length
    e.ode_F = pyo.Constraint(m.S, local[1:])
    e.ode = pyo.Constraint(tail, local[1:])
    for x in local[1:]:
        d = axial_derivatives(pm, pcase, [e.F[s, x] for s in names], e.T[x], e.P[x], e.Tc[x])
        for s, rate in zip(names, d.dF):
            e.ode_F[s, x] = e.dF[s, x] == L * rate
        for state, rhs in d.tail.items():
            if state in tail:
                e.ode[state, x] = getattr(e, f"d{state}")[x] == L * rhs

    m.element_bounds = [k / nfe for k in range(nfe + 1)]  # exact ends: the outlet is m.xi's 1.0
    at = [[m.element_bounds[k]] + [k / nfe + t for t in local[1:-1]] + [m.element_bounds[k + 1]]
          for k in range(nfe)]  # per element: its start and Radau points on the tube's axis
    m.xi = pyo.Set(initialize=[0.0] + [x for points in at for x in points[1:]], ordered=True)
    m.xi_collocation = pyo.Set(initialize=[x for points in at for x in points[1:]], ordered=True)
    _state_variables(m, m.S, m.xi, case, tail)
    for state in ("F", *tail):
        index = (m.S, m.xi_collocation) if state == "F" else (m.xi_collocation,)
        m.add_component(f"d{state}", pyo.Var(*index, initialize=0.0))
    template, instances = [], [[] for _ in range(nfe)]
    for state in ("F", *tail):
        for name, first in ((state, 0), (f"d{state}", 1)):  # a derivative has no row at the element's start
            t_var, m_var = getattr(e, name), getattr(m, name)
            for j, x in enumerate(local[first:], start=first):
                for s in (names if state == "F" else (None,)):
                    template.append(t_var[s, x] if s is not None else t_var[x])
                    for k, chosen in enumerate(instances):
                        chosen.append(m_var[s, at[k][j]] if s is not None else m_var[at[k][j]])
    declare_family(m, RowFamily(e, template, instances, label="element"))

    N = pcase.tube.count
    m.inlet_F = pyo.Constraint(m.S, rule=lambda m, s: m.F[s, 0.0] * N == m.feed_flow[names.index(s)])
    m.inlet_T = pyo.Constraint(expr=m.T[0.0] == pcase.feed.temperature)
    m.inlet_P = pyo.Constraint(expr=m.P[0.0] == pcase.feed.pressure)
    if outputs:
        m.inlet_Q = pyo.Constraint(expr=m.Q[0.0] == 0.0)
        m.inlet_tau = pyo.Constraint(expr=m.tau[0.0] == 0.0)
    coolant_end = 1.0 if case.coolant.kind.enters_at == "outlet" else 0.0
    tc_in = pcase.coolant.temperature if pcase.coolant.temperature is not None else pcase.feed.temperature
    m.coolant_in = pyo.Constraint(expr=m.Tc[coolant_end] == tc_in)
    return m, pcase


def _state_variables(b, species, points, case, tail):
    """The state variables F (per species) and the ``tail`` states (of T, P, Tc, Q, tau) of block ``b`` over
    ``points``."""
    b.F = pyo.Var(species, points, bounds=(0.0, None), initialize=1e-3)
    b.T = pyo.Var(points, bounds=(150.0, case.numerics.temperature_ceiling), initialize=case.feed.temperature)
    b.P = pyo.Var(points, bounds=(case.numerics.min_pressure, None), initialize=case.feed.pressure)
    b.Tc = pyo.Var(points, bounds=(100.0, None), initialize=case.coolant.temperature or case.feed.temperature)
    for state in OUTPUT_STATES:
        if state in tail:
            b.add_component(state, pyo.Var(points, initialize=0.0))


def energy_balance_rows(m) -> list:
    """The rows of the fluid's energy balance (one per Radau point of the element template: deactivating
    them drops the balance at every point of the tube)."""
    return [c for (state, _), c in m.element.ode.items() if state == "T"]


def collocation_value(m, var, xi: float):
    """The value at the normalised position ``xi`` of a state ``var`` indexed by m.xi, as its collocation
    polynomial gives it: in the finite element holding xi, the Lagrange polynomial through the element's
    start and its Radau points (a linear expression in the state variables; the exact node where xi is
    one)."""
    points = sorted(m.xi)
    bounds = m.element_bounds
    k = max(0, min(int(np.searchsorted(bounds, xi, side="left")) - 1, len(bounds) - 2))
    start, end = bounds[k], bounds[k + 1]
    nodes = [start] + [p for p in points if start < p <= end]
    x = np.asarray(nodes)
    weights = [float(np.prod([(xi - x[j]) / (x[i] - x[j]) for j in range(len(x)) if j != i]))
               for i in range(len(x))]
    return sum(w * var[t] for w, t in zip(weights, nodes) if w != 0.0)


STATES = ("F", "dF", *TAIL, *(f"d{state}" for state in TAIL))  # the state and derivative variables


def simulation_states(m, case, result) -> dict:
    """Every state and derivative variable of a tube model at the points of m.xi, from an adaptive-integrator
    solution of the same design: {"F": (species, points), "dF": (species, points), "T": (points,), "dT": ...}
    (the derivatives from the balances at all points at once: the numpy backend takes arrays)."""
    cols = result.columns
    layout = StateLayout.of(case)
    L = case.tube.length
    z = cols["z_m"]
    zz = np.minimum(np.asarray(list(m.xi)) * L, z[-1])
    F = [np.maximum(np.interp(zz, z, cols[layout.column(s)]) / case.tube.count, 0.0) for s in case.names]
    tail = {state: np.interp(zz, z, cols[layout.column(state)]) for state in TAIL}
    d = axial_derivatives(NUMPY, case, F, tail["T"], tail["P"], tail["Tc"])
    out = {"F": np.array(F), "dF": np.array([np.broadcast_to(L * rate, zz.shape) for rate in d.dF])}
    for state, rhs in d.tail.items():
        out[state], out[f"d{state}"] = tail[state], np.broadcast_to(L * rhs, zz.shape)
    return out


def initialise_from_simulation(m, case, result):
    """Set every state and derivative variable from an adaptive-integrator solution of the same design."""
    variables = [v for name in built_states(m) for v in getattr(m, name).values()]
    values = flat_states(simulation_states(m, case, result))[state_positions(m, case, variables)]
    for v, x in zip(variables, values.tolist()):
        v.set_value(x, skip_validation=True)


def state_positions(m, case, variables) -> np.ndarray:
    """Per variable of the tube model ``m``, its position in ``flat_states`` of ``simulation_states``, or -1
    for a variable that is no state or derivative: the values of many variables by one indexing."""
    points = {x: j for j, x in enumerate(m.xi)}
    species = {s: i for i, s in enumerate(case.names)}
    offset, start = {}, 0
    for name in STATES:
        offset[name] = start
        start += (len(species) if name in ("F", "dF") else 1) * len(points)
    component = {id(getattr(m, name)): name for name in built_states(m)}
    out = np.full(len(variables), -1, dtype=np.int64)
    for k, v in enumerate(variables):
        name = component.get(id(v.parent_component()))
        if name in ("F", "dF"):
            s, x = v.index()
            out[k] = offset[name] + species[s] * len(points) + points[x]
        elif name is not None:
            out[k] = offset[name] + points[v.index()]
    return out


def built_states(m) -> tuple:
    """The names of STATES that the tube model ``m`` holds (without OUTPUT_STATES when built without them)."""
    return ("F", "dF", *m.tail_states, *(f"d{state}" for state in m.tail_states))


def flat_states(values: dict) -> np.ndarray:
    """The arrays of ``simulation_states`` one after another, in the order ``state_positions`` counts."""
    return np.concatenate([np.asarray(values[name], dtype=float).reshape(-1) for name in STATES])


def state_scaling(m, case, result) -> dict:
    """Scale factors (1/typical magnitude) per state, from the initialising simulation."""
    cols = result.columns
    layout = StateLayout.of(case)
    n_t = case.tube.count
    f_ref = {s: max(float(np.max(np.abs(cols[layout.column(s)]))) / n_t, 1e-3 * sum(case.feed.molar_flows) / n_t)
             for s in case.names}
    floor = {"T": 1.0, "P": 1.0, "Tc": 1.0, "Q": 1.0, "tau": 1e-6}
    return {"F": f_ref, **{s: max(float(np.max(np.abs(cols[layout.column(s)]))), floor[s]) for s in TAIL}}


def tube_scale_keys(m, case) -> tuple[dict, dict]:
    """Which scale applies to each variable and constraint of a tube model: {id: key} with the keys ("F",
    species) for a flow, its derivative and its balances, (state,) for the other states, ("feed", species)
    for the inlet flow rows (see ``scale_factor``)."""
    var, con = {}, {}
    for name in ("F", "dF"):
        for (sp, _), v in getattr(m, name).items():
            var[id(v)] = ("F", sp)
    for state in m.tail_states:
        for name in (state, f"d{state}"):
            for v in getattr(m, name).values():
                var[id(v)] = (state,)
    e = m.element  # the balance rows and collocation equations of every element are its rows (nlp.families)
    for (sp, _), c in e.ode_F.items():
        con[id(c)] = ("F", sp)
    for (state, _), c in e.ode.items():
        con[id(c)] = (state,)
    for state in ("F", *m.tail_states):
        for idx, c in getattr(e, f"d{state}_disc_eq").items():
            con[id(c)] = ("F", idx[0]) if state == "F" else (state,)
    for sp, c in m.inlet_F.items():
        con[id(c)] = ("feed", sp)
    for name, state in (("inlet_T", "T"), ("inlet_P", "P"), ("coolant_in", "Tc"), ("inlet_Q", "Q"),
                        ("inlet_tau", "tau")):
        if hasattr(m, name):
            con[id(getattr(m, name))] = (state,)
    return var, con


def scale_factor(key: tuple, case, scales) -> float:
    """The IPOPT scale factor of a ``tube_scale_keys`` key: 1 / typical magnitude (``scales`` from
    ``state_scaling``; an inlet flow row by its feed flow, at least 1e-3 of the total)."""
    if key[0] == "F":
        return 1.0 / scales["F"][key[1]]
    if key[0] == "feed":
        feed = case.feed.molar_flows
        return 1.0 / max(feed[case.index(key[1])], 1e-3 * sum(feed))
    return 1.0 / scales[key[0]]


def tube_scale_factors(m, case, scales) -> tuple[dict, dict]:
    """IPOPT scale factors of one tube model: {id(variable): factor} for the states and their derivatives,
    {id(constraint): factor} for the balances, the collocation equations and the inlet conditions (see
    ``tube_scale_keys`` and ``scale_factor``)."""
    var_keys, con_keys = tube_scale_keys(m, case)
    factor = {key: scale_factor(key, case, scales) for key in {*var_keys.values(), *con_keys.values()}}
    return {i: factor[key] for i, key in var_keys.items()}, {i: factor[key] for i, key in con_keys.items()}
