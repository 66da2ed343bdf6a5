"""Units at the edges: every dimensional input is a string such as "6 m" or "240 degC", parsed with pint,
checked for dimension and converted to SI. Inside the project all numbers are SI floats."""

from __future__ import annotations

from functools import lru_cache

from .errors import CaseError


@lru_cache(maxsize=1)
def registry():
    import pint

    try:  # a cached registry loads in a tenth of the time; the cache folder is the user's cache directory
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True, cache_folder=":auto:")
    except Exception:  # an unwritable cache is no reason to fail
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return ureg


# Dimension names used in the case schema -> a pint unit whose dimensionality is the one required.
DIMENSIONS = {
    "length": "m",
    "velocity": "m/s",
    "mass": "kg",
    "temperature": "K",
    "temperature_difference": "K",
    "pressure": "Pa",
    "molar_flow": "mol/s",
    "mass_flow": "kg/s",
    "molar_mass": "kg/mol",
    "molar_energy": "J/mol",
    "molar_heat_capacity": "J/mol/K",
    "molar_entropy": "J/mol/K",
    "specific_heat_capacity": "J/kg/K",
    "density": "kg/m^3",
    "viscosity": "Pa*s",
    "thermal_conductivity": "W/m/K",
    "heat_transfer_coefficient": "W/m^2/K",
    "diffusivity": "m^2/s",
    "dimensionless": "",
}


def to_si(text, unit: str, source: str, key: str) -> float:
    """Parse ``text`` (a string with units, or a bare number for dimensionless values) and return its value
    in the SI unit ``unit`` (a pint unit string). Raises CaseError naming ``source`` and ``key``."""
    if isinstance(text, str):
        try:
            return _parsed(text, unit)
        except _Unparsed:
            pass  # fall through to the checks below, which raise with the file and key
    return _to_si(text, unit, source, key)


class _Unparsed(Exception):
    pass


@lru_cache(maxsize=4096)
def _parsed(text: str, unit: str) -> float:
    """Cached conversion of well-formed text (studies parse the same strings for every task)."""
    try:
        return _to_si(text, unit, "", "")
    except CaseError as err:
        raise _Unparsed from err


def _to_si(text, unit: str, source: str, key: str) -> float:
    ureg = registry()
    if isinstance(text, bool):
        raise CaseError(source, key, f"expected a quantity in units of {unit or 'one'}, got {text!r}")
    if isinstance(text, (int, float)):
        if unit:
            raise CaseError(source, key, f'a bare number {text!r} has no unit; write it as "{text} {unit}"')
        return float(text)
    if not isinstance(text, str):
        raise CaseError(source, key, f"expected a string with units such as \"1 {unit}\", got {text!r}")
    try:
        q = ureg.Quantity(text.strip())
    except Exception as err:  # pint raises several types for unparsable text
        raise CaseError(source, key, f'cannot read "{text}" as a quantity ({err})') from err
    target = ureg.Quantity(1.0, unit) if unit else ureg.Quantity(1.0)
    if q.dimensionality != target.dimensionality:
        have = str(q.dimensionality) if not q.dimensionless else "dimensionless"
        want = str(target.dimensionality) if unit else "dimensionless"
        raise CaseError(source, key, f'"{text}" has dimension {have}; allowed: {want} (for example "1 {unit}")')
    return float(q.to(unit).magnitude) if unit else float(q.to("").magnitude)


def quantity(text, dimension: str, source: str, key: str) -> float:
    """Parse a value of a named dimension (a key of DIMENSIONS) into SI."""
    return to_si(text, DIMENSIONS[dimension], source, key)
