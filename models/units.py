"""Units at the edges: every dimensional input is a string such as "6 m" or "240 degC", parsed with pint,
checked for dimension and converted to SI. Inside the project all numbers are SI floats."""

from __future__ import annotations

import math
import re
from functools import lru_cache

from . import quantity_memo
from .errors import CaseError


@lru_cache(maxsize=1)
def registry():
    pint = _import_pint()

    try:  # a cached registry loads in a tenth of the time; the cache folder is the user's cache directory
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True, cache_folder=":auto:")
    except Exception:  # an unwritable cache is no reason to fail
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return ureg


def _import_pint():
    """pint, imported without its optional dask support: pint.compat imports dask whenever it is installed
    (0.2 s per process, and dask is installed here for studies), and tubewright never puts dask arrays into
    quantities. While pint is first imported, ``dask`` is marked absent in sys.modules; the mark is removed
    at once, so a later ``import dask`` works as usual. Nothing changes if either is imported already."""
    import sys

    if "pint" in sys.modules or "dask" in sys.modules:
        import pint

        return pint
    sys.modules["dask"] = None  # importlib.util.find_spec then reports dask as absent
    try:
        import pint
    finally:
        if sys.modules.get("dask", 0) is None:
            del sys.modules["dask"]
    return pint


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


def to_si(text, unit: str, source: str, key: str, difference: bool = False) -> float:
    """Parse ``text`` (a string with units, or a bare number for dimensionless values) and return its value
    in the SI unit ``unit`` (a pint unit string). Raises CaseError naming ``source`` and ``key``."""
    if isinstance(text, str):
        try:
            return _parsed(text, unit, difference)
        except _Unparsed:
            pass  # fall through to the checks below, which raise with the file and key
    return _to_si(text, unit, source, key, difference)


def to_si_one_of(text, units: tuple, source: str, key: str) -> tuple:
    """(unit, value in SI) for the first of ``units`` (pint unit strings of different dimensions, such as a
    molar and a mass rate) that the quantity converts to; the last unit's CaseError when none does. A quantity
    remembered under any of the units is found without trying the others (a refused try needs pint)."""
    if isinstance(text, str):
        for unit in units:
            value = quantity_memo.lookup(text, unit, False)
            if value is not None:
                return unit, value
    for unit in units[:-1]:
        try:
            return unit, to_si(text, unit, source, key)
        except CaseError:
            pass
    return units[-1], to_si(text, units[-1], source, key)


class _Unparsed(Exception):
    pass


@lru_cache(maxsize=4096)
def _parsed(text: str, unit: str, difference: bool) -> float:
    """Cached conversion of well-formed text (studies parse the same strings for every task), remembered on
    disk across processes (quantity_memo: a case read before loads without pint)."""
    value = quantity_memo.lookup(text, unit, difference)
    if value is None:
        try:
            value = _to_si(text, unit, "", "", difference)
        except CaseError as err:
            raise _Unparsed from err
        quantity_memo.remember(text, unit, difference, value)
    return value


MAX_TEXT = 80  # characters of one quantity
MAX_POWER = 12  # largest exponent of a unit
LARGEST = 1.0e50  # no SI value of a case is larger in magnitude (a guard against overflow downstream)
_NUMBER = re.compile(r"^\s*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d{1,3})?)\s*(.*?)\s*$")
_LETTER = "A-Za-z_\u00b0\u00b5\u03bc\u2126"  # letters, degree sign, micro signs, ohm
_UNIT_CHARS = re.compile(rf"^(?:1\s*/)?[{_LETTER}(/][{_LETTER}/*^().\s\d-]*$")
_POWER = re.compile(r"(?:\*\*|\^)\s*\(?\s*([+-]?\d+(?:\.\d+)?)(?:\s*/\s*(\d+))?\s*\)?")
_POWER_OF_POWER = re.compile(r"(?:\*\*|\^)[\s\d.()+-]*(?:\*\*|\^)")


def split_quantity(text: str):
    """(number, unit text) of "number unit" text (the unit text may be empty), or None when the text does not
    begin with a number or is longer than MAX_TEXT. Nothing is evaluated and pint is not needed."""
    match = _NUMBER.match(text) if len(text) <= MAX_TEXT else None
    return (float(match.group(1)), match.group(2)) if match else None


