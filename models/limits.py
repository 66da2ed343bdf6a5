"""The limits of a design, one row each: what every consumer needs. The case reader takes the unit and the
applicability from here, ``simulate`` reports every limit of [limits] as a finding, ``optimize`` turns each
into constraints on the collocation model, and ``screen`` evaluates each per sample.

Every limit bounds one *figure*, a field of the simulation summary and of the screening outputs, which
the collocation model also provides under the same name (models.figures writes the shared formulas).
Pointwise figures are bounded at every collocation point; the simulation reports their largest value.

Adding a limit is one row here (with a figure the three consumers provide) and its line in
docs/case-reference.md; ``tests/test_capabilities.py`` walks this table against the docs and the verbs.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .figures import POINTWISE


@dataclass(frozen=True)
class Limit:
    name: str
    kind: str  # "min" or "max"
    dimension: str  # a key of models.units.DIMENSIONS, or "production" (a molar or a mass rate)
    unit: str  # SI unit of the bound, as reports print it ("-" for dimensionless)
    figure: str  # the figure it bounds: a field of the summary, the screening outputs and the NLP's figures
    description: str
    needs_product: bool = False
    needs_coolant: bool = False  # only for coolant modes that exchange heat
    needs_coolant_flow: bool = False  # only for coolant modes with a coolant flow
    needs_bed: bool = False  # only for packed tubes
    switch: bool = False  # written `name = true` in [limits]; the bound is fixed (0), false leaves it out

    @property
    def pointwise(self) -> bool:
        """Bounded entry by entry (each collocation point, or each side of each correlation range)."""
        return self.figure in POINTWISE or self.figure == "max_correlation_range_excess"

    def passes(self, value, bound, rtol: float = 1e-6):
        """Whether ``value`` (number or array) keeps the bound (NaN fails), with a relative tolerance that
        absorbs the solver's feasibility tolerance."""
        slack = rtol * abs(bound) + 1e-12
        v = np.asarray(value, dtype=float)
        ok = v <= bound + slack if self.kind == "max" else v >= bound - slack
        return ok if ok.ndim else bool(ok)


LIMITS = {
    row.name: row
    for row in (
        Limit("production_rate", "min", "production", "mol/s", "production_rate_mol_s",
              "net formation of chemistry.product (mol/s, or a mass rate such as \"20 t/year\")", needs_product=True),
        Limit("min_conversion", "min", "dimensionless", "-", "conversion", "conversion of the key reactant"),
        Limit("min_selectivity", "min", "dimensionless", "-", "product_selectivity",
              "selectivity to chemistry.product", needs_product=True),
        Limit("max_temperature", "max", "temperature", "K", "max_temperature_K",
              "hot-spot temperature (every point along the tube)"),
        Limit("max_temperature_difference", "max", "temperature_difference", "K", "max_temperature_difference_K",
              "fluid minus local coolant temperature (every point)", needs_coolant=True),
        Limit("max_pressure_drop", "max", "pressure", "Pa", "pressure_drop_Pa", "pressure drop over the tube"),
        Limit("min_velocity", "min", "velocity", "m/s", "inlet_velocity_m_s", "superficial inlet velocity"),
        Limit("max_velocity", "max", "velocity", "m/s", "inlet_velocity_m_s", "superficial inlet velocity"),
        Limit("min_reynolds", "min", "dimensionless", "-", "reynolds",
              "inlet Reynolds number (particle Reynolds number in a packed bed)"),
        Limit("max_reynolds", "max", "dimensionless", "-", "reynolds",
              "inlet Reynolds number (particle Reynolds number in a packed bed)"),
        Limit("min_length_to_diameter", "min", "dimensionless", "-", "length_to_diameter", "tube length / diameter"),
        Limit("max_length_to_diameter", "max", "dimensionless", "-", "length_to_diameter", "tube length / diameter"),
        Limit("max_coolant_outlet_temperature", "max", "temperature", "K", "coolant_outlet_temperature_K",
              "coolant temperature where it leaves", needs_coolant=True, needs_coolant_flow=True),
        Limit("runaway_margin", "max", "dimensionless", "-", "max_runaway_group",
              "runaway group, largest (T - Tc) E/(R Tc^2) along the tube", needs_coolant=True),
        Limit("min_tube_to_particle_ratio", "min", "dimensionless", "-", "tube_to_particle_ratio",
              "tube-to-particle diameter ratio d_t/d_p", needs_bed=True),
        Limit("correlations_in_range", "max", "dimensionless", "-", "max_correlation_range_excess",
              "largest relative excess of a correlation argument over its validity range (<= 0 inside)",
              switch=True),
    )
}

# pairs of limits of one figure whose bounds must not cross
PAIRS = (("min_velocity", "max_velocity"), ("min_reynolds", "max_reynolds"),
         ("min_length_to_diameter", "max_length_to_diameter"))
