"""tubewright physics: case files, thermochemistry, kinetics, correlations, axial balances, simulator, checks.

Public API: ``load_case(path, overrides=None)`` -> Case, ``simulate(case)`` -> SimulationResult."""

from .casefile import load_case
from .errors import CaseError
from .results import SimulationResult
from .simulator import simulate

__all__ = ["load_case", "simulate", "CaseError", "SimulationResult"]
