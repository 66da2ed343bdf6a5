"""Reading [design], [goal] and [costs] of a case: which design quantities are free and between which
bounds, what to optimise (optimizer.design.goals) and at what prices; [limits] is read with the case
(models.limits). Bad input raises CaseError naming the file and key."""

from __future__ import annotations

import re
from dataclasses import dataclass, field, fields

from tubewright.models.casefile import Table
from tubewright.models.coolant_modes import COOLANT_MODES
from tubewright.models.errors import CaseError
from tubewright.models.units import quantity
from tubewright.optimizer.design.costs import CostModel
from tubewright.optimizer.design.goals import GOALS

CURRENCY = re.compile(r"[A-Za-z\u00a3\u00a5\u20ac$]{1,8}")  # a label only: ISO codes, "kEUR", signs

# design key -> (unit dimension, where the value lives in the case, human name)
DESIGN_KEYS = {
    "length": ("length", "tube.length"),
    "inner_diameter": ("length", "tube.inner_diameter"),
    "tube_count": ("dimensionless", "tube.count"),
    "inlet_temperature": ("temperature", "feed.temperature"),
    "inlet_pressure": ("pressure", "feed.pressure"),
    "coolant_flow": ("mass_flow", "coolant.mass_flow"),
    "coolant_temperature": ("temperature", "coolant.temperature"),
    "coolant_pressure": ("pressure", "coolant.pressure"),  # boiling water: sets the coolant temperature
}

# design key -> field name of reports (SI unit in the name)
DESIGN_FIELDS = {"length": "length_m", "inner_diameter": "inner_diameter_m", "tube_count": "tube_count",
                 "inlet_temperature": "inlet_temperature_K", "inlet_pressure": "inlet_pressure_Pa",
                 "coolant_flow": "coolant_flow_kg_s", "coolant_temperature": "coolant_temperature_K",
                 "coolant_pressure": "coolant_pressure_Pa"}
KEY_OF_FIELD = {field: key for key, field in DESIGN_FIELDS.items()}


def values_by_key(design: dict) -> dict:
    """A reported design ({field with unit: value}, as OptimizationResult.design) by design key (SI), the
    form design_case and the starts take."""
    return {KEY_OF_FIELD[f]: v for f, v in design.items()}

@dataclass(frozen=True)
class FreeVariable:
    name: str
    lower: float
    upper: float
    start: float


@dataclass(frozen=True)
class DesignSpec:
    free: dict = field(default_factory=dict)  # name -> FreeVariable
    fixed: dict = field(default_factory=dict)  # name -> SI value given in [design]
    limits: dict = field(default_factory=dict)  # name -> SI value
    goal: str = "min_cost"
    costs: CostModel = field(default_factory=CostModel)
    standard_tubes: bool = False
    round_tube_count: bool = True
    temperature_profile: tuple | None = None  # (min, max) K of the free profile of the ideal bound

    @property
    def has_freedom(self) -> bool:
        return bool(self.free) or self.standard_tubes


def case_value(case, name):
    section, attr = DESIGN_KEYS[name][1].split(".")
    return getattr(getattr(case, section), attr)


