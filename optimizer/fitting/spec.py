"""Reading ``[fit]`` of a case: which kinetic parameters are free, the error model of the measurements and
the reference temperature of the Arrhenius laws.

    [fit]
    error_model = "stated"            # or "estimated": the errors below are then relative weights, and a
                                      # common variance factor is estimated from the residuals
    reference_temperature = "600 K"   # optional; default 1/mean(1/T_feed) over the runs
    starts = 4                        # optional multi-start: also from 3 random points within the bounds
    seed = 0                          #   (k log-uniform, E_a uniform), the best optimum kept
    [fit.parameters.REACTION]
    k_ref = { within = 100 }          # free within start/100 .. start*100 (start: the case's value)
    activation_energy = { min = "40 kJ/mol", max = "200 kJ/mol" }   # or true: 0.2x .. 5x the start
    orders = { A = { min = 0.5, max = 2 } }                          # or A = true: start -+ 1 (>= 0)
    adsorption = { A = { k_ref = { within = 100 }, heat = { min = "-150 kJ/mol", max = "0 kJ/mol" } } }
                                      # a term of the reaction's LHHW denominator; A = true frees both
                                      # (k_ref within 100x, heat start -+ 100 kJ/mol)
    [fit.errors]                      # one per measured quantity of the data
    conversion = 0.01                 # absolute (dimensionless), or
    outlet_temperature = "1.5 K"      # absolute with a unit (a temperature difference), or
    outlet_flow = "3 %"               # relative to the measured value
    rate = "5 %"                      # formation rates of differential runs (or absolute, "2e-6 mol/kg/s")
    axial_temperature = "1 K"         # thermocouples along the tube (absolute, a temperature difference)
    [fit.thermocouples]               # positions from the tube inlet of measured.axial_temperature.NAME
    TC1 = "0.4 m"

Fitted are k at the reference temperature (not k_ref at the case's own T_ref) and E_a: about the runs' own
mean reciprocal temperature the two are nearly uncorrelated (optimizer.fitting.statistics). Adsorption
constants likewise: K at the reference temperature, with the heat of adsorption as their energy."""

from __future__ import annotations

from dataclasses import dataclass

from tubewright.models.casefile import Table
from tubewright.models.errors import CaseError, suggest
from tubewright.models.units import quantity
from tubewright.optimizer.fitting.data import MEASURED

KINDS = ("k_ref", "activation_energy", "orders", "adsorption")
DEFAULT_WITHIN = 100.0
DEFAULT_HEAT_SPAN = 1.0e5  # J/mol either side of the start of a free heat of adsorption
ERROR_DIMENSIONS = {"outlet_temperature": "temperature_difference", "outlet_flow": "molar_flow",
                    "axial_temperature": "temperature_difference"}


@dataclass(frozen=True)
class FitParameter:
    reaction: str
    index: int  # of the reaction in the case
    kind: str  # "k_ref" (k at the reference temperature), "activation_energy", "orders.SPECIES",
    #            "adsorption.SPECIES.k_ref" (K at the reference temperature) or "adsorption.SPECIES.heat"
    lower: float
    upper: float

    @property
    def is_constant(self) -> bool:
        """A rate or adsorption constant: fitted on a log scale, as a factor range of its start."""
        return self.kind.endswith("k_ref")

    @property
    def name(self) -> str:
        return f"{self.reaction}.{self.kind}"


@dataclass(frozen=True)
class FitSpec:
    parameters: tuple
    errors: dict  # measured kind -> ("absolute", SI sigma) or ("relative", fraction)
    error_model: str
    reference_temperature: float | None  # None: from the runs
    starts: int = 1
    seed: int = 0
    thermocouples: dict = None  # name -> position from the tube inlet [m]


