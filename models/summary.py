"""From integrated states to figures: axial profile columns, the outlet figures (one formula for single
simulations and for batches of samples) and the summary fields (SI, unit in the name)."""

from __future__ import annotations

import numpy as np

from .backend import NUMPY
from .balances import local_properties, rates
from .reactions import heat_of_reaction
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


def formed_yield_selectivity(case, product: str, f_in, f_out):
    """Net formation [mol/s], yield and selectivity of ``product`` relative to the key reactant, for feed
    and outlet flows of the whole reactor (numbers, or arrays of samples): yield = formed * factor / fed,
    selectivity = formed * factor / converted, with the stoichiometric factor of stoichiometric_factor
    (NaN selectivity where nothing converted)."""
    key, p = case.index(case.key_reactant), case.index(product)
    formed = f_out[p] - f_in[p]
    converted = f_in[key] - f_out[key]
    factor = stoichiometric_factor(case, product)
    with np.errstate(divide="ignore", invalid="ignore"):
        selectivity = np.where(converted > 0, factor * formed / np.where(converted > 0, converted, 1.0), np.nan)
    return formed, factor * formed / f_in[key], selectivity


def outlet_figures(case, y_out, hot, hot_position) -> dict:
    """The figures of the outlet state ``y_out`` (per tube; trailing sample axes allowed) and of the hot
    spot: the outputs shared by the summary of one simulation and by the batches of screening."""
    layout = StateLayout.of(case)
    N = case.tube.count
    shape = np.shape(y_out)[1:]
    f_in = np.array([np.broadcast_to(f, shape) for f in case.feed.molar_flows], dtype=float)
    f_out = np.asarray(y_out[layout.flows]) * N
    key = case.index(case.key_reactant)
    out = {
        "max_temperature_K": np.asarray(hot, dtype=float),
        "max_temperature_position_m": np.asarray(hot_position, dtype=float),
        "conversion": (f_in[key] - f_out[key]) / f_in[key],
        "pressure_drop_Pa": np.broadcast_to(case.feed.pressure, shape) - layout.get(y_out, "P"),
        "outlet_pressure_Pa": np.asarray(layout.get(y_out, "P"), dtype=float),
        "outlet_temperature_K": np.asarray(layout.get(y_out, "T"), dtype=float),
        "heat_removed_W": np.asarray(layout.get(y_out, "Q"), dtype=float),
        "residence_time_s": np.asarray(layout.get(y_out, "tau"), dtype=float),
    }
    if case.product:
        formed, yld, sel = formed_yield_selectivity(case, case.product, f_in, f_out)
        out["production_rate_mol_s"] = np.asarray(formed, dtype=float)
        out["product_selectivity"] = np.asarray(sel, dtype=float)
        out["product_yield"] = np.asarray(yld, dtype=float)
    return out


def summarise(case, z, y, y_out) -> dict:
    layout = StateLayout.of(case)
    N = case.tube.count
    names = case.names
    i_max = int(np.argmax(layout.get(y, "T")))
    figures = {k: float(v) for k, v in outlet_figures(case, y_out, layout.get(y, "T")[i_max], z[i_max]).items()}
    if case.product and figures["production_rate_mol_s"] <= 0:
        figures["product_selectivity"] = figures["product_yield"] = 0.0
    f_in = np.array(case.feed.molar_flows)
    f_out = y_out[layout.flows] * N
    out = {
        "status": None,
        "length_m": float(z[-1]),
        **figures,
        "coolant_outlet_temperature_K": coolant_outlet_temperature(case, y),
        "inner_diameter_m": case.tube.inner_diameter,
        "tube_count": N,
        "inlet_temperature_K": case.feed.temperature,
        "outlet_molar_flow_mol_s": {name: float(f) for name, f in zip(names, f_out)},
        "yield": {},
        "selectivity": {},
    }
    key = case.index(case.key_reactant)
    for i, name in enumerate(names):
        formed, yld, sel = formed_yield_selectivity(case, name, f_in, f_out)
        if i == key or formed <= 0:
            continue
        out["yield"][name] = float(yld)
        out["selectivity"][name] = float(sel)
    return out


def coolant_outlet_temperature(case, y) -> float | None:
    """The coolant temperature where the coolant leaves (opposite its entry), the constant coolant
    temperature, or None without a coolant (models.coolant_modes)."""
    mode = case.coolant.kind
    if mode.has_coolant_flow:
        tc = StateLayout.of(case).get(y, "Tc")
        return float(tc[-1] if mode.enters_at == "inlet" else tc[0])
    if mode.exchanges_heat:
        return float(case.coolant.temperature)
    return None


def reaction_heats(case, columns) -> np.ndarray:
    """Heat released by each reaction [W/m^3 of bed] along the profile columns: shape (reactions, points)."""
    layout = StateLayout.of(case)
    n_t = case.tube.count
    F = [np.asarray(columns[layout.column(name)]) / n_t for name in case.names]
    T, P = np.asarray(columns["T_K"]), np.asarray(columns["P_Pa"])
    local = local_properties(NUMPY, case, F, T, P)
    return np.array([-heat_of_reaction(NUMPY, rx, case.species_map, T) * r
                     for rx, r in zip(case.reactions, rates(NUMPY, case, T, local))])
