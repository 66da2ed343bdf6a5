"""Display units for the terminal tables: degrees Celsius, bar, kW or MW, t/h, millimetres, the production
duty in the unit it was given and the currency of [costs]. Presentation only: JSON, CSV and the store stay
SI with the unit in the field name. Temperature differences stay in kelvin (a difference of 1 K is 1 degC;
only absolute temperatures are shifted)."""

from __future__ import annotations

import math

KELVIN_OFFSET = 273.15


def _g(v: float) -> str:
    return f"{v:.6g}"


def temperature(kelvin) -> str:
    return f"{_g(kelvin - KELVIN_OFFSET)} degC"


def pressure(pascal) -> str:
    return f"{_g(pascal / 1e5)} bar"


def power(watt) -> str:
    return f"{_g(watt / 1e6)} MW" if abs(watt) >= 1e6 else f"{_g(watt / 1e3)} kW"


def mass_flow(kg_s) -> str:
    return f"{_g(kg_s * 3.6)} t/h"


def length(metre) -> str:
    return f"{_g(metre * 1e3)} mm" if abs(metre) < 0.1 else f"{_g(metre)} m"


# field name (SI, as in JSON) -> formatter; fields not listed are printed as their number and SI unit
BY_FIELD = {
    "inner_diameter_m": length,
    "heat_removed_W": power,
    "steam_raised_kg_s": mass_flow,
    "coolant_flow_kg_s": mass_flow,
}
BY_SUFFIX = (("_mol_s", lambda v: f"{_g(v)} mol/s"), ("_difference_K", lambda v: f"{_g(v)} K"),
             ("_K", temperature), ("_Pa", pressure), ("_W", power),
             ("_kg_s", mass_flow), ("_m", length), ("_s", lambda v: f"{_g(v)} s"),
             ("_m_s", lambda v: f"{_g(v)} m/s"))
# a limit's dimension -> formatter of its value and bound (models.limits rows)
BY_DIMENSION = {"temperature": temperature, "temperature_difference": lambda v: f"{_g(v)} K",
                "pressure": pressure, "velocity": lambda v: f"{_g(v)} m/s"}


def field(name: str, value, duty=None) -> str:
    """A summary or design field in its display unit; ``duty`` formats production rates (see ``duty_unit``)."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        return str(value)
    if name == "production_rate_mol_s" and duty is not None:
        return duty(value)
    if name in BY_FIELD:
        return BY_FIELD[name](value)
    for suffix, fmt in sorted(BY_SUFFIX, key=lambda s: -len(s[0])):  # the longest suffix first (_m_s, _m)
        if name.endswith(suffix):
            return fmt(value)
    return _g(value) if isinstance(value, float) else str(value)


def limit_value(row, value, duty=None) -> str:
    if value is None:
        return "-"
    if row.dimension == "production" and duty is not None:
        return duty(value)
    fmt = BY_DIMENSION.get(row.dimension)
    if fmt is not None:
        return fmt(value)
    return _g(value) + ("" if row.unit == "-" else f" {row.unit}")


def duty_unit(case):
    """A formatter of production rates [mol/s] in the unit the duty was given in (``limits.production_rate``,
    e.g. "20 t/year" or "3 mol/s"), or None without a duty. The unit is read by the project's quantity
    parser (units.to_si_one_of: the size of one such unit in mol/s or kg/s), never evaluated."""
    text = case.raw.get("limits", {}).get("production_rate")
    if not isinstance(text, str) or not case.product:
        return None
    from tubewright.models.errors import CaseError
    from tubewright.models.units import split_quantity, to_si_one_of

    split = split_quantity(text)
    if split is None:
        return None
    label = split[1]  # as the user wrote it
    try:
        unit, one = to_si_one_of(f"1 {label}", ("mol/s", "kg/s"), case.source, "limits.production_rate")
    except CaseError:  # accepted by the case reader already; only an edge of the length limit comes here
        return None
    per_mol_s = 1.0 if unit == "mol/s" else case.species_map[case.product].molar_mass

    def fmt(v):
        return f"{_g(v * per_mol_s / one)} {label}"
    return fmt


def money(value, currency: str) -> str:
    return f"{value:,.0f} {currency}"
