"""tubewright physics: case files, thermochemistry, kinetics, correlations, axial balances, simulator, checks.

Public API: ``load_case(path, overrides=None)`` -> Case, ``simulate(case)`` -> SimulationResult. They are
imported on first use (PEP 562), so that reading a case or a study folder does not pay for the
integrators (scipy.integrate, about 0.3 s)."""

from __future__ import annotations

from importlib import import_module

_WHERE = {"load_case": ".casefile", "CaseError": ".errors", "SimulationResult": ".results",
          "simulate": ".simulator"}

__all__ = ["load_case", "simulate", "CaseError", "SimulationResult"]


def __getattr__(name):
    if name in _WHERE:
        return getattr(import_module(_WHERE[name], __name__), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