def parse(text: str, source: str = "", key: str = "", difference: bool = False):
    """A pint Quantity from ``text`` = a number followed by a unit, and nothing else: no arithmetic is
    evaluated (pint's own expression parser would evaluate "9**9**9 m" for ever), the text is at most
    MAX_TEXT characters, exponents are at most MAX_POWER, the number is finite.

    Temperatures: inside a compound unit (W/m^2/degC, Btu/lb/degF) a degree Celsius or Fahrenheit is an
    interval (pint's delta units), so 1 Btu/(h ft^2 degF) = 5.678 W/(m^2 K) (NIST SP 811). A lone degC or
    degF is an absolute temperature, unless ``difference`` says the quantity is a temperature difference."""
    if len(text) > MAX_TEXT:
        raise CaseError(source, key, f"a quantity of {len(text)} characters; allowed: at most {MAX_TEXT}")
    split = split_quantity(text)
    if split is None:
        raise CaseError(source, key, f'cannot read "{text}" as a quantity: write a number and a unit, for example '
                        '"6 m" (no arithmetic)')
    magnitude, unit_text = split
    if not math.isfinite(magnitude):
        raise CaseError(source, key, f'"{text}" is not a finite number')
    if not unit_text:
        return registry().Quantity(magnitude)
    if not _UNIT_CHARS.match(unit_text) or _POWER_OF_POWER.search(unit_text):
        raise CaseError(source, key, f'cannot read the unit of "{text}": write a unit such as "m", "kJ/mol", '
                        '"W/m^2/K" (no arithmetic)')
    for power, denominator in _POWER.findall(unit_text):
        if abs(float(power) / float(denominator or 1)) > MAX_POWER:
            raise CaseError(source, key, f'"{text}": unit exponents are at most {MAX_POWER}')
    ureg = registry()
    try:
        units = ureg.parse_units(unit_text, as_delta=True)  # offset units inside compounds become intervals
    except Exception as err:  # pint raises several types for unknown or malformed units
        raise CaseError(source, key, f'cannot read the unit of "{text}" ({err})') from err
    container = dict(units._units)
    if difference and len(container) == 1:
        (name, power), = container.items()
        if not ureg._units[name].is_multiplicative:  # a lone degC or degF: here an interval
            units = ureg.Unit(f"delta_{name}") ** power
    return ureg.Quantity(magnitude, units)


def _to_si(text, unit: str, source: str, key: str, difference: bool = False) -> float:
    if isinstance(text, bool):
        raise CaseError(source, key, f"expected a quantity in units of {unit or 'one'}, got {text!r}")
    if isinstance(text, (int, float)):
        if unit:
            raise CaseError(source, key, f'a bare number {text!r} has no unit; write it as "{text} {unit}"')
        value = float(text)
    elif not isinstance(text, str):
        raise CaseError(source, key, f"expected a string with units such as \"1 {unit}\", got {text!r}")
    else:
        q = parse(text, source, key, difference)
        ureg = registry()
        target = ureg.Quantity(1.0, unit) if unit else ureg.Quantity(1.0)
        if q.dimensionality == target.dimensionality:
            value = float(q.to(unit).magnitude) if unit else float(q.to("").magnitude)
        elif _same_dimension(q.dimensionality, target.dimensionality):  # fractional exponents, rounding apart
            value = float(q.to_base_units().magnitude / target.to_base_units().magnitude)
        else:
            have = str(q.dimensionality) if not q.dimensionless else "dimensionless"
            want = str(target.dimensionality) if unit else "dimensionless"
            raise CaseError(source, key, f'"{text}" has dimension {have}; allowed: {want} (for example "1 {unit}")')
    if not math.isfinite(value) or abs(value) > LARGEST:
        raise CaseError(source, key, f"{text!r} is not a finite number of reasonable size (at most {LARGEST:g} in SI)")
    return value


EXPONENT_TOLERANCE = 1e-9  # fractional exponents (reaction orders) computed two ways differ in the last bits


def _same_dimension(a, b) -> bool:
    """Equal dimensions up to rounding of fractional exponents."""
    da, db = dict(a), dict(b)
    return all(abs(da.get(k, 0.0) - db.get(k, 0.0)) <= EXPONENT_TOLERANCE for k in set(da) | set(db))


def quantity(text, dimension: str, source: str, key: str) -> float:
    """Parse a value of a named dimension (a key of DIMENSIONS) into SI. A "temperature_difference" reads a
    lone degC or degF as an interval."""
    return to_si(text, DIMENSIONS[dimension], source, key, difference=dimension == "temperature_difference")
