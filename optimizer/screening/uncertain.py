"""Reading [uncertain]: the uncertain quantities of a case, their distributions and groups, as a SALib
problem plus the mapping back to case parameters (models.parameters paths).

    [uncertain.NAME]
    parameter = "chemistry.reactions.partial_oxidation.k_ref"
    distribution = "lognormal"       # uniform | normal | lognormal | triangular | truncated_normal
    relative = true                  # the numbers multiply the case's value (default false: absolute values)
    median = 1.0                     # the arguments of the distribution, see ARGUMENTS
    sigma = 0.15
    group = "kinetics"               # optional: screen a group as one factor

Correlated inputs (a fitted parameter set, written by ``tubewright fit --design``):

    [uncertain.NAME]
    distribution = "multivariate_normal"
    parameters = ["chemistry.reactions.r1.k_ref", "chemistry.reactions.r1.activation_energy"]
    mean = [0.0098, 50800.0]         # SI
    covariance = [[1.5e-8, -0.046], [-0.046, 1.13e6]]
    reference_temperature = "349.5 K"   # optional: the k_ref entries are k at this temperature

Method: sampling in decorrelated coordinates. The set becomes one independent standard-normal factor per
parameter (NAME[1], NAME[2], ...), theta = mean + L z with L the Cholesky factor of the covariance, and the
factors form one group named NAME, so Morris and Sobol rank the correlated set as a whole: individual
indices of dependent inputs are not defined without further choices, the group's are. A k_ref entry given at
a reference temperature is carried to the case's own T_ref through the sampled E_a of the same reaction (an
adsorption constant's through the sampled heat of adsorption of the same term).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from tubewright.models.casefile import Table
from tubewright.models.errors import CaseError
from tubewright.models.parameters import base_value, radial_data_unused, si_unit, temperature_law
from tubewright.models.units import to_si

ARGUMENTS = {
    "uniform": ("min", "max"),
    "normal": ("mean", "std"),
    "lognormal": ("median", "sigma"),  # sigma of ln(x)
    "triangular": ("min", "mode", "max"),
    "truncated_normal": ("mean", "std", "min", "max"),
}


@dataclass(frozen=True)
class CorrelatedSet:
    """A multivariate normal over several case parameters (see the module's docstring)."""

    name: str
    paths: tuple
    mean: np.ndarray
    cholesky: np.ndarray
    reference_temperature: float | None
    rereference: tuple = ()  # (k_ref path, the case's T_ref, its energy's path in the set or the case's value)

    def case_values(self, z: np.ndarray) -> dict:
        """Standard-normal coordinates z (samples x parameters) -> {path: SI values}."""
        from tubewright.models.backend import NUMPY
        from tubewright.models.reactions import arrhenius

        theta = self.mean + np.asarray(z, dtype=float) @ self.cholesky.T
        values = {p: theta[:, k] for k, p in enumerate(self.paths)}
        for path, t_ref, e_act in self.rereference:
            e = values[e_act] if isinstance(e_act, str) else e_act
            values[path] = arrhenius(NUMPY, values[path], e, self.reference_temperature, t_ref)
        return values


@dataclass(frozen=True)
class Uncertain:
    name: str
    path: str
    distribution: str
    arguments: dict  # SI (or multipliers when relative)
    relative: bool
    group: str | None
    base: float
    joint: CorrelatedSet | None = None  # a factor of a correlated set: its values come from the whole set

    @property
    def entry(self) -> str:
        """The key of the [uncertain] table it comes from, for error messages."""
        return f"uncertain.{self.joint.name if self.joint else self.name}"

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
        if isinstance(spec, dict) and spec.get("distribution") == "multivariate_normal":
            out.extend(_correlated(case, name, spec))
            continue
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


def _correlated(case, name, spec) -> list[Uncertain]:
    source = case.source
    t = Table(spec, source, f"uncertain.{name}",
              {"distribution", "parameters", "mean", "covariance", "reference_temperature"})
    t.raw("distribution")
    paths = t.raw("parameters", required=True)
    if not isinstance(paths, list) or not paths or not all(isinstance(p, str) for p in paths):
        raise CaseError(source, t.key("parameters"), "must be a list of parameter paths")
    if len(set(paths)) != len(paths):
        raise CaseError(source, t.key("parameters"), "names a parameter twice")
    for p in paths:
        si_unit(case, p, source, t.key("parameters"))
    n = len(paths)
    mean, cov = t.raw("mean", required=True), t.raw("covariance", required=True)
    try:
        mean = np.array(mean, dtype=float).reshape(n)
        cov = np.array(cov, dtype=float).reshape(n, n)
    except (TypeError, ValueError):
        raise CaseError(source, t.key("covariance"), f"mean must be {n} numbers and covariance {n} x {n} "
                        "numbers (SI)") from None
    if not (np.all(np.isfinite(mean)) and np.all(np.isfinite(cov))):
        raise CaseError(source, t.key("covariance"), "mean and covariance must be finite numbers")
    if not np.allclose(cov, cov.T, rtol=1e-9, atol=0.0):
        raise CaseError(source, t.key("covariance"), "must be symmetric")
    try:  # through the correlation matrix: fitted k (~1e-9) beside E_a (~1e5) spans 30 decades of variance
        std = np.sqrt(np.clip(np.diag(cov), 0.0, None))
        if not np.all(std > 0):
            raise np.linalg.LinAlgError("a zero or negative variance")
        chol = std[:, None] * np.linalg.cholesky(cov / np.outer(std, std))
    except np.linalg.LinAlgError:
        raise CaseError(source, t.key("covariance"), "must be positive definite (a parameter that the data do "
                        "not determine has no finite variance: fix it instead)") from None
    t_ref = t.quantity("reference_temperature", "temperature", required=False, minimum=100.0, maximum=5000.0)
    if t_ref is not None and not any(p.endswith(".k_ref") for p in paths):
        raise CaseError(source, t.key("reference_temperature"), "applies to k_ref entries; the set has none")
    t.finish()
    rereference = []
    if t_ref is not None:
        for p in paths:
            law = temperature_law(case, p)
            if law is not None:
                case_t_ref, e_path, energy = law
                rereference.append((p, case_t_ref, e_path if e_path in paths else energy))
    joint = CorrelatedSet(name, tuple(paths), mean, chol, t_ref, tuple(rereference))
    return [Uncertain(f"{name}[{k + 1}]", p, "normal", {"mean": 0.0, "std": 1.0}, False, name,
                      float(base_value(case, p)), joint) for k, p in enumerate(paths)]


def refuse_unused_radial_data(case, items: list[Uncertain], two_dimensional: bool) -> None:
    """CaseError for an uncertain [radial] value that the run's model would not read (its index would be a
    zero that says nothing): the 1-D model reads [radial] only with heat_transfer.inside = "radial_lumped"."""
    path = radial_data_unused(case, [u.path for u in items], two_dimensional)
    if path is not None:
        u = next(u for u in items if u.path == path)
        raise CaseError(case.source, u.entry,
                        f'"{path}" acts only on the two-dimensional model (screen --radial) or with '
                        'heat_transfer.inside = "radial_lumped"; this run uses neither')


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
