"""From integrated states to figures: axial profile columns, the outlet figures (one formula for single
simulations and for batches of samples) and the summary fields (SI, unit in the name)."""

from __future__ import annotations

import numpy as np

from .backend import NUMPY
from .balances import local_properties, rates
from .correlations import water_latent_heat
from .figures import POINTWISE, correlation_range_excesses, critical_reaction, layout_figures
from .reactions import approach_to_equilibrium, heat_of_reaction
from .state import TAIL, StateLayout


def profile_columns(case, z, y) -> dict:
    layout = StateLayout.of(case)
    N = case.tube.count
    data = {"z_m": z}
    for i, name in enumerate(case.names):
        data[layout.column(name)] = y[i] * N
    for state in TAIL:
        data[layout.column(state)] = layout.get(y, state)
    key = case.index(case.key_reactant)
    data["conversion"] = 1.0 - y[key] * N / case.feed.molar_flows[key]
    return data


def stoichiometric_factor(case, product: str) -> float:
    """|nu_key / nu_product| in the first reaction that consumes the key reactant and forms the product;
    1 if no reaction does both (then the yield is a plain molar ratio)."""
    for rx in case.reactions:
        a, b = rx.nu.get(case.key_reactant, 0.0), rx.nu.get(product, 0.0)
        if a < 0 < b:
            return abs(a / b)
    return 1.0


def product_figures(case, product: str, f_in, f_out):
    """Net formation [mol/s], yield and selectivity of ``product`` relative to the key reactant (arithmetic
    only, so that numbers, arrays and Pyomo expressions share it): yield = factor * formed / fed,
    selectivity = factor * formed / converted, with the factor of stoichiometric_factor."""
    key, p = case.index(case.key_reactant), case.index(product)
    formed = f_out[p] - f_in[p]
    factor = stoichiometric_factor(case, product)
    return formed, factor * formed / f_in[key], factor * formed / (f_in[key] - f_out[key])


def formed_yield_selectivity(case, product: str, f_in, f_out):
    """product_figures for numbers or arrays of samples, with NaN selectivity where nothing converted."""
    key = case.index(case.key_reactant)
    converted = np.asarray(f_in[key] - f_out[key])
    with np.errstate(divide="ignore", invalid="ignore"):
        formed, yld, selectivity = product_figures(case, product, f_in, f_out)
    return formed, yld, np.where(converted > 0, selectivity, np.nan)


def conversion(case, f_in, f_out):
    """Conversion of the key reactant from feed and outlet flows (arithmetic only: any backend)."""
    key = case.index(case.key_reactant)
    return (f_in[key] - f_out[key]) / f_in[key]


def key_lost(case, f_in, f_out):
    """Key reactant converted to anything but the product [mol/s] (arithmetic only: any backend)."""
    key, p = case.index(case.key_reactant), case.index(case.product)
    return f_in[key] - f_out[key] - stoichiometric_factor(case, case.product) * (f_out[p] - f_in[p])


def pointwise_maxima(case, T, Tc) -> dict:
    """The largest value along the tube of every pointwise figure (models.figures.POINTWISE), from the
    temperatures T and Tc on the axial points (first axis; trailing sample axes allowed)."""
    j = critical_reaction(case)
    with np.errstate(invalid="ignore", divide="ignore"):
        return {name: np.max(np.asarray(f(case, T, Tc, j)), axis=0) for name, f in POINTWISE.items()}


def coolant_outlet_temperature(case, y_in, y_out, shape=()):
    """The coolant temperature where the coolant leaves (opposite its entry: from the outlet state for a
    coolant entering at z = 0, from the inlet state for one entering at z = L), the constant coolant
    temperature, or NaN without a coolant (models.coolant_modes)."""
    mode = case.coolant.kind
    layout = StateLayout.of(case)
    if mode.has_coolant_flow:
        value = layout.get(y_out if mode.enters_at == "inlet" else y_in, "Tc")
    elif mode.exchanges_heat:
        value = case.coolant.temperature
    else:
        value = np.nan
    return np.broadcast_to(np.asarray(value, dtype=float), shape).astype(float)


