"""The coolant modes, one row each: what every consumer (balances, case reading, summaries, checks, the
simulator, the collocation model, the design spec, screening, plots) needs to know about a mode.

Adding a coolant mode is one row here, its balance in ``models.balances`` if it needs a new one, and its
line in docs/case-reference.md; ``tests/test_capabilities.py`` walks this table against the docs and the
verbs.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class CoolantMode:
    name: str
    description: str
    exchanges_heat: bool  # heat flows to a coolant through U (the coolant temperature enters the energy balance)
    holds_temperature: bool  # the fluid temperature is held at the feed value (the heat removed is reported)
    coolant_balance: int  # dTc/dz sign: +1 co-current, -1 counter-current, 0 constant coolant temperature
    has_coolant_flow: bool  # coolant mass flow and cp are inputs (and design.coolant_flow may be freed)
    temperature_source: str  # "given" ([coolant] temperature), "saturation" (from pressure), "feed", "none"
    enters_at: str | None  # "inlet" (z = 0) or "outlet" (z = L, a boundary-value problem); None: no coolant
    batchable: bool  # the batch integrator carries it (else: one simulation per sample)
    keys: tuple  # the [coolant] keys this mode reads; any other key is refused


COOLANT_MODES = {
    row.name: row
    for row in (
        CoolantMode("adiabatic", "no heat exchange", False, False, 0, False, "none", None, True, ("mode",)),
        CoolantMode("isothermal", "fluid held at the feed temperature; the heat removed is reported", False, True,
                    0, False, "feed", None, True, ("mode",)),
        CoolantMode("constant", "coolant at a constant given temperature", True, False, 0, False, "given", "inlet",
                    True, ("mode", "temperature")),
        CoolantMode("boiling_water", "boiling water at a given pressure (saturation temperature)", True, False, 0,
                    False, "saturation", "inlet", True, ("mode", "pressure")),
        CoolantMode("cocurrent", "coolant flowing with the fluid, entering at z = 0", True, False, +1, True, "given",
                    "inlet", True, ("mode", "temperature", "mass_flow", "cp")),
        CoolantMode("countercurrent", "coolant flowing against the fluid, entering at z = L (shooting)", True, False,
                    -1, True, "given", "outlet", False, ("mode", "temperature", "mass_flow", "cp")),
    )
}
