"""The optimum as a case file: the base case by ``include``, the command-line overrides, and the design
fixed in its own sections and in [design], so that ``tubewright simulate`` reproduces the optimum and
``tubewright optimize`` on it has nothing left to choose."""

from __future__ import annotations

import json
import math
from pathlib import Path

from tubewright.models.correlations import water_saturation_pressure

# design field -> (section, key, unit written)
_PLACES = {
    "length_m": ("tube", "length", "m"),
    "inner_diameter_m": ("tube", "inner_diameter", "m"),
    "tube_count": ("tube", "count", None),
    "inlet_temperature_K": ("feed", "temperature", "K"),
    "inlet_pressure_Pa": ("feed", "pressure", "Pa"),
    "coolant_flow_kg_s": ("coolant", "mass_flow", "kg/s"),
    "coolant_temperature_K": ("coolant", "temperature", "K"),
    "coolant_pressure_Pa": ("coolant", "pressure", "Pa"),
}
_DESIGN_KEY = {"length_m": "length", "inner_diameter_m": "inner_diameter", "tube_count": "tube_count",
               "inlet_temperature_K": "inlet_temperature", "inlet_pressure_Pa": "inlet_pressure",
               "coolant_flow_kg_s": "coolant_flow", "coolant_temperature_K": "coolant_temperature",
               "coolant_pressure_Pa": "coolant_pressure"}


def optimum_tables(case, design: dict, overrides: dict) -> dict:
    """The tables of the optimum case (nested dicts of TOML values)."""
    tables: dict = {}
    for dotted, value in (overrides or {}).items():
        node = tables
        *parents, last = dotted.split(".")
        for part in parents:
            node = node.setdefault(part, {})
        node[last] = value
    boiling = case.coolant.kind.temperature_source == "saturation"
    base_design = case.raw.get("design", {})
    for field, value in design.items():
        section, key, unit = _PLACES[field]
        text = int(round(value)) if unit is None else f"{value!r} {unit}"
        if _DESIGN_KEY[field] in base_design:  # every design key of the base, fixed at the optimum
            tables.setdefault("design", {})[_DESIGN_KEY[field]] = text
        if field == "coolant_temperature_K" and boiling:  # a boiling coolant is set by its pressure
            if "coolant_pressure_Pa" not in design:
                tables.setdefault("coolant", {})["pressure"] = f"{water_saturation_pressure(value)!r} Pa"
            continue
        tables.setdefault(section, {})[key] = text
    if "design" in case.raw and case.raw["design"].get("standard_tubes"):
        tables.setdefault("design", {})["standard_tubes"] = False
        tables.setdefault("tube", {})["wall_thickness"] = f"{case.tube.wall_thickness!r} m"
    return tables


def write_optimum_case(path: Path, case, design: dict, overrides: dict, title: str) -> Path:
    """Write the optimum as a TOML case including ``case.source`` (absolute path)."""
    tables = optimum_tables(case, design, overrides)
    lines = ["# The optimum found by tubewright optimize: the base case by include, the design fixed.",
             "# Screening estimate only: verify with detailed models, hazard studies and licensed engineers.",
             f"include = {toml_value(str(Path(case.source).resolve()))}", f"title = {toml_value(title)}"]
    lines += _tables(tables, [])
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def toml_text(tables: dict) -> str:
    """Nested dicts of TOML values (numbers, strings, booleans, lists, inline dicts) as TOML text."""
    return "\n".join(_tables(tables, [])).lstrip("\n") + "\n"


def _tables(tables: dict, prefix: list) -> list:
    lines, subtables = [], []
    plain = {k: v for k, v in tables.items() if not isinstance(v, dict)}
    if prefix and plain:
        lines.append(f"\n[{'.'.join(_key(p) for p in prefix)}]")
    lines += [f"{_key(k)} = {toml_value(v)}" for k, v in plain.items()]
    for k, v in tables.items():
        if isinstance(v, dict):
            subtables += _tables(v, prefix + [k])
    return lines + subtables


def _key(k: str) -> str:
    return k if k.replace("_", "").replace("-", "").isalnum() else json.dumps(k)


def toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if not math.isfinite(v):
            raise ValueError("a case file holds finite numbers only")
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v)  # a TOML basic string is a JSON string for these characters
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_key(k)} = {toml_value(x)}" for k, x in v.items()) + " }"
    raise TypeError(f"no TOML form for {type(v).__name__}")
