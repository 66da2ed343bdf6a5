"""Shared builders for small test cases (dicts in the case-file layout; values invented for tests)."""

from __future__ import annotations

import copy
from pathlib import Path

import pytest

from models.casefile import build_case

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


@pytest.fixture
def demo_dir():
    return DEMO
