"""Annualised cost of a multitubular reactor, written against the math backend so that the same formulas
serve the Pyomo objective and the numpy report.

Capital: the purchased cost of a fixed-tube-sheet shell-and-tube exchanger from the bare-module correlation
of Turton et al., Analysis, Synthesis and Design of Chemical Processes (Appendix A, Table A.1):

    log10 Cp0 = K1 + K2 log10 A + K3 (log10 A)^2,   A = tube outer area [m^2], 10 <= A <= 1000 m^2,

with K1 = 4.3247, K2 = -0.3030, K3 = 0.1634 in US dollars of CEPCI = 397 (2001) (constants from memory),
times a bare-module factor (1.63 + 1.66 F_M F_P = 3.29 for carbon steel at low pressure, from memory),
escalated by the user's cost index. Annualised with a capital-charge factor (1/year).
Operating: compression or pumping power V_in dP / efficiency at an electricity price, coolant, catalyst
replacement, and the raw material lost to by-products. Every coefficient can be overridden in [costs].
"""

from __future__ import annotations

import math
from dataclasses import dataclass

SECONDS_PER_HOUR = 3600.0


@dataclass(frozen=True)
class CostModel:
    k1: float = 4.3247
    k2: float = -0.3030
    k3: float = 0.1634
    base_index: float = 397.0  # CEPCI of the correlation (2001)
    cost_index: float = 800.0  # the user's CEPCI (roughly 2024, an assumption to override)
    bare_module_factor: float = 3.29
    capital_charge: float = 0.20  # 1/year, common practice for screening
    hours_per_year: float = 8000.0
    electricity_price: float = 0.10  # per kWh
    compressor_efficiency: float = 0.70
    coolant_price: float = 0.0  # per kg of coolant
    catalyst_price: float = 50.0  # per kg
    catalyst_life: float = 3.0  # years
    raw_material_price: float = 1.0  # per kg of key reactant lost to by-products
    area_min: float = 10.0
    area_max: float = 1000.0
    currency: str = "USD"  # a label of the figures (the correlation's own currency; no conversion is made)


def exchanger_capital(m, cm: CostModel, area):
    """Bare-module capital [currency] for outer tube area ``area`` [m^2] (Turton et al. form, see module)."""
    lg = m.log(area) / math.log(10.0)
    purchased = 10.0 ** (cm.k1 + cm.k2 * lg + cm.k3 * lg * lg)
    return purchased * cm.bare_module_factor * cm.cost_index / cm.base_index


def shells_for(cm: CostModel, area: float) -> int:
    """The smallest number of equal shells that brings each shell's area inside the capital correlation's
    range (common practice: a duty beyond the largest shell is split over equal shells in parallel)."""
    return max(1, math.ceil(area / cm.area_max - 1e-9))


def annual_cost(m, cm: CostModel, *, area, catalyst_mass, inlet_volumetric_flow, pressure_drop, coolant_flow,
                key_lost, key_molar_mass, shells=1) -> dict:
    """Parts of the annual cost [currency/year]; ``total`` is their sum. SI inputs: area m^2, catalyst kg,
    inlet volumetric flow m^3/s, pressure drop Pa, coolant flow kg/s, key reactant lost mol/s. The tubes
    are split over ``shells`` equal shells (a number, or a fixed parameter of the optimisation: the cost
    stays smooth in the area), each costed by the correlation at its share of the area."""
    seconds = cm.hours_per_year * SECONDS_PER_HOUR
    capital = cm.capital_charge * shells * exchanger_capital(m, cm, area / shells)
    power = inlet_volumetric_flow * pressure_drop / cm.compressor_efficiency  # W
    parts = {
        "capital": capital,
        "catalyst": cm.catalyst_price * catalyst_mass / cm.catalyst_life,
        "power": power / 1000.0 * cm.hours_per_year * cm.electricity_price,
        "coolant": cm.coolant_price * coolant_flow * seconds,
        "raw_material": cm.raw_material_price * key_lost * key_molar_mass * seconds,
    }
    parts["total"] = sum(parts.values())
    return parts


def cost_figures(m, cm: CostModel, case, figures: dict, coolant_flow, shells=1) -> dict:
    """The annual cost parts of a design from its figures (Pyomo expressions of the collocation model, or
    the numbers of a simulation summary): one cost formula for the objective and for the report.
    ``coolant_flow`` [kg/s] is the coolant mass flow, 0 without one."""
    catalyst = figures["volume_m3"] * case.bed.density if case.bed is not None else 0.0
    lost = figures["key_lost_mol_s"] if case.product else 0.0
    return annual_cost(m, cm, area=figures["outer_area_m2"], catalyst_mass=catalyst,
                       inlet_volumetric_flow=figures["inlet_volumetric_flow_m3_s"],
                       pressure_drop=figures["pressure_drop_Pa"], coolant_flow=coolant_flow, key_lost=lost,
                       key_molar_mass=case.species_map[case.key_reactant].molar_mass, shells=shells)
