"""Reading [uncertain]: the uncertain quantities of a case, their distributions and groups, as a SALib
problem plus the mapping back to case parameters (models.parameters paths).

    [uncertain.NAME]
    parameter = "chemistry.reactions.partial_oxidation.k_ref"
    distribution = "lognormal"       # uniform | normal | lognormal | triangular | truncated_normal
    relative = true                  # the numbers multiply the case's value (default false: absolute values)
    median = 1.0                     # the arguments of the distribution, see ARGUMENTS
    sigma = 0.15
    group = "kinetics"               # optional: screen a group as one factor
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from tubewright.models.casefile import Table
from tubewright.models.errors import CaseError
from tubewright.models.parameters import base_value, si_unit
from tubewright.models.units import to_si

ARGUMENTS = {
    "uniform": ("min", "max"),
    "normal": ("mean", "std"),
    "lognormal": ("median", "sigma"),  # sigma of ln(x)
    "triangular": ("min", "mode", "max"),
    "truncated_normal": ("mean", "std", "min", "max"),
}


@dataclass(frozen=True)
class Uncertain:
    name: str
    path: str
    distribution: str
    arguments: dict  # SI (or multipliers when relative)
    relative: bool
    group: str | None
    base: float

    def from_unit(self, u):
        """Inverse cumulative distribution: unit-hypercube coordinates ``u`` -> sampled values (multipliers when
        relative). Sampling happens on the unit hypercube (SALib) and is mapped here, so that Morris and
        Sobol share one transformation."""
        from scipy import stats

        a = self.arguments
        if self.distribution == "uniform":
            return a["min"] + u * (a["max"] - a["min"])
        if self.distribution == "normal":
            return stats.norm.ppf(u, loc=a["mean"], scale=a["std"])
        if self.distribution == "lognormal":
            return a["median"] * np.exp(a["sigma"] * stats.norm.ppf(u))
        if self.distribution == "triangular":
            width = a["max"] - a["min"]
            return stats.triang.ppf(u, (a["mode"] - a["min"]) / width, loc=a["min"], scale=width)
        lo, hi = (a["min"] - a["mean"]) / a["std"], (a["max"] - a["mean"]) / a["std"]
        return stats.truncnorm.ppf(u, lo, hi, loc=a["mean"], scale=a["std"])

    def to_case_value(self, x):
        """The parameter value (SI) for sampled values ``x`` (numbers or arrays)."""
        return self.base * x if self.relative else x


def read_uncertain(case) -> list[Uncertain]:
    raw = case.raw.get("uncertain")
    source = case.source
    if not raw:
        raise CaseError(source, "uncertain", "missing: list the uncertain quantities in [uncertain.NAME] tables")
    out = []
    top = Table(raw, source, "uncertain")
    for name, spec in raw.items():
        top.used.add(name)
        t = Table(spec, source, f"uncertain.{name}",
                  {"parameter", "distribution", "relative", "group", *{a for v in ARGUMENTS.values() for a in v}})
        path = t.text("parameter")
        unit = si_unit(case, path, source, t.key("parameter"))
        dist = t.choice("distribution", tuple(ARGUMENTS))
        relative = t.raw("relative", default=False)
        if not isinstance(relative, bool):
            raise CaseError(source, t.key("relative"), f"must be true or false, got {relative!r}")
        args = {}
        for arg in ARGUMENTS[dist]:
            if not t.has(arg):
                needs = ", ".join(ARGUMENTS[dist])
                raise CaseError(source, t.key(arg), f"missing: a {dist} distribution needs {needs}")
            value = t.raw(arg)
            dimensionless = relative or not unit or arg == "sigma"
            if dimensionless:
                if isinstance(value, bool) or not isinstance(value, (int, float)):
                    raise CaseError(source, t.key(arg), f"must be a number{' (a multiplier)' if relative else ''}, "
                                    f"got {value!r}")
                args[arg] = float(value)
            else:
                args[arg] = to_si(value, unit, source, t.key(arg))
        extra = [k for k in t.data if k in {a for v in ARGUMENTS.values() for a in v} and k not in ARGUMENTS[dist]]
        if extra:
            raise CaseError(source, t.key(extra[0]), f'not an argument of a {dist} distribution; allowed: '
                            f'{", ".join(ARGUMENTS[dist])}')
        _check_arguments(dist, args, source, t.key(""))
        group = t.text("group", default="") or None
        t.finish()
        out.append(Uncertain(name, path, dist, args, relative, group, float(base_value(case, path))))
    if len({u.path for u in out}) != len(out):
        raise CaseError(source, "uncertain", "two entries name the same parameter")
    return out


def _check_arguments(dist, a, source, key):
    key = key.rstrip(".")
    if dist in ("uniform", "triangular", "truncated_normal") and not a["min"] < a["max"]:
        raise CaseError(source, key, f"min ({a['min']:g}) must be below max ({a['max']:g})")
    if dist == "triangular" and not a["min"] <= a["mode"] < a["max"]:
        raise CaseError(source, key, "mode must lie in [min, max)")
    if dist in ("normal", "truncated_normal") and not a["std"] > 0:
        raise CaseError(source, key, "std must be greater than zero")
    if dist == "lognormal" and not (a["median"] > 0 and a["sigma"] > 0):
        raise CaseError(source, key, "median and sigma must be greater than zero")


def salib_problem(items: list[Uncertain]) -> dict:
    """The SALib problem on the unit hypercube (see Uncertain.from_unit), with groups when any are given."""
    problem = {"num_vars": len(items), "names": [u.name for u in items], "bounds": [[0.0, 1.0]] * len(items)}
    if any(u.group for u in items):
        problem["groups"] = [u.group or u.name for u in items]
    return problem
