"""Reactions: equation strings, stoichiometry, rate laws (Arrhenius about a reference temperature),
equilibrium constants from thermochemistry, heats of reaction by Kirchhoff's law.

Rate law (one form covers power law, reversible power law and LHHW):

    r = k(T) * prod_i a_i^alpha_i * (1 - Q/K(T)) / (1 + sum_s K_s(T) a_s^n_s)^m

with a_i the driving quantity (concentration in mol/m^3 or partial pressure in Pa), Q = prod_i a_i^nu_i the
reaction quotient (the reversible factor is present only for ``<=>``), k(T) = k_ref exp(-E_a/R (1/T - 1/T_ref))
and K_s(T) = K_s,ref exp(-dH_s/R (1/T - 1/T_ref)). The reverse orders alpha_i + nu_i follow from
thermodynamic consistency and must not be negative. Rates are per reactor (bed) volume [mol/(m^3 s)] or per
catalyst mass [mol/(kg s)].
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from .backend import NUMPY
from .thermo import P_STD, R_GAS, T_STD

_TERM = re.compile(r"^\s*(?:(\d+(?:\.\d*)?|\.\d+)\s*(?=[A-Za-z_(\[])|(\d+(?:\.\d*)?|\.\d+)\s+)?(\S+)\s*$")



def rate_units(basis: str, driving: str, order: float) -> str:
    """The SI unit (pint string) of k_ref for a rate per ``basis`` ("volume" or "catalyst_mass") driven by
    ``driving`` ("concentration" or "partial_pressure") with total forward order ``order``: rate / drive^order
    written as plain powers of mol, m, kg, s and Pa ("m^3/mol/s", "mol/kg/s/Pa^1.3"), the form a case file
    accepts, so that it can be shown as an example and written back."""
    powers = {"mol": 1.0, "m": -3.0 if basis == "volume" else 0.0, "kg": 0.0 if basis == "volume" else -1.0,
              "s": -1.0, "Pa": 0.0}
    return _plain_powers(_per_drive(powers, driving, order))


def adsorption_units(driving: str, exponent: float) -> str:
    """The SI unit (pint string) of an adsorption constant K_s of a term K_s drive^exponent: 1/drive^exponent,
    as plain powers ("m^3/mol", "1/Pa^0.5")."""
    return _plain_powers(_per_drive({"mol": 0.0, "m": 0.0, "kg": 0.0, "s": 0.0, "Pa": 0.0}, driving, exponent))


def _per_drive(powers: dict, driving: str, order: float) -> dict:
    if driving == "concentration":
        powers["mol"] -= order
        powers["m"] += 3.0 * order
    else:
        powers["Pa"] -= order
    return powers


def _plain_powers(powers: dict) -> str:
    def power(unit, p):
        return unit if p == 1.0 else f"{unit}^{int(p)}" if float(p).is_integer() else f"{unit}^{p!r}"

    up = [power(u, p) for u, p in powers.items() if p > 0]
    down = [power(u, -p) for u, p in powers.items() if p < 0]
    return ("*".join(up) or "1") + "".join(f"/{d}" for d in down)


def parse_equation(text: str) -> tuple[dict[str, float], bool]:
    """``"A + 3 B -> 2 C"`` -> ({"A": -1, "B": -3, "C": 2}, reversible=False); ``<=>`` marks reversible.
    Raises ValueError with the reason when the text is not an equation."""
    if "<=>" in text:
        left, right, reversible = *text.split("<=>", 1), True
    elif "->" in text:
        left, right, reversible = *text.split("->", 1), False
    else:
        raise ValueError(f'"{text}" has no arrow; write "A + B -> C" or "A <=> B"')
    nu: dict[str, float] = {}
    for side, sign in ((left, -1.0), (right, 1.0)):
        if not side.strip():
            raise ValueError(f'"{text}" has an empty side')
        for term in side.split(" + "):
            match = _TERM.match(term)
            if not match or "->" in term or "<" in term:
                raise ValueError(f'cannot read the term "{term.strip()}" in "{text}"')
            coef = float(match.group(1) or match.group(2) or 1.0)
            if coef <= 0:
                raise ValueError(f'coefficient of "{match.group(3)}" must be positive in "{text}"')
            name = match.group(3)
            nu[name] = nu.get(name, 0.0) + sign * coef
    return {k: v for k, v in nu.items() if v != 0.0}, reversible


@dataclass(frozen=True)
class Adsorption:
    """One adsorption term K_s(T) a_s^n of an LHHW denominator."""

    species: str
    k_ref: float
    heat: float = 0.0  # dH_ads, J/mol (negative for exothermic adsorption)
    exponent: float = 1.0


@dataclass(frozen=True)
class Reaction:
    """A reaction with its rate law, SI throughout. ``equilibrium_ref`` None means K from thermochemistry."""

    name: str
    equation: str
    nu: dict
    reversible: bool
    k_ref: float
    activation_energy: float
    t_ref: float
    orders: dict
    driving: str = "concentration"  # or "partial_pressure"
    basis: str = "volume"  # or "catalyst_mass"
    adsorption: tuple = ()
    inhibition_exponent: float = 1.0
    equilibrium_ref: float | None = None  # K at t_ref in the driving basis (van 't Hoff with dH_r)
    heat_given: float | None = None  # dH_r at 298.15 K, J/mol
    extra: dict = field(default_factory=dict)

    @property
    def delta_n(self) -> float:
        return sum(self.nu.values())

    def adsorption_term(self, species: str):
        """The Adsorption term of ``species`` in the LHHW denominator, or None."""
        return next((a for a in self.adsorption if a.species == species), None)


def arrhenius(m, k_ref, activation_energy, t_ref, T):
    """k(T) = k_ref exp(-E_a/R (1/T - 1/T_ref)): Arrhenius written about a reference temperature so that
    k_ref and E_a are nearly uncorrelated when fitted (common practice in kinetic fitting)."""
    return k_ref * m.exp(-activation_energy / R_GAS * (1.0 / T - 1.0 / t_ref))


def heat_of_reaction(m, rx: Reaction, species: dict, T):
    """dH_r(T) = sum_i nu_i H_i(T) [J/mol], from heats of formation and Kirchhoff's law; with a given
    dH_r(298.15), dH_r(T) = dH_given + sum_i nu_i (H_i(T) - H_i(298.15))."""
    total = 0.0
    for name, n in rx.nu.items():
        sp = species[name]
        total = total + n * sp.enthalpy(m, T)
    if rx.heat_given is not None:
        offset = rx.heat_given - sum(n * float(species[s].enthalpy(NUMPY, T_STD)) for s, n in rx.nu.items())
        total = total + offset
    return total


def gibbs_of_reaction(m, rx: Reaction, species: dict, T):
    """dG°(T) = sum_i nu_i (H_i(T) - T S°_i(T)) [J/mol], standard state 1 bar ideal gas."""
    total = 0.0
    for name, n in rx.nu.items():
        sp = species[name]
        total = total + n * (sp.enthalpy(m, T) - T * sp.entropy_at(m, T))
    return total


def equilibrium_constant(m, rx: Reaction, species: dict, T):
    """K(T) in the reaction's driving basis.

    From thermochemistry: K_a = exp(-dG°/(R T)); K_p = K_a P°^dn [Pa^dn]; K_c = K_a (P°/(R T))^dn
    [(mol/m^3)^dn] (ideal gas). Given: K = K_ref exp(-dH_r(T_ref)/R (1/T - 1/T_ref)) (van 't Hoff with a
    constant heat of reaction)."""
    if rx.equilibrium_ref is not None:
        dh = float(heat_of_reaction(NUMPY, rx, species, rx.t_ref))
        return rx.equilibrium_ref * m.exp(-dh / R_GAS * (1.0 / T - 1.0 / rx.t_ref))
    ka = m.exp(-gibbs_of_reaction(m, rx, species, T) / (R_GAS * T))
    dn = rx.delta_n
    if rx.driving == "partial_pressure":
        return ka * P_STD**dn
    return ka * (P_STD / (R_GAS * T)) ** dn


def approach_to_equilibrium(m, rx: Reaction, species: dict, T, drive: dict):
    """Approach to equilibrium of a reversible reaction, beta = Q / K(T), with the reaction quotient
    Q = prod_i drive_i^nu_i in the reaction's driving basis (concentrations or partial pressures) and K of
    ``equilibrium_constant``: beta = 0 far from equilibrium (no products), 1 at equilibrium (the net rate
    vanishes), above 1 the reaction runs backwards (thermodynamics, e.g. Froment, Bischoff and De Wilde,
    Chemical Reactor Analysis and Design, 2011, ch. 1)."""
    q = 1.0
    for name, nu in rx.nu.items():
        q = q * _power(drive[name], nu)
    return q / equilibrium_constant(m, rx, species, T)


def _power(a, exponent):
    if isinstance(exponent, (int, float)):  # shortcuts only for plain numbers (sampled orders are arrays)
        if exponent == 0:
            return 1.0
        if exponent == 1:
            return a
    return a**exponent


def reaction_rate(m, rx: Reaction, species: dict, T, drive: dict):
    """Rate of one reaction (see module docstring) given the driving quantities ``drive[name]``."""
    k = arrhenius(m, rx.k_ref, rx.activation_energy, rx.t_ref, T)
    forward = k
    for name, order in rx.orders.items():
        forward = forward * _power(drive[name], order)
    rate = forward
    if rx.reversible:
        backward = k / equilibrium_constant(m, rx, species, T)
        for name in sorted(set(rx.orders) | set(rx.nu)):
            backward = backward * _power(drive[name], rx.orders.get(name, 0.0) + rx.nu.get(name, 0.0))
        rate = forward - backward
    if rx.adsorption:
        denominator = 1.0
        for ads in rx.adsorption:
            k_s = arrhenius(m, ads.k_ref, ads.heat, rx.t_ref, T)
            denominator = denominator + k_s * _power(drive[ads.species], ads.exponent)
        rate = rate / _power(denominator, rx.inhibition_exponent)
    return rate
