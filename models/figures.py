"""Design figures, each written once with plain arithmetic so that one formula serves numbers, arrays of
samples and Pyomo expressions (the collocation model calls the same functions on its variables):

- the layout figures of the inlet (velocity, Reynolds number, L/d, volume, outer tube area), which depend
  only on the design and the feed;
- the pointwise figures along the tube (temperature, fluid-to-coolant difference, runaway group), of which
  limits bound the largest value;
- the runaway criterion, defined here once for every verb.
"""

from __future__ import annotations

import math

import numpy as np

from . import correlations as corr
from .backend import NUMPY
from .reactions import heat_of_reaction
from .thermo import R_GAS


def layout_figures(case) -> dict:
    """Figures of the layout and the feed (SI): superficial inlet velocity [m/s], Reynolds number at the
    inlet (particle Reynolds number G d_p/mu in a packed bed, tube Reynolds number G d/mu in an empty tube),
    length-to-diameter ratio, tube volume [m^3], outer tube area [m^2] and inlet volumetric flow [m^3/s]
    of the whole reactor. ``case`` may carry Pyomo components as design values (collocation model)."""
    tube, feed = case.tube, case.feed
    n = tube.count
    mass_flow_tube = sum(f * s.molar_mass for f, s in zip(feed.molar_flows, case.species)) / n
    if case.phase == "gas":
        vdot_tube = sum(feed.molar_flows) / n * R_GAS * feed.temperature / feed.pressure
    else:
        vdot_tube = mass_flow_tube / feed.density
    d_char = case.bed.particle_diameter if case.bed is not None else tube.inner_diameter
    out = {
        "inlet_velocity_m_s": vdot_tube / tube.area,
        "reynolds": mass_flow_tube / tube.area * d_char / feed.viscosity,
        "length_to_diameter": tube.length / tube.inner_diameter,
        "volume_m3": n * tube.area * tube.length,
        "outer_area_m2": n * math.pi * (tube.inner_diameter + 2.0 * tube.wall_thickness) * tube.length,
        "inlet_volumetric_flow_m3_s": n * vdot_tube,
    }
    if case.bed is not None:
        out["tube_to_particle_ratio"] = tube.inner_diameter / case.bed.particle_diameter
    return out


def correlation_arguments(case, figures: dict) -> list[tuple]:
    """The arguments of the transport correlations that the case uses which depend on the design, as
    (correlation function, argument name, value) with the value taken from the layout ``figures`` (numbers
    or Pyomo expressions). The Reynolds number of the feed holds along the whole tube (constant mass flux
    and viscosity), so the inlet value is every value. Properties the design cannot move (voidage, Prandtl
    number) are checked by ``models.checks.correlation_ranges`` only."""
    re = figures["reynolds"]
    out = []
    if case.bed is not None:
        out.append((corr.ergun_pressure_gradient, "Re_p", re))
        if case.coolant.kind.exchanges_heat and case.heat_transfer.inside == "leva" and \
                case.heat_transfer.overall is None:
            out += [(corr.leva_cooling_wall_nusselt, "Re_p", re),
                    (corr.leva_cooling_wall_nusselt, "dp_dt", 1.0 / figures["tube_to_particle_ratio"])]
        return out
    out.append((corr.churchill_1977_friction, "Re", re))
    if case.coolant.kind.exchanges_heat and case.heat_transfer.overall is None:
        inside = {"gnielinski": corr.gnielinski_nusselt, "dittus_boelter": corr.dittus_boelter_nusselt,
                  "laminar": corr.laminar_nusselt}.get(case.heat_transfer.inside)
        if inside is not None:
            out.append((inside, "Re", re))
        if inside is corr.gnielinski_nusselt:
            out.append((corr.petukhov_friction, "Re", re))
    return out


def correlation_range_excesses(case, figures: dict) -> dict:
    """The relative excess of every design-dependent correlation argument over its validity range, one
    entry per side: (low - x)/low and (x - high)/high, each <= 0 inside the range. The limit
    ``correlations_in_range`` bounds every entry by 0 (one constraint each in the collocation model; the
    simulation reports the largest)."""
    out = {}
    for fn, arg, x in correlation_arguments(case, figures):
        low, high = fn.validity[arg]
        if low > 0.0:
            out[f"{fn.__name__}.{arg}>={low:g}"] = (low - x) / low
        out[f"{fn.__name__}.{arg}<={high:g}"] = (x - high) / high
    return out


def critical_reaction(case) -> int:
    """Index of the reaction that sets the runaway criterion: the heat-releasing reaction (negative heat of
    reaction at its reference temperature) with the largest activation energy; the largest activation
    energy of all if none releases heat. The most temperature-sensitive heat source gives the smallest
    critical rise R Tc^2 / E, so this choice is the conservative one, and it does not depend on the state
    (the criterion stays smooth for the optimiser)."""
    species = case.species_map

    def nominal(x):  # a case of many samples carries arrays: the choice follows their mean
        return float(np.mean(x))

    heat_releasing = [j for j, rx in enumerate(case.reactions)
                      if nominal(heat_of_reaction(NUMPY, rx, species, nominal(rx.t_ref))) < 0.0]
    pool = heat_releasing or list(range(len(case.reactions)))
    return max(pool, key=lambda j: nominal(case.reactions[j].activation_energy))


def runaway_group(case, T, Tc, reaction: int | None = None):
    """The runaway criterion of tubewright, for every verb: the local excess of the fluid over the local
    coolant temperature in units of the Semenov-type critical rise,

        S(z) = (T(z) - Tc(z)) E / (R Tc(z)^2),

    with E the activation energy of ``critical_reaction``. The van Welsenaere and Froment (Chem. Eng. Sci.
    25, 1970, 1503-1516) bound keeps the hot spot within about R Tc^2 / E of the coolant, i.e. S <= 1 (from
    memory); the limit ``runaway_margin`` bounds max_z S and the check flags max_z S > 1. The local
    coolant temperature is used so that counter-current and co-current coolant are judged where the
    fluid is. ``reaction`` may be given to skip the choice (the collocation model fixes it at build time)."""
    j = critical_reaction(case) if reaction is None else reaction
    e_a = case.reactions[j].activation_energy
    return (T - Tc) * e_a / (R_GAS * Tc**2)


# Pointwise figures: field name -> f(case, T, Tc, reaction) along the tube; limits bound their maximum.
POINTWISE = {
    "max_temperature_K": lambda case, T, Tc, j=None: T,
    "max_temperature_difference_K": lambda case, T, Tc, j=None: T - Tc,
    "max_runaway_group": runaway_group,
}
