"""Uncertain or swept parameters of a case, addressed by dotted paths, applied by value (SI).

Supported paths:
    chemistry.reactions.NAME.k_ref | .activation_energy | .heat_of_reaction | .orders.SPECIES
    chemistry.reactions.NAME.adsorption.SPECIES.k_ref | .heat   (a term of the reaction's LHHW denominator)
    heat_transfer.multiplier
    radial.solid_conductivity | .lambda_er | .alpha_w   (data of the two-dimensional model, [radial]; they act
    on the 2-D model and on the 1-D model with heat_transfer.inside = "radial_lumped")
    feed.temperature | feed.pressure | feed.molar_flows.SPECIES
    coolant.temperature | coolant.mass_flow | coolant.pressure  (only those the coolant mode reads; the
    pressure of boiling water sets its saturation temperature)

``apply`` accepts numbers (one case) or numpy arrays of one value per sample (a batch): the balances
broadcast over the samples, so one integration carries them all."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from .backend import NUMPY
from .correlations import water_saturation_temperature
from .errors import CaseError, suggest
from .reactions import adsorption_units, heat_of_reaction, rate_units
from .thermo import T_STD

SIMPLE = {
    "heat_transfer.multiplier": "",
    "feed.temperature": "K",
    "feed.pressure": "Pa",
    "coolant.temperature": "K",
    "coolant.mass_flow": "kg/s",
    "coolant.pressure": "Pa",
}
RADIAL = {"radial.solid_conductivity": "W/m/K", "radial.lambda_er": "W/m/K", "radial.alpha_w": "W/m^2/K"}
REACTION_FIELDS = ("k_ref", "activation_energy", "heat_of_reaction", "orders", "adsorption")
ADSORPTION_FIELDS = ("k_ref", "heat")


def si_unit(case, path: str, source: str, key: str) -> str:
    """The SI unit (pint string) of the parameter at ``path``; CaseError for an unknown path."""
    if path.startswith("coolant.") and path in SIMPLE:  # only what the mode reads (models.coolant_modes)
        mode = case.coolant.kind
        if path.split(".")[1] not in mode.keys:
            reads = ", ".join(f"coolant.{k}" for k in mode.keys if f"coolant.{k}" in SIMPLE) or "no coolant parameter"
            raise CaseError(source, key, f'"{path}" does not apply to coolant mode "{mode.name}"; this mode reads: '
                            f"{reads}")
    if path in SIMPLE:
        return SIMPLE[path]
    if path in RADIAL:
        _radial_field(case, path, source, key)
        return RADIAL[path]
    parts = path.split(".")
    if path.startswith("feed.molar_flows."):
        _species(case, parts[2], source, key)
        return "mol/s"
    if path.startswith("chemistry.reactions.") and len(parts) >= 4:
        rx = _reaction(case, parts[2], source, key)
        field = parts[3]
        if field not in REACTION_FIELDS:
            raise CaseError(source, key, f'"{path}": no parameter "{field}"{suggest(field, REACTION_FIELDS)}; '
                            f"allowed: {', '.join(REACTION_FIELDS)}")
        if field == "orders":
            if len(parts) != 5:
                raise CaseError(source, key, f'"{path}": name the species, e.g. ...orders.A')
            _species(case, parts[4], source, key)
            return ""
        if field == "adsorption":
            ads = _adsorption_term(rx, parts, path, source, key)
            if parts[5] == "heat":
                return "J/mol"
            return adsorption_units(rx.driving, ads.exponent)
        if len(parts) != 4:
            raise CaseError(source, key, f'"{path}": nothing follows {field}')
        if field == "k_ref":
            return rate_units(rx.basis, rx.driving, sum(rx.orders.values()))
        return "J/mol"
    allowed = list(SIMPLE) + list(RADIAL) + ["feed.molar_flows.SPECIES"] + [f"chemistry.reactions.{r.name}.{f}"
                                                              for r in case.reactions for f in REACTION_FIELDS]
    raise CaseError(source, key, f'unknown parameter "{path}"{suggest(path, allowed)}; allowed: '
                    f"{', '.join(allowed)}")


def _radial_field(case, path, source, key):
    """A [radial] value can vary only where the case gives it: one computed along the tube by its correlation
    has no single value to vary, and the pellet conductivity acts only through lambda_er's correlation."""
    field = path.split(".")[1]
    rad = case.radial
    if rad is None:
        raise CaseError(source, key, f'"{path}": the case has no [radial] table (the data of the two-dimensional '
                        "model)")
    if field == "solid_conductivity":
        if case.bed is None or rad.lambda_er is not None:
            why = "the tube is empty" if case.bed is None else "radial.lambda_er is given"
            raise CaseError(source, key, f'"{path}" is not used: {why}, so the pellet conductivity enters no '
                            "correlation")
    elif getattr(rad, field) is None:
        raise CaseError(source, key, f'"{path}" is computed along the tube by its correlation, so it has no single '
                        f"value to vary: give radial.{field} in the case, or vary radial.solid_conductivity")


