"""Shared builders for small test cases (dicts in the case-file layout; values invented for tests unless a
source is named)."""

from __future__ import annotations

import copy
import math
from pathlib import Path

from tubewright.models.casefile import build_case

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "studies" / "demo"


def liquid_case(**changes):
    """Isothermal liquid A -> D in an empty tube (test data, invented)."""
    data = {
        "chemistry": {
            "phase": "liquid",
            "key_reactant": "A",
            "product": "D",
            "species": {
                "A": {"molar_mass": "100 g/mol", "cp": "150 J/mol/K", "heat_of_formation": "-100 kJ/mol"},
                "B": {"molar_mass": "50 g/mol", "cp": "100 J/mol/K", "heat_of_formation": "-50 kJ/mol"},
                "C": {"molar_mass": "150 g/mol", "cp": "250 J/mol/K", "heat_of_formation": "-200 kJ/mol"},
                "D": {"molar_mass": "100 g/mol", "cp": "150 J/mol/K", "heat_of_formation": "-200 kJ/mol"},
                "S": {"molar_mass": "18 g/mol", "cp": "75 J/mol/K", "heat_of_formation": "0 kJ/mol"},
            },
            "reactions": {
                "r1": {"equation": "A -> D", "orders": {"A": 1}, "k_ref": "0.01 1/s",
                       "activation_energy": "50 kJ/mol", "t_ref": "350 K"},
            },
        },
        "feed": {"molar_flows": {"A": "0.01 mol/s", "S": "0.5 mol/s"}, "temperature": "350 K",
                 "pressure": "5 bar", "density": "1000 kg/m^3", "viscosity": "1e-3 Pa*s",
                 "thermal_conductivity": "0.6 W/m/K"},
        "tube": {"inner_diameter": "20 mm", "length": "10 m", "count": 1},
        "coolant": {"mode": "isothermal"},
        "numerics": {"rtol": 1e-10, "atol": 1e-14},
    }
    return _apply(data, changes)


def _apply(data, changes):
    data = copy.deepcopy(data)
    for dotted, value in changes.items():
        node = data
        parts = dotted.split(".")
        for p in parts[:-1]:
            node = node.setdefault(p, {})
        if value is None:
            node.pop(parts[-1], None)
        else:
            node[parts[-1]] = value
    return data


def make(data, source="test-case.toml"):
    return build_case(data, source)

def min_volume_case(x_min=0.9, **more):
    data = liquid_case(**{"design": {"length": {"min": "1 m", "max": "200 m"}},
                          "limits": {"min_conversion": x_min}, "goal": {"objective": "min_volume"},
                          "numerics.finite_elements": 20, **more})
    return make(data)


def logsdon_biegler_data(nfe: int = 50):
    """The A -> B -> C temperature-profile problem of Logsdon and Biegler (1989) as a liquid tube case."""
    r = 8.314462618
    t_ref = 350.0
    k1 = 4000.0 * math.exp(-2500.0 / t_ref)
    k2 = 6.2e5 * math.exp(-5000.0 / t_ref)
    area = math.pi * 0.02**2 / 4
    data = liquid_case(**{
        "chemistry.product": "B",
        "chemistry.species": {
            "A": {"molar_mass": "50 g/mol", "cp": "100 J/mol/K"},
            "B": {"molar_mass": "50 g/mol", "cp": "100 J/mol/K"},
            "C": {"molar_mass": "50 g/mol", "cp": "100 J/mol/K"},
            "S": {"molar_mass": "18 g/mol", "cp": "75 J/mol/K"},
        },
        "chemistry.reactions": {
            "r1": {"equation": "A -> B", "orders": {"A": 2}, "k_ref": f"{k1} m^3/mol/s",
                   "activation_energy": f"{2500 * r} J/mol", "t_ref": f"{t_ref} K"},
            "r2": {"equation": "B -> C", "orders": {"B": 1}, "k_ref": f"{k2} 1/s",
                   "activation_energy": f"{5000 * r} J/mol", "t_ref": f"{t_ref} K"},
        },
        # v = 1e-3 m^3/s at 1000 kg/m^3; c_A0 = 1 mol/m^3
        "feed.molar_flows": {"A": "1e-3 mol/s", "S": f"{(1.0 - 1e-3 * 0.05) / 0.018} mol/s"},
        "feed.temperature": "350 K",
        "tube.length": f"{1e-3 * 1.0 / area} m",
        "design": {"length": f"{1e-3 * 1.0 / area} m", "inner_diameter": "20 mm",
                   "temperature_profile": {"min": "298 K", "max": "398 K"}},
        "goal": {"objective": "max_yield"},
        "numerics.finite_elements": nfe,
    })
    return data
