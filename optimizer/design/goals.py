"""The goals of a design, one row each. A goal is a function of the design *figures* (the same names as the
simulation summary: models.summary.outlet_figures, models.figures.layout_figures, plus the annual cost of
optimizer.design.costs.cost_figures), so that one function gives the Pyomo objective on the collocation
model's figures and the number on a simulation's figures (the verification of the optimum).

Adding a goal is one row here and its line in docs/case-reference.md; ``tests/test_capabilities.py`` walks
this table against the docs and the verbs.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass


@dataclass(frozen=True)
class Goal:
    name: str
    sense: str  # "min" or "max"
    unit: str  # as reports print it
    description: str
    value: Callable  # figures -> objective (Pyomo expression or number)
    needs_product: bool = False


GOALS = {
    row.name: row
    for row in (
        Goal("min_cost", "min", "per year", "annualised capital and operating cost",
             lambda f: f["annual_cost_per_year"]),
        Goal("max_selectivity", "max", "-", "selectivity to chemistry.product", lambda f: f["product_selectivity"],
             needs_product=True),
        Goal("max_yield", "max", "-", "yield of chemistry.product", lambda f: f["product_yield"], needs_product=True),
        Goal("max_productivity", "max", "mol/(m^3 s)", "production rate per tube volume",
             lambda f: f["production_rate_mol_s"] / f["volume_m3"], needs_product=True),
        Goal("min_volume", "min", "m^3", "tube volume of the reactor", lambda f: f["volume_m3"]),
    )
}