def radial_data_unused(case, paths, two_dimensional: bool) -> str | None:
    """The first [radial] path among ``paths`` that a run would not use (the 1-D model reads [radial] only with
    heat_transfer.inside = "radial_lumped"), or None."""
    if two_dimensional or case.heat_transfer.inside == "radial_lumped":
        return None
    return next((p for p in paths if p in RADIAL), None)


def _adsorption_term(rx, parts, path, source, key):
    if len(parts) != 6 or parts[5] not in ADSORPTION_FIELDS:
        raise CaseError(source, key, f'"{path}": name the species and k_ref or heat, e.g. ...adsorption.A.k_ref')
    term = rx.adsorption_term(parts[4])
    if term is None:
        raise CaseError(source, key, f'"{path}": reaction {rx.name} has no adsorption term for "{parts[4]}"; '
                        f"its terms: {', '.join(a.species for a in rx.adsorption) or 'none'}")
    return term


def temperature_law(case, path: str):
    """For a constant with a temperature law (a rate constant's k_ref, an adsorption constant's k_ref):
    (the reaction's T_ref, the path of the law's energy: the activation energy or the heat of adsorption,
    the case's value of that energy); None for any other path."""
    parts = path.split(".")
    if not (path.startswith("chemistry.reactions.") and parts[-1] == "k_ref"):
        return None
    rx = next(r for r in case.reactions if r.name == parts[2])
    if parts[3] == "adsorption":
        ads = rx.adsorption_term(parts[4])
        return rx.t_ref, ".".join(parts[:-1] + ["heat"]), ads.heat
    return rx.t_ref, ".".join(parts[:-1] + ["activation_energy"]), rx.activation_energy


def _reaction(case, name, source, key):
    for rx in case.reactions:
        if rx.name == name:
            return rx
    raise CaseError(source, key, f'no reaction "{name}"{suggest(name, [r.name for r in case.reactions])}')


def _species(case, name, source, key):
    if name not in case.names:
        raise CaseError(source, key, f'no species "{name}"{suggest(name, case.names)}')


def base_value(case, path: str):
    """The case's own value of a parameter (SI)."""
    parts = path.split(".")
    if path in SIMPLE or path in RADIAL:
        section, attr = parts
        return getattr(getattr(case, section), attr)
    if path.startswith("feed.molar_flows."):
        return case.feed.molar_flows[case.index(parts[2])]
    rx = next(r for r in case.reactions if r.name == parts[2])
    if parts[3] == "orders":
        return rx.orders.get(parts[4], 0.0)
    if parts[3] == "adsorption":
        return getattr(rx.adsorption_term(parts[4]), parts[5])
    if parts[3] == "heat_of_reaction":
        return rx.heat_given if rx.heat_given is not None else float(heat_of_reaction(NUMPY, rx, case.species_map,
                                                                                      T_STD))
    return getattr(rx, parts[3])


def apply(case, values: dict):
    """The case with each path set to its value (number or array)."""
    feed, coolant, heat, radial = case.feed, case.coolant, case.heat_transfer, case.radial
    reactions = {rx.name: rx for rx in case.reactions}
    flows = list(case.feed.molar_flows)
    for path, v in values.items():
        parts = path.split(".")
        if path == "heat_transfer.multiplier":
            heat = replace(heat, multiplier=v)
        elif path in ("feed.temperature", "feed.pressure"):
            feed = replace(feed, **{parts[1]: v})
        elif path in ("coolant.temperature", "coolant.mass_flow"):
            coolant = replace(coolant, **{parts[1]: v})
        elif path == "coolant.pressure":  # boiling water: the pressure sets the coolant temperature
            coolant = replace(coolant, pressure=v, temperature=water_saturation_temperature(v, NUMPY))
        elif path.startswith("feed.molar_flows."):
            flows[case.index(parts[2])] = v
        elif path in RADIAL:
            radial = replace(radial, **{parts[1]: v})
        else:
            rx = reactions[parts[2]]
            if parts[3] == "orders":
                reactions[rx.name] = replace(rx, orders={**rx.orders, parts[4]: v})
            elif parts[3] == "heat_of_reaction":
                reactions[rx.name] = replace(rx, heat_given=v)
            elif parts[3] == "adsorption":
                terms = tuple(replace(a, **{parts[5]: v}) if a.species == parts[4] else a for a in rx.adsorption)
                reactions[rx.name] = replace(rx, adsorption=terms)
            else:
                reactions[rx.name] = replace(rx, **{parts[3]: v})
    feed = replace(feed, molar_flows=tuple(flows))
    return replace(case, feed=feed, coolant=coolant, heat_transfer=heat, radial=radial,
                   reactions=tuple(reactions[r.name] for r in case.reactions))


def size_of(values: dict) -> int:
    sizes = {np.size(v) for v in values.values()}
    return max(sizes) if sizes else 1
