"""From an integrator solution to the typed result: axial profiles (pandas) and the summary fields
(SI, unit in the name)."""

from __future__ import annotations

import time

import numpy as np

from .backend import NUMPY
from .balances import local_properties, rates
from .reactions import heat_of_reaction


def profile_columns(case, z, y) -> dict:
    n = len(case.species)
    N = case.tube.count
    data = {"z_m": z}
    for i, name in enumerate(case.names):
        data[f"F_{name}_mol_s"] = y[i] * N
    data["T_K"] = y[n]
    data["P_Pa"] = y[n + 1]
    data["Tc_K"] = y[n + 2]
    data["Q_W"] = y[n + 3]
    data["tau_s"] = y[n + 4]
    key = case.index(case.key_reactant)
    f_in = case.feed.molar_flows[key]
    data["conversion"] = 1.0 - y[key] * N / f_in
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


def summarise(case, z, y, y_out) -> dict:
    n = len(case.species)
    N = case.tube.count
    names = case.names
    f_in = np.array(case.feed.molar_flows)
    f_out = y_out[:n] * N
    key = case.index(case.key_reactant)
    converted = f_in[key] - f_out[key]
    i_max = int(np.argmax(y[n]))
    out = {
        "status": None,
        "length_m": float(z[-1]),
        "conversion": float(converted / f_in[key]),
        "outlet_temperature_K": float(y_out[n]),
        "max_temperature_K": float(y[n, i_max]),
        "max_temperature_position_m": float(z[i_max]),
        "outlet_pressure_Pa": float(y_out[n + 1]),
        "pressure_drop_Pa": float(case.feed.pressure - y_out[n + 1]),
        "heat_removed_W": float(y_out[n + 3]),
        "coolant_outlet_temperature_K": _coolant_outlet(case, y),
        "residence_time_s": float(y_out[n + 4]),
        "inner_diameter_m": case.tube.inner_diameter,
        "tube_count": N,
        "inlet_temperature_K": case.feed.temperature,
        "outlet_molar_flow_mol_s": {name: float(f) for name, f in zip(names, f_out)},
        "yield": {},
        "selectivity": {},
    }
    for i, name in enumerate(names):
        formed, yld, sel = formed_yield_selectivity(case, name, f_in, f_out)
        if i == key or formed <= 0:
            continue
        out["yield"][name] = float(yld)
        out["selectivity"][name] = float(sel)
    if case.product:
        formed, yld, sel = formed_yield_selectivity(case, case.product, f_in, f_out)
        out["production_rate_mol_s"] = float(formed)
        out["product_yield"] = float(yld) if formed > 0 else 0.0
        out["product_selectivity"] = float(sel) if formed > 0 else 0.0
    return out


def _coolant_outlet(case, y) -> float | None:
    n = len(case.species)
    mode = case.coolant.mode
    if mode == "cocurrent":
        return float(y[n + 2, -1])
    if mode == "countercurrent":
        return float(y[n + 2, 0])
    if mode in ("constant", "boiling_water"):
        return float(case.coolant.temperature)
    return None


def build_result(case, sol, status, reason, t0):
    from .simulator import PROFILE_POINTS, SimulationResult

    elapsed = time.perf_counter() - t0
    if sol is None or getattr(sol, "t", None) is None or len(sol.t) < 2:
        return SimulationResult(status, reason, {}, {}, [], {"simulate_s": elapsed})
    z_end = float(sol.t[-1])
    if sol.sol is not None:
        z = np.union1d(np.linspace(0.0, z_end, 2001), sol.t)
        y = sol.sol(z)
        y[:, -1] = sol.y[:, -1]
    else:
        z, y = sol.t, sol.y
    summary = summarise(case, z, y, sol.y[:, -1])
    summary["status"] = status
    summary["reason"] = reason
    pick = np.unique(np.searchsorted(z, np.linspace(0.0, z_end, PROFILE_POINTS)).clip(0, z.size - 1))
    pick = np.union1d(pick, [int(np.argmax(y[len(case.species)]))])
    columns = profile_columns(case, z[pick], y[:, pick])
    return SimulationResult(status, reason, summary, columns, [], {"simulate_s": elapsed})


def reaction_heats(case, columns) -> np.ndarray:
    """Heat released by each reaction [W/m^3 of bed] along the profile columns: shape (reactions, points)."""
    n_t = case.tube.count
    F = [np.asarray(columns[f"F_{name}_mol_s"]) / n_t for name in case.names]
    T, P = np.asarray(columns["T_K"]), np.asarray(columns["P_Pa"])
    local = local_properties(NUMPY, case, F, T, P)
    return np.array([-heat_of_reaction(NUMPY, rx, case.species_map, T) * r
                     for rx, r in zip(case.reactions, rates(NUMPY, case, T, local))])