def read_fit(case) -> FitSpec:
    source = case.source
    if "fit" not in case.raw:
        raise CaseError(source, "fit", "missing: the case needs a [fit] section naming the free parameters")
    t = Table(case.raw["fit"], source, "fit",
              {"error_model", "reference_temperature", "parameters", "errors", "starts", "seed", "thermocouples"})
    error_model = t.choice("error_model", ("stated", "estimated"), default="stated")
    t_ref = t.quantity("reference_temperature", "temperature", required=False, minimum=100.0, maximum=5000.0)
    names = [rx.name for rx in case.reactions]
    params = []
    ptab = t.sub("parameters")
    for rname, entry in ptab.data.items():
        if rname not in names:
            raise CaseError(source, ptab.key(rname), f'no reaction "{rname}"{suggest(rname, names)}; reactions: '
                            f"{', '.join(names)}")
        rt = Table(entry, source, ptab.key(rname), set(KINDS))
        j = names.index(rname)
        rx = case.reactions[j]
        for kind in KINDS:
            if not rt.has(kind):
                continue
            if kind == "orders":
                params.extend(_orders(rt, rname, j, rx))
            elif kind == "adsorption":
                params.extend(_adsorption(rt, rname, j, rx))
            else:
                params.append(_parameter(rt, kind, rname, j, rx))
        rt.finish()
    if not params:
        raise CaseError(source, "fit.parameters", "names no free parameter (k_ref, activation_energy, orders or "
                        "adsorption of a reaction)")
    errors = {}
    et = t.sub("errors")
    for kind, value in et.data.items():
        if kind not in MEASURED:
            raise CaseError(source, et.key(kind), f"unknown measured quantity{suggest(kind, MEASURED)}; allowed: "
                            f"{', '.join(MEASURED)}")
        errors[kind] = _error(value, kind, source, et.key(kind))
    starts = t.number("starts", default=1, low=1, high=100, integer=True)
    seed = t.number("seed", default=0, low=0, high=2**31 - 1, integer=True)
    thermocouples = {}
    tt = t.sub("thermocouples", required=False)
    if tt is not None:
        for name in tt.data:
            thermocouples[name] = tt.quantity(name, "length", maximum=1e4)
    t.finish()
    return FitSpec(tuple(params), errors, error_model, t_ref, starts, seed, thermocouples)


def _parameter(rt: Table, kind: str, rname: str, j: int, rx) -> FitParameter:
    spec = rt.raw(kind)
    key = rt.key(kind)
    if spec is True:
        spec = {}
    if not isinstance(spec, dict):
        raise CaseError(rt.source, key, "must be true or a table ({ within = 100 } for k_ref, { min = ..., "
                        "max = ... } for activation_energy)")
    if kind == "k_ref":
        within = _within(rt, kind)
        return FitParameter(rname, j, kind, 1.0 / within, within)  # factors of the start value
    sub = Table(spec, rt.source, key, {"min", "max"})
    start = rx.activation_energy
    lo = sub.quantity("min", "molar_energy", default=0.2 * start, positive=False, minimum=0.0)
    hi = sub.quantity("max", "molar_energy", default=5.0 * start)
    sub.finish()
    if not lo < hi:
        raise CaseError(rt.source, key, f"min ({lo:g} J/mol) must be below max ({hi:g} J/mol)")
    return FitParameter(rname, j, kind, lo, hi)


def _adsorption(rt: Table, rname: str, j: int, rx) -> list[FitParameter]:
    at = rt.sub("adsorption")
    out = []
    for species, spec in at.data.items():
        key = at.key(species)
        term = rx.adsorption_term(species)
        if term is None:
            raise CaseError(rt.source, key, f"the reaction has no adsorption term for {species}; its terms: "
                            f"{', '.join(a.species for a in rx.adsorption) or 'none'} (give it one in the case's "
                            "adsorption list to free it)")
        if spec is True:
            spec = {"k_ref": True, "heat": True}
        if not isinstance(spec, dict):
            raise CaseError(rt.source, key, "must be true or a table { k_ref = { within = 100 }, heat = { min = "
                            '"-150 kJ/mol", max = "0 kJ/mol" } }')
        sub = Table(spec, rt.source, key, {"k_ref", "heat"})
        if sub.has("k_ref"):
            within = _within(sub, "k_ref")
            out.append(FitParameter(rname, j, f"adsorption.{species}.k_ref", 1.0 / within, within))
        if sub.has("heat"):
            heat = sub.raw("heat")
            heat = {} if heat is True else heat
            if not isinstance(heat, dict):
                raise CaseError(rt.source, sub.key("heat"), 'must be true or a table { min = ..., max = ... }')
            ht = Table(heat, rt.source, sub.key("heat"), {"min", "max"})
            start = term.heat
            lo = ht.quantity("min", "molar_energy", default=start - DEFAULT_HEAT_SPAN, positive=False,
                             minimum=-1e8, maximum=1e8)
            hi = ht.quantity("max", "molar_energy", default=start + DEFAULT_HEAT_SPAN, positive=False,
                             minimum=-1e8, maximum=1e8)
            ht.finish()
            if not lo < hi:
                raise CaseError(rt.source, sub.key("heat"), f"min ({lo:g} J/mol) must be below max ({hi:g} J/mol)")
            out.append(FitParameter(rname, j, f"adsorption.{species}.heat", lo, hi))
        if not sub.data:
            raise CaseError(rt.source, key, "frees nothing: give k_ref, heat or both")
        sub.finish()
    return out