def outlet_figures(case, y_in, y_out, maxima: dict, hot_position) -> dict:
    """The figures of one tube from its inlet and outlet states (per tube; trailing sample axes allowed),
    the pointwise maxima (pointwise_maxima) and the hot-spot position: the outputs shared by the summary of
    one simulation and by the batches of screening. Every figure a limit bounds (models.limits) is here."""
    layout = layout_figures(case)
    excess = correlation_range_excesses(case, layout)
    state = StateLayout.of(case)
    N = case.tube.count
    shape = np.shape(y_out)[1:]
    f_in = np.array([np.broadcast_to(f, shape) for f in case.feed.molar_flows], dtype=float)
    f_out = np.asarray(y_out[state.flows]) * N
    out = {
        **{k: np.asarray(v, dtype=float) for k, v in maxima.items()},
        "max_temperature_position_m": np.asarray(hot_position, dtype=float),
        "conversion": conversion(case, f_in, f_out),
        "pressure_drop_Pa": np.broadcast_to(case.feed.pressure, shape) - state.get(y_out, "P"),
        "outlet_pressure_Pa": np.asarray(state.get(y_out, "P"), dtype=float),
        "outlet_temperature_K": np.asarray(state.get(y_out, "T"), dtype=float),
        "heat_removed_W": np.asarray(state.get(y_out, "Q"), dtype=float),
        "residence_time_s": np.asarray(state.get(y_out, "tau"), dtype=float),
        "coolant_outlet_temperature_K": coolant_outlet_temperature(case, y_in, y_out, shape),
        **{k: np.broadcast_to(v, shape).astype(float) for k, v in layout.items()},
        "max_correlation_range_excess": (np.max(np.stack([np.broadcast_to(v, shape) for v in excess.values()]), axis=0)
                                         if excess else np.full(shape, np.nan)),
    }
    if case.product:
        formed, yld, sel = formed_yield_selectivity(case, case.product, f_in, f_out)
        out["production_rate_mol_s"] = np.asarray(formed, dtype=float)
        out["product_selectivity"] = np.asarray(sel, dtype=float)
        out["product_yield"] = np.asarray(yld, dtype=float)
        out["key_lost_mol_s"] = np.asarray(key_lost(case, f_in, f_out), dtype=float)
    return out


def summarise(case, z, y, y_out) -> dict:
    layout = StateLayout.of(case)
    N = case.tube.count
    names = case.names
    T, Tc = layout.get(y, "T"), layout.get(y, "Tc")
    i_max = int(np.argmax(T))
    figures = outlet_figures(case, y[:, 0], y_out, pointwise_maxima(case, T, Tc), z[i_max])
    figures = {k: float(v) for k, v in figures.items()}
    if case.product and figures["production_rate_mol_s"] <= 0:
        figures["product_selectivity"] = figures["product_yield"] = 0.0
    if not case.coolant.kind.exchanges_heat:
        for k in ("coolant_outlet_temperature_K", "max_temperature_difference_K", "max_runaway_group"):
            figures[k] = None
    f_out = y_out[layout.flows] * N
    out = {
        "status": None,
        "length_m": float(z[-1]),
        **figures,
        "inner_diameter_m": case.tube.inner_diameter,
        "tube_count": N,
        "inlet_temperature_K": case.feed.temperature,
        "outlet_molar_flow_mol_s": {name: float(f) for name, f in zip(names, f_out)},
        "yield": {},
        "selectivity": {},
    }
    reversible = [rx for rx in case.reactions if rx.reversible]
    if reversible:  # how close the outlet is to equilibrium, per reversible reaction
        t_out, p_out = float(layout.get(y_out, "T")), float(layout.get(y_out, "P"))
        local = local_properties(NUMPY, case, list(y_out[layout.flows]), t_out, p_out)
        out["approach_to_equilibrium"] = {
            rx.name: float(approach_to_equilibrium(
                NUMPY, rx, case.species_map, t_out,
                local.partial_pressure if rx.driving == "partial_pressure" else local.concentration))
            for rx in reversible}
    if case.coolant.kind.temperature_source == "saturation":  # boiling water: its pressure and the steam raised
        out["coolant_pressure_Pa"] = case.coolant.pressure
        out["steam_raised_kg_s"] = figures["heat_removed_W"] / water_latent_heat(case.coolant.temperature)
    if case.product:  # the desired product only: co-products (water, CO2) have no meaningful selectivity
        out["yield"][case.product] = figures["product_yield"]
        out["selectivity"][case.product] = figures["product_selectivity"]
    return out


def reaction_heats(case, columns) -> np.ndarray:
    """Heat released by each reaction [W/m^3 of bed] along the profile columns: shape (reactions, points)."""
    layout = StateLayout.of(case)
    n_t = case.tube.count
    F = [np.asarray(columns[layout.column(name)]) / n_t for name in case.names]
    T, P = np.asarray(columns["T_K"]), np.asarray(columns["P_Pa"])
    local = local_properties(NUMPY, case, F, T, P)
    return np.array([-heat_of_reaction(NUMPY, rx, case.species_map, T) * r
                     for rx, r in zip(case.reactions, rates(NUMPY, case, T, local))])