def read_design(case) -> DesignSpec:
    raw, source = case.raw, case.source
    free, fixed = {}, {}
    profile = None
    standard = False
    rounding = True
    if "design" in raw:
        t = Table(raw["design"], source, "design",
                  set(DESIGN_KEYS) | {"standard_tubes", "round_tube_count", "temperature_profile"})
        for key, spec in t.data.items():
            if key == "temperature_profile":
                sub = Table(spec, source, "design.temperature_profile", {"min", "max"})
                profile = (sub.quantity("min", "temperature"), sub.quantity("max", "temperature"))
                sub.finish()
                if not profile[0] < profile[1]:
                    raise CaseError(source, "design.temperature_profile", "min must be below max")
                continue
            if key == "standard_tubes":
                standard = _bool(spec, source, "design.standard_tubes")
                continue
            if key == "round_tube_count":
                rounding = _bool(spec, source, "design.round_tube_count")
                continue
            if key not in DESIGN_KEYS:
                continue  # reported by finish()
            dim = DESIGN_KEYS[key][0]
            if isinstance(spec, dict):
                sub = Table(spec, source, f"design.{key}", {"min", "max", "start"})
                for bound in ("min", "max"):
                    if not sub.has(bound):
                        raise CaseError(source, f"design.{key}.{bound}", "missing: a free design variable needs both "
                                        "min and max")
                lo = _value(sub.raw("min"), dim, source, f"design.{key}.min")
                hi = _value(sub.raw("max"), dim, source, f"design.{key}.max")
                if not lo < hi:
                    raise CaseError(source, f"design.{key}", f"min ({lo:g}) must be below max ({hi:g}) in SI units")
                if lo <= 0 and key != "coolant_temperature":
                    raise CaseError(source, f"design.{key}.min", "must be greater than zero")
                current = case_value(case, key)
                start = _value(sub.raw("start"), dim, source, f"design.{key}.start") if sub.has("start") else current
                if start is None:
                    start = 0.5 * (lo + hi)
                if not lo <= start <= hi:
                    start = min(max(start, lo), hi)
                sub.finish()
                free[key] = FreeVariable(key, lo, hi, float(start))
            else:
                fixed[key] = _value(spec, dim, source, f"design.{key}")
            t.used.add(key)
        t.finish()
    if "coolant_flow" in free and not case.coolant.kind.has_coolant_flow:
        with_flow = ", ".join(f'"{k}"' for k, row in COOLANT_MODES.items() if row.has_coolant_flow)
        raise CaseError(source, "design.coolant_flow", f'coolant mode "{case.coolant.mode}" has no coolant flow; '
                        f"free it only with {with_flow}")
    if "coolant_temperature" in free and not case.coolant.kind.exchanges_heat:
        raise CaseError(source, "design.coolant_temperature", f'coolant mode "{case.coolant.mode}" has no coolant '
                        "temperature")
    boiling = case.coolant.kind.temperature_source == "saturation"
    for key in ("coolant_pressure",):
        if key in set(free) | set(fixed) and not boiling:
            raise CaseError(source, f"design.{key}", f'applies to coolant mode "boiling_water" only (this case: '
                            f'"{case.coolant.mode}")')
    if boiling and "coolant_temperature" in set(free) | set(fixed) and "coolant_pressure" in set(free) | set(fixed):
        raise CaseError(source, "design.coolant_temperature", "boiling water: give the steam pressure "
                        "(design.coolant_pressure) or the coolant temperature, not both")
    if "coolant_pressure" in free and not 611.213 <= free["coolant_pressure"].lower < free["coolant_pressure"].upper \
            <= 22.064e6:
        raise CaseError(source, "design.coolant_pressure", "must lie within 611.213 Pa .. 22.064 MPa (the "
                        "saturation line of water)")
    if standard and "inner_diameter" in free:
        raise CaseError(source, "design.standard_tubes", "give either standard_tubes = true or a free "
                        "inner_diameter, not both")
    limits = dict(case.limits)  # read and checked by the case reader (models.limits)
    goal = "min_cost"
    if "goal" in raw:
        g = Table(raw["goal"], source, "goal", {"objective"})
        goal = g.choice("objective", tuple(GOALS))
        g.finish()
        if GOALS[goal].needs_product and case.product is None:
            raise CaseError(source, "goal.objective", f'"{goal}" needs chemistry.product')
    costs = CostModel()
    if "costs" in raw:
        numbers = {f.name for f in fields(CostModel)} - {"currency"}
        c = Table(raw["costs"], source, "costs", numbers | {"currency"})
        values = {k: c.number(k, low=0.0) for k in list(c.data) if k in numbers}
        if c.has("currency"):
            currency = c.raw("currency")
            if not isinstance(currency, str) or not CURRENCY.fullmatch(currency):
                raise CaseError(source, "costs.currency", f"must be a currency code or sign of 1-8 letters (\"EUR\", "
                                f"\"USD\", \"kEUR\"), got {currency!r}; it only labels the figures (no conversion)")
            values["currency"] = currency
        c.finish()
        costs = CostModel(**values)
    return DesignSpec(free, fixed, limits, goal, costs, standard, rounding, profile)


def _bool(value, source, key):
    if not isinstance(value, bool):
        raise CaseError(source, key, f"must be true or false, got {value!r}")
    return value


def _value(text, dim, source, key):
    if dim == "dimensionless":
        if isinstance(text, bool) or not isinstance(text, (int, float)):
            raise CaseError(source, key, f"must be a number, got {text!r}")
        return float(text)
    return quantity(text, dim, source, key)