def _within(t: Table, key: str) -> float:
    """The factor range { within = F } of a constant fitted on a log scale (true: the default)."""
    spec = t.raw(key)
    spec = {} if spec is True else spec
    if not isinstance(spec, dict):
        raise CaseError(t.source, t.key(key), "must be true or a table { within = 100 }")
    sub = Table(spec, t.source, t.key(key), {"within"})
    within = sub.number("within", default=DEFAULT_WITHIN, low=1.0 + 1e-9, high=1e12)
    sub.finish()
    return within


def _orders(rt: Table, rname: str, j: int, rx) -> list[FitParameter]:
    ot = rt.sub("orders")
    out = []
    for species, spec in ot.data.items():
        key = ot.key(species)
        if species not in rx.orders:
            raise CaseError(rt.source, key, f"the reaction has no order for {species}; orders: "
                            f"{', '.join(rx.orders) or 'none'} (give it one in the case, e.g. 1, to free it)")
        start = rx.orders[species]
        if spec is True:
            spec = {}
        if not isinstance(spec, dict):
            raise CaseError(rt.source, key, "must be true or a table { min = ..., max = ... }")
        sub = Table(spec, rt.source, key, {"min", "max"})
        lo = sub.number("min", default=max(0.0, start - 1.0), low=0.0, high=10.0)
        hi = sub.number("max", default=start + 1.0, low=0.0, high=10.0)
        sub.finish()
        if not lo < hi:
            raise CaseError(rt.source, key, f"min ({lo:g}) must be below max ({hi:g})")
        out.append(FitParameter(rname, j, f"orders.{species}", lo, hi))
    return out


def _error(value, kind: str, source: str, key: str):
    if isinstance(value, str) and value.strip().endswith("%"):
        try:
            fraction = float(value.strip()[:-1]) / 100.0
        except ValueError:
            raise CaseError(source, key, f'"{value}" is not a percentage such as "2 %"') from None
        if not 0.0 < fraction < 1.0:
            raise CaseError(source, key, f"a relative error must be between 0 and 100 %, got {value!r}")
        return ("relative", fraction)
    if kind == "rate":
        from tubewright.models.units import to_si
        from tubewright.optimizer.fitting.data import RATE_UNITS

        for unit in RATE_UNITS.values():
            try:
                sigma = to_si(value, unit, source, key)
            except CaseError:
                continue
            if sigma > 0:
                return ("absolute", sigma)
        raise CaseError(source, key, f"a rate error is a percentage or a positive rate in "
                        f"{' or '.join(RATE_UNITS.values())}, got {value!r}")
    dim = ERROR_DIMENSIONS.get(kind)
    if dim is None:
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not 0.0 < float(value) < 1.0:
            raise CaseError(source, key, f"a dimensionless absolute error between 0 and 1, or a percentage, got "
                            f"{value!r}")
        return ("absolute", float(value))
    sigma = quantity(value, dim, source, key)
    if not sigma > 0:
        raise CaseError(source, key, f"must be greater than zero, got {value!r}")
    return ("absolute", sigma)
