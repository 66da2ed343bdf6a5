"""The axial balances of one tube of a multitubular reactor: species, energy, momentum, coolant.

Written once against the math backend ``m`` so that the simulator (numpy; arrays of many samples too) and
the collocation model (Pyomo expressions) share one source of truth. Coordinate z [m] from the tube inlet.

    dF_i/dz   = A_c w sum_j nu_ij r_j                        w = 1 (rate per bed volume) or rho_bed
    dT/dz     = (A_c w sum_j (-dH_j) r_j + U pi d (Tc - T)) / sum_i F_i cp_i
    dP/dz     = -(Ergun or Darcy-Weisbach gradient)
    dTc/dz    = +-N U pi d (T - Tc) / (m_c cp_c)             (+ co-current, - counter-current, 0 otherwise)
    dQ/dz     = N U pi d (T - Tc)                            (heat to the coolant, whole reactor)
    dtau/dz   = A_c e / V_dot                                 (residence time in the fluid volume)

Isothermal mode holds dT/dz = 0 and removes the heat of reaction: dQ/dz = -N A_c w sum_j dH_j r_j.
F_i [mol/s] are per tube; Q covers all tubes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from . import correlations as corr
from .reactions import heat_of_reaction, reaction_rate
from .state import TAIL
from .thermo import R_GAS


@dataclass
class Local:
    """Local properties at one axial position."""

    total_flow: object
    mass_flow: object  # kg/s per tube
    density: object
    volumetric_flow: object
    concentration: dict  # mol/m^3
    partial_pressure: dict  # Pa (gas phase only)
    cp_molar_flow: object  # sum F_i cp_i, W/K
    cp_mass: object  # J/(kg K)


def local_properties(m, case, F, T, P, compositions: bool = True) -> Local:
    """The local properties at the state (F, T, P); ``compositions=False`` leaves out the concentrations and
    partial pressures (what the rates need, not the flow figures)."""
    species = case.species
    total = 0.0
    mass = 0.0
    cpf = 0.0
    for sp, f in zip(species, F):
        total = total + f
        mass = mass + f * sp.molar_mass
        cpf = cpf + f * sp.cp(m, T)
    if case.phase == "gas":
        density = P * mass / (total * R_GAS * T)
        vdot = total * R_GAS * T / P
    else:
        density = case.feed.density
        vdot = mass / density
    conc = {sp.name: f / vdot for sp, f in zip(species, F)} if compositions else {}
    pp = {sp.name: f * P / total for sp, f in zip(species, F)} if case.phase == "gas" and compositions else {}
    return Local(total, mass, density, vdot, conc, pp, cpf, cpf / mass)


def rates(m, case, T, local: Local) -> list:
    """Rates of every reaction per unit bed (or tube) volume, mol/(m^3 s)."""
    out = []
    species = case.species_map
    for rx in case.reactions:
        drive = local.partial_pressure if rx.driving == "partial_pressure" else local.concentration
        r = reaction_rate(m, rx, species, T, drive)
        if rx.basis == "catalyst_mass":
            r = r * case.bed.density
        out.append(r)
    return out


def rate_basis(case, species: str) -> str:
    """The basis of the formation rate of ``species``: "catalyst_mass" (mol/(kg s)) or "volume"
    (mol/(m^3 s)), the basis shared by the reactions that form or consume it; ValueError when they differ
    or none does."""
    bases = {rx.basis for rx in case.reactions if rx.nu.get(species)}
    if len(bases) != 1:
        raise ValueError(f"no reaction forms or consumes {species}" if not bases else
                         f"the reactions of {species} have different bases ({', '.join(sorted(bases))})")
    return bases.pop()


def formation_rate(m, case, species: str, F, T, P):
    """Net formation rate of ``species`` at the state (F, T, P): sum_j nu_ij r_j per catalyst mass
    [mol/(kg s)] or per volume [mol/(m^3 s)] as ``rate_basis`` says; what a differential (low-conversion)
    laboratory reactor measures at its feed conditions."""
    total = 0.0
    for rx, rj in zip(case.reactions, rates(m, case, T, local_properties(m, case, F, T, P))):
        nu = rx.nu.get(species)
        if nu:
            total = total + nu * rj
    return total / case.bed.density if rate_basis(case, species) == "catalyst_mass" else total


def overall_u(m, case, local: Local):
    """U [W/(m^2 K)] on the inner area: given, or from the inside correlation, the wall and the coolant side."""
    ht = case.heat_transfer
    if not case.coolant.kind.exchanges_heat:
        return 0.0
    if ht.overall is not None:
        return ht.overall * ht.multiplier
    tube, feed = case.tube, case.feed
    flux = local.mass_flow / tube.area
    k_f = feed.thermal_conductivity
    if ht.inside == "radial_lumped":
        t = radial_transport(m, case, local)
        h_i = corr.lumped_wall_coefficient(m, t.alpha_w, t.lambda_er, tube.inner_diameter)
        return ht.multiplier * corr.overall_coefficient(m, h_i, ht.outside, tube.inner_diameter,
                                                        tube.wall_thickness, tube.wall_conductivity)
    if ht.inside == "leva":
        re_p = case.bed.particle_diameter * flux / feed.viscosity
        nu = corr.leva_cooling_wall_nusselt(m, re_p, case.bed.particle_diameter / tube.inner_diameter)
    else:
        re = flux * tube.inner_diameter / feed.viscosity
        pr = local.cp_mass * feed.viscosity / k_f
        if ht.inside == "gnielinski":
            nu = corr.gnielinski_nusselt(m, re, pr, corr.petukhov_friction(m, re))
        elif ht.inside == "dittus_boelter":
            nu = corr.dittus_boelter_nusselt(m, re, pr, heating=False)
        else:
            nu = corr.laminar_nusselt(m, re, pr)
    h_i = nu * k_f / tube.inner_diameter
    u = corr.overall_coefficient(m, h_i, ht.outside, tube.inner_diameter, tube.wall_thickness,
                                 tube.wall_conductivity)
    return u * ht.multiplier


def pressure_gradient(m, case, local: Local):
    """dP/dz [Pa/m] (negative)."""
    tube = case.tube
    flux = local.mass_flow / tube.area
    if case.bed is not None:
        return -corr.ergun_pressure_gradient(m, flux, local.density, case.feed.viscosity,
                                             case.bed.particle_diameter, case.bed.voidage)
    re = flux * tube.inner_diameter / case.feed.viscosity
    f = corr.churchill_1977_friction(m, re, tube.roughness / tube.inner_diameter)
    return -corr.darcy_weisbach_gradient(m, f, flux, local.density, tube.inner_diameter)


@dataclass
class Derivatives:
    dF: list
    dT: object
    dP: object
    dTc: object
    dQ: object
    dtau: object

    @property
    def tail(self) -> dict:
        """The derivatives of the tail states by name (see models.state.TAIL)."""
        return dict(zip(TAIL, self.tail_values()))

    def tail_values(self) -> tuple:
        """The derivatives of the tail states in the order of models.state.TAIL."""
        return self.dT, self.dP, self.dTc, self.dQ, self.dtau


def reaction_sources(m, case, F, T, P):
    """The local properties, the species sources A_c sum_j nu_ij r_j [mol/(s m)] and the heat released
    A_c sum_j (-dH_j) r_j [W/m] of one tube at the state (F, T, P); shared by the axial and radial models."""
    local = local_properties(m, case, F, T, P)
    r = rates(m, case, T, local)
    area = case.tube.area
    dF = []
    for sp in case.species:
        total = 0.0
        for rx, rj in zip(case.reactions, r):
            nu = rx.nu.get(sp.name)
            if nu:
                total = total + nu * rj
        dF.append(area * total)
    heat_generation = 0.0  # W/m per tube
    for rx, rj in zip(case.reactions, r):
        heat_generation = heat_generation - area * heat_of_reaction(m, rx, case.species_map, T) * rj
    return local, dF, heat_generation


def axial_derivatives(m, case, F, T, P, Tc) -> Derivatives:
    """d/dz of the state (F_i, T, P, Tc, Q, tau) of one tube at one position. See module docstring."""
    tube = case.tube
    local, dF, heat_generation = reaction_sources(m, case, F, T, P)
    mode = case.coolant.kind
    u = overall_u(m, case, local)
    perimeter = math.pi * tube.inner_diameter
    to_coolant = u * perimeter * (T - Tc)  # W/m per tube
    if mode.holds_temperature:
        dT = 0.0 * T
        dQ = tube.count * heat_generation
    else:
        dT = (heat_generation - to_coolant) / local.cp_molar_flow
        dQ = tube.count * to_coolant
    return Derivatives(dF, dT, pressure_gradient(m, case, local), coolant_gradient(case, to_coolant, Tc), dQ,
                       residence_gradient(case, local))


def coolant_gradient(case, to_coolant, Tc):
    """dTc/dz [K/m] from the heat to the coolant [W/m per tube] (0 for a coolant at constant temperature)."""
    mode = case.coolant.kind
    if mode.coolant_balance:
        return mode.coolant_balance * case.tube.count * to_coolant / (case.coolant.mass_flow * case.coolant.cp)
    return 0.0 * Tc


def residence_gradient(case, local: Local):
    """dtau/dz [s/m]: the fluid volume per unit length over the volumetric flow."""
    void = case.bed.voidage if case.bed is not None else 1.0
    return case.tube.area * void / local.volumetric_flow


@dataclass
class RadialTransport:
    """The data of the two-dimensional model at one axial position (models.radial)."""

    lambda_er: object  # W/(m K)
    alpha_w: object  # W/(m^2 K), bed side of the wall
    dispersion: object  # m^2/s on the whole cross-section
    wall_u: object  # W/(m^2 K): alpha_w, the tube wall and the coolant side in series


def radial_transport(m, case, local: Local) -> RadialTransport:
    """lambda_er, alpha_w and D_er at the local (cross-section mean) state: the values of [radial] where given,
    else the correlations of models.correlations; and the wall-to-coolant coefficient of the 2-D model.
    With heat_transfer.overall given, the wall coefficient is what makes the lumped U of the 2-D data equal
    the given U (1/U_w = 1/U - d_t/(8 lambda_er)); not positive when lambda_er cannot carry the given U."""
    rad, tube, feed, bed = case.radial, case.tube, case.feed, case.bed
    flux = local.mass_flow / tube.area
    lam, alpha, disp = rad.lambda_er, rad.alpha_w, rad.dispersion
    if bed is not None:
        re_p = bed.particle_diameter * flux / feed.viscosity if feed.viscosity else None
        dp_dt = bed.particle_diameter / tube.inner_diameter
        if lam is None:
            k_f = feed.thermal_conductivity
            static = corr.zehner_schlunder_1970_static_conductivity(
                m, k_f, rad.solid_conductivity, bed.voidage, corr.SHAPE_FACTORS[rad.particle_shape])
            pr = local.cp_mass * feed.viscosity / k_f
            lam = corr.specchia_1980_radial_conductivity(m, static, k_f, re_p, pr, dp_dt)
        if alpha is None:
            alpha = corr.li_finlayson_1977_wall_coefficient(m, re_p, feed.thermal_conductivity,
                                                            bed.particle_diameter, rad.particle_shape)
        if disp is None:
            disp = corr.fahien_smith_1955_radial_dispersion(m, flux / local.density, bed.particle_diameter, dp_dt)
    elif disp is None:  # empty tube: turbulent Prandtl number 1 (Reynolds analogy; common practice)
        disp = lam / (local.density * local.cp_mass)
    ht = case.heat_transfer
    if not case.coolant.kind.exchanges_heat:
        wall_u = 0.0
    elif ht.overall is not None:
        wall_u = 1.0 / (1.0 / (ht.overall * ht.multiplier) - tube.inner_diameter / (8.0 * lam))
    else:
        wall_u = ht.multiplier * corr.overall_coefficient(m, alpha, ht.outside, tube.inner_diameter,
                                                          tube.wall_thickness, tube.wall_conductivity)
    return RadialTransport(lam, alpha, disp, wall_u)
