"""Reading case files: TOML with units as strings, includes, overrides, and checks that name the file and key.

The keys are documented in docs/case-reference.md; this module is the one place that enforces them."""

from __future__ import annotations

import copy
import math
import sys
from pathlib import Path

from . import case as C
from .correlations import water_saturation_temperature
from .elements import molar_mass as formula_mass
from .elements import parse_formula
from .errors import CaseError, suggest
from .limits import LIMITS, PAIRS
from .reactions import Adsorption, Reaction, adsorption_units, parse_equation, rate_units
from .thermo import ConstantCp, Nasa7, Shomate, Species, cp_problem
from .units import DIMENSIONS, LARGEST, quantity, to_si, to_si_one_of

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

SECTIONS = ("title", "note", "include", "chemistry", "feed", "tube", "bed", "coolant", "heat_transfer",
            "limits", "numerics", "design", "goal", "costs", "uncertain", "fit", "robust", "radial")


MAX_FILE_BYTES = 1_000_000  # a case or study file is text of a few kB
MAX_INCLUDE_DEPTH = 16


def read_toml(path: Path) -> dict:
    """A TOML file as a dict: a regular file of at most MAX_FILE_BYTES, UTF-8 text without NUL bytes."""
    path = Path(path)
    try:
        if not path.is_file():
            raise CaseError(path, "", "not a regular file" if path.exists() else "file not found")
        if path.stat().st_size > MAX_FILE_BYTES:
            raise CaseError(path, "", f"larger than {MAX_FILE_BYTES} bytes: not a case file")
        raw = path.read_bytes()
    except OSError as err:
        raise CaseError(path, "", f"cannot be read ({err.strerror or err})") from err
    if b"\x00" in raw:
        raise CaseError(path, "", "contains a NUL byte: not a text file")
    try:
        return tomllib.loads(raw.decode("utf-8"))
    except UnicodeDecodeError as err:
        raise CaseError(path, "", f"not UTF-8 text ({err.reason} at byte {err.start})") from err
    except tomllib.TOMLDecodeError as err:
        raise CaseError(path, "", f"not valid TOML: {err}") from err
    except RecursionError as err:
        raise CaseError(path, "", "nested too deeply to be a case file") from err


def deep_merge(base: dict, top: dict) -> dict:
    out = copy.deepcopy(base)
    for key, value in top.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = deep_merge(out[key], value)
        else:
            out[key] = copy.deepcopy(value)
    return out


def resolve_includes(path: Path, seen: tuple = ()) -> dict:
    """The TOML tables of ``path`` merged on top of the file it includes (``include = "base.toml"``,
    relative to the including file), recursively."""
    path = Path(path).resolve()
    if path in seen:
        raise CaseError(path, "include", "includes itself (a cycle of includes)")
    if len(seen) >= MAX_INCLUDE_DEPTH:
        raise CaseError(path, "include", f"includes nested deeper than {MAX_INCLUDE_DEPTH} files")
    data = read_toml(path)
    inc = data.pop("include", None)
    if inc is None:
        return data
    if not isinstance(inc, str) or not inc.strip():
        raise CaseError(path, "include", "must be the name of a TOML file")
    base_path = (path.parent / inc).resolve()
    if not base_path.is_file():
        why = "is not a regular file" if base_path.exists() else "not found"
        raise CaseError(path, "include", f'included file "{inc}" {why} (looked at {base_path})')
    try:
        return deep_merge(resolve_includes(base_path, seen + (path,)), data)
    except RecursionError as err:
        raise CaseError(path, "", "tables nested too deeply to be a case file") from err


def apply_overrides(data: dict, overrides: dict, source: str) -> dict:
    """Overrides as {"tube.length": "7 m", ...}; the key must exist in the merged case."""
    out = copy.deepcopy(data)
    for dotted, value in (overrides or {}).items():
        parts = dotted.split(".")
        node = out
        for depth, part in enumerate(parts):
            if not isinstance(node, dict):
                raise CaseError(source, dotted, f'"{".".join(parts[:depth])}" is not a table')
            last = depth == len(parts) - 1
            if part not in node and not last and depth == 0 and part in SECTIONS:
                node[part] = {}
            if part not in node and not last:
                raise CaseError(source, dotted, f'no table "{part}"{suggest(part, node)}')
            if last:
                node[part] = value
            else:
                node = node[part]
    return out


class Table:
    """One TOML table being read: typed getters that raise CaseError, and a final check for unknown keys."""

    def __init__(self, data, source: str, name: str, allowed=None):
        if not isinstance(data, dict):
            raise CaseError(source, name, "must be a table")
        self.data, self.source, self.name = data, source, name
        self.allowed = set(allowed) if allowed is not None else None
        self.used: set[str] = set()

    def key(self, key: str) -> str:
        return f"{self.name}.{key}" if self.name else key

    def has(self, key: str) -> bool:
        return key in self.data

    def raw(self, key: str, default=None, required=False):
        self.used.add(key)
        if key not in self.data:
            if required:
                pool = self.allowed or self.data.keys()
                near = [k for k in self.data if k not in pool]
                hint = f'; found "{near[0]}" (misspelled?)' if near and suggest(near[0], [key]) else ""
                raise CaseError(self.source, self.key(key), f"missing (required){hint}")
            return default
        return self.data[key]

    def quantity(self, key, dimension, default=None, required=True, positive=True, minimum=None, maximum=None):
        """A quantity in SI; ``minimum`` and ``maximum`` are SI bounds (physically meaningful ranges)."""
        value = self.raw(key, required=required and default is None)
        if value is None:
            return default
        si = quantity(value, dimension, self.source, self.key(key))
        unit = DIMENSIONS[dimension]
        if positive and not si > 0:
            raise CaseError(self.source, self.key(key), f"must be greater than zero, got {value!r}")
        if minimum is not None and si < minimum:
            raise CaseError(self.source, self.key(key), f"must be at least {minimum:g} {unit}, got {value!r}")
        if maximum is not None and si > maximum:
            raise CaseError(self.source, self.key(key), f"must be at most {maximum:g} {unit}, got {value!r}")
        return si

    def number(self, key, default=None, required=True, low=None, high=None, integer=False):
        value = self.raw(key, required=required and default is None)
        if value is None:
            return default
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise CaseError(self.source, self.key(key), f"must be a number, got {value!r}")
        if not math.isfinite(value) or abs(value) > LARGEST:
            raise CaseError(self.source, self.key(key), f"must be a finite number, got {value!r}")
        if integer and (not float(value).is_integer()):
            raise CaseError(self.source, self.key(key), f"must be a whole number, got {value!r}")
        if (low is not None and value < low) or (high is not None and value > high):
            allowed = (f"between {low} and {high}" if low is not None and high is not None
                       else f"at least {low}" if low is not None else f"at most {high}")
            raise CaseError(self.source, self.key(key), f"must be {allowed}, got {value!r}")
        return int(value) if integer else float(value)

    def choice(self, key, options, default=None):
        value = self.raw(key, required=default is None)
        if value is None:
            return default
        if value not in options:
            allowed = ", ".join(f'"{o}"' for o in options)
            raise CaseError(self.source, self.key(key), f'"{value}" is not allowed{suggest(str(value), options)}; '
                            f"allowed: {allowed}")
        return value

    def text(self, key, default=None):
        value = self.raw(key, required=default is None)
        if value is not None and not isinstance(value, str):
            raise CaseError(self.source, self.key(key), f"must be a string, got {value!r}")
        return value

    def sub(self, key, allowed=None, required=True):
        value = self.raw(key, required=required)
        if value is None:
            return None
        return Table(value, self.source, self.key(key), allowed)

    def finish(self):
        pool = self.allowed if self.allowed is not None else self.used
        for key in self.data:
            if key not in pool:
                raise CaseError(self.source, self.key(key), f"unknown key{suggest(key, pool)}; allowed: "
                                f"{', '.join(sorted(pool))}")


def load_case(path, overrides: dict | None = None) -> C.Case:
    """Read, merge, override and validate a case file. Raises CaseError for any bad input."""
    return case_loader(path)(overrides)


def case_loader(path):
    """``load_case`` of one file for many sets of overrides (the runs of a kinetics fit): the file and its
    includes are read once; each call overrides a copy and validates it."""
    path = Path(path)
    source = str(path)
    merged = resolve_includes(path)

    def load(overrides: dict | None = None) -> C.Case:
        return build_case(apply_overrides(merged, overrides or {}, source), source)

    return load


def build_case(data: dict, source: str) -> C.Case:
    top = Table(data, source, "", SECTIONS)
    top.finish()
    title = top.text("title", default=Path(source).stem)
    chem = top.sub("chemistry", {"phase", "key_reactant", "product", "species", "reactions"})
    phase = chem.choice("phase", ("gas", "liquid"))
    species = _species(chem.sub("species"), source)
    names = [s.name for s in species]
    reactions = _reactions(chem.sub("reactions"), species, phase, "bed" in data, source)
    key = chem.text("key_reactant")
    if key not in names:
        raise CaseError(source, "chemistry.key_reactant", f'"{key}" is not a species{suggest(key, names)}')
    product = chem.text("product", default="")
    if product and product not in names:
        raise CaseError(source, "chemistry.product", f'"{product}" is not a species{suggest(product, names)}')
    chem.finish()

    num_t = top.sub("numerics", {"rtol", "atol", "method", "temperature_ceiling", "min_pressure",
                                 "finite_elements", "collocation_points", "verify_tolerance", *MUMPS_CHOICES,
                                 "mumps_mem_percent"}, required=False)
    numerics = C.Numerics()
    if num_t is not None:
        numerics = C.Numerics(
            rtol=num_t.number("rtol", default=numerics.rtol, low=1e-13, high=1e-2),
            atol=num_t.number("atol", default=numerics.atol, low=1e-16, high=1.0),
            method=num_t.choice("method", ("Radau", "BDF", "LSODA"), default=numerics.method),
            temperature_ceiling=num_t.quantity("temperature_ceiling", "temperature",
                                               default=numerics.temperature_ceiling, minimum=300.0, maximum=6000.0),
            min_pressure=num_t.quantity("min_pressure", "pressure", default=numerics.min_pressure, minimum=1.0,
                                        maximum=1e8),
            finite_elements=num_t.number("finite_elements", default=numerics.finite_elements, low=2, high=2000,
                                         integer=True),
            collocation_points=num_t.number("collocation_points", default=numerics.collocation_points, low=1,
                                            high=8, integer=True),
            verify_tolerance=num_t.number("verify_tolerance", default=numerics.verify_tolerance, low=1e-12,
                                          high=1.0),
            **{key: _mumps_choice(num_t, key, getattr(numerics, key)) for key in MUMPS_CHOICES},
            mumps_mem_percent=num_t.number("mumps_mem_percent", default=numerics.mumps_mem_percent, low=0,
                                           high=100_000, integer=True),
        )
        num_t.finish()
    feed = _feed(top.sub("feed"), species, phase, numerics, source)
    _check_key_and_product(reactions, feed, names, key, product, source)
    tube_t = top.sub("tube", {"inner_diameter", "length", "count", "wall_thickness", "wall_conductivity",
                              "roughness"})
    tube = C.Tube(
        inner_diameter=tube_t.quantity("inner_diameter", "length", minimum=1e-4, maximum=10.0),
        length=tube_t.quantity("length", "length", minimum=1e-3, maximum=1e4),
        count=tube_t.number("count", default=1, low=1, high=1e7, integer=True),
        wall_thickness=tube_t.quantity("wall_thickness", "length", default=2.0e-3, maximum=0.1),
        wall_conductivity=tube_t.quantity("wall_conductivity", "thermal_conductivity", default=16.0, maximum=1e4),
        roughness=tube_t.quantity("roughness", "length", default=4.5e-5, positive=False, minimum=0.0,
                                  maximum=0.01),
    )
    tube_t.finish()
    bed = None
    if top.has("bed"):
        bed_t = top.sub("bed", {"particle_diameter", "voidage", "density"})
        bed = C.Bed(bed_t.quantity("particle_diameter", "length", minimum=1e-6, maximum=0.5),
                    bed_t.number("voidage", low=0.2, high=0.95),
                    bed_t.quantity("density", "density", maximum=1e4))
        bed_t.finish()
        if bed.particle_diameter >= tube.inner_diameter:
            raise CaseError(source, "bed.particle_diameter", "must be smaller than tube.inner_diameter")
    coolant = _coolant(top.sub("coolant"), feed, source)
    radial = _radial(top.sub("radial", required=False), bed, feed, source)
    heat = _heat_transfer(top.sub("heat_transfer", required=False), coolant, bed, feed, radial, source)
    limits = _limits(top.sub("limits", required=False), species, product, coolant, bed, source)
    return C.Case(source=source, title=title, phase=phase, species=tuple(species), reactions=tuple(reactions),
                  key_reactant=key, product=product or None, feed=feed, tube=tube, bed=bed, coolant=coolant,
                  heat_transfer=heat, numerics=numerics, limits=limits,
                  raw=copy.deepcopy(data), radial=radial)


def _cp_model(value, source, key):
    if isinstance(value, str):
        cp = quantity(value, "molar_heat_capacity", source, key)
        if not 0.0 < cp <= 1e4:
            raise CaseError(source, key, f"a heat capacity must be above 0 and at most 10^4 J/mol/K, got {value!r}")
        return ConstantCp(cp)
    t = Table(value, source, key, {"constant", "nasa7", "shomate", "t_min", "t_max"})
    kinds = [k for k in ("constant", "nasa7", "shomate") if t.has(k)]
    if len(kinds) != 1:
        raise CaseError(source, key, 'give exactly one of "constant", "nasa7", "shomate" (or a string such '
                        'as "30 J/mol/K")')
    kind = kinds[0]
    if kind == "constant":
        model = ConstantCp(t.quantity("constant", "molar_heat_capacity", maximum=1e4),
                           t.quantity("t_min", "temperature", default=200.0, maximum=2e4),
                           t.quantity("t_max", "temperature", default=3000.0, maximum=2e4))
    elif kind == "nasa7":
        n = t.sub("nasa7", {"low", "high", "t_mid", "t_min", "t_max"})
        low, high = (_coefficients(n.raw(k, required=True), 7, source, n.key(k)) for k in ("low", "high"))
        model = Nasa7(low, high, n.quantity("t_mid", "temperature", default=1000.0),
                      n.quantity("t_min", "temperature", default=300.0),
                      n.quantity("t_max", "temperature", default=5000.0))
        n.finish()
    else:
        rows = t.raw("shomate")
        if not isinstance(rows, list) or not rows:
            raise CaseError(source, f"{key}.shomate", "must be a list of {t_min, t_max, coefficients} tables")
        ranges = []
        for i, row in enumerate(rows):
            r = Table(row, source, f"{key}.shomate[{i}]", {"t_min", "t_max", "coefficients"})
            ranges.append((r.quantity("t_min", "temperature"), r.quantity("t_max", "temperature"),
                           _coefficients(r.raw("coefficients", required=True), 8, source, r.key("coefficients"))))
        for (_, hi1, _), (lo2, _, _) in zip(ranges, ranges[1:]):
            if abs(hi1 - lo2) > 1e-6:
                raise CaseError(source, f"{key}.shomate", "ranges must be ascending and touch")
        model = Shomate(tuple(ranges))
    t.finish()
    problem = cp_problem(model)
    if problem:
        raise CaseError(source, key, f"non-physical heat capacity: {problem}")
    return model


def _coefficients(value, count, source, key):
    if (not isinstance(value, list) or len(value) != count
            or not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value)):
        raise CaseError(source, key, f"must be a list of {count} numbers")
    if not all(math.isfinite(v) and abs(v) <= 1e30 for v in value):
        raise CaseError(source, key, f"must be finite numbers (at most 1e30 in size), got {value!r}")
    return tuple(float(v) for v in value)


def _species(table: Table, source):
    out = []
    for name, spec in table.data.items():
        table.used.add(name)
        t = Table(spec, source, f"chemistry.species.{name}",
                  {"formula", "molar_mass", "heat_of_formation", "entropy", "cp"})
        elements = {}
        formula = t.text("formula", default="")
        if formula:
            try:
                elements = parse_formula(formula)
            except ValueError as err:
                raise CaseError(source, t.key("formula"), str(err)) from err
        if t.has("molar_mass"):
            mm = t.quantity("molar_mass", "molar_mass", maximum=10.0)
        elif elements:
            mm = formula_mass(elements)
        else:
            raise CaseError(source, t.key("molar_mass"), "missing: give molar_mass or formula")
        hf = t.quantity("heat_of_formation", "molar_energy", default=0.0, positive=False, minimum=-1e8, maximum=1e8)
        s0 = t.quantity("entropy", "molar_entropy", default=None, required=False, maximum=1e5)
        cp_value = t.raw("cp", required=True)
        cp = _cp_model(cp_value, source, t.key("cp"))
        t.finish()
        out.append(Species(name, mm, hf, cp, elements, s0))
    if not out:
        raise CaseError(source, "chemistry.species", "no species given")
    return out


def _reactions(table: Table, species, phase, has_bed, source):
    names = [s.name for s in species]
    smap = {s.name: s for s in species}
    out = []
    for rname, spec in table.data.items():
        table.used.add(rname)
        t = Table(spec, source, f"chemistry.reactions.{rname}",
                  {"equation", "k_ref", "activation_energy", "t_ref", "orders", "driving", "basis",
                   "heat_of_reaction", "equilibrium_constant", "adsorption", "inhibition_exponent"})
        eq = t.text("equation")
        try:
            nu, reversible = parse_equation(eq)
        except ValueError as err:
            raise CaseError(source, t.key("equation"), str(err)) from err
        for s in nu:
            if s not in smap:
                raise CaseError(source, t.key("equation"), f'unknown species "{s}"{suggest(s, names)}; '
                                f"species are: {', '.join(names)}")
        if all(smap[s].elements for s in nu):
            for el in sorted({e for s in nu for e in smap[s].elements}):
                balance = sum(n * smap[s].elements.get(el, 0) for s, n in nu.items())
                if abs(balance) > 1e-9:
                    raise CaseError(source, t.key("equation"),
                                    f'"{eq}" does not balance: element {el} changes by {balance:+g} per reaction')
        mass_change = sum(n * smap[s].molar_mass for s, n in nu.items())
        scale = sum(abs(n) * smap[s].molar_mass for s, n in nu.items())
        if abs(mass_change) > 1e-6 * scale:
            raise CaseError(source, t.key("equation"), f'"{eq}" does not conserve mass: the molar masses give '
                            f"{mass_change * 1e3:+.6g} g per mole of reaction")
        driving = t.choice("driving", ("concentration", "partial_pressure"), default="concentration")
        if phase == "liquid" and driving == "partial_pressure":
            raise CaseError(source, t.key("driving"), 'a liquid-phase case allows only "concentration"')
        basis = t.choice("basis", ("volume", "catalyst_mass"), default="volume")
        if basis == "catalyst_mass" and not has_bed:
            raise CaseError(source, t.key("basis"), '"catalyst_mass" needs a [bed] section')
        orders_raw = t.raw("orders", required=True)
        if not isinstance(orders_raw, dict):
            raise CaseError(source, t.key("orders"), "must be a table such as { A = 1, B = 0.5 }")
        orders = {}
        for s, o in orders_raw.items():
            if s not in smap:
                raise CaseError(source, f"{t.key('orders')}.{s}", f'order for a species that is not in '
                                f"[chemistry.species]{suggest(s, names)}")
            if isinstance(o, bool) or not isinstance(o, (int, float)) or not 0 <= o <= 10:
                raise CaseError(source, f"{t.key('orders')}.{s}", f"must be a number from 0 to 10, got {o!r}")
            orders[s] = float(o)
        if reversible:
            for s in set(orders) | set(nu):
                if orders.get(s, 0.0) + nu.get(s, 0.0) < -1e-12:
                    raise CaseError(source, f"{t.key('orders')}.{s}",
                                    f"reverse order = order + stoichiometric coefficient = "
                                    f"{orders.get(s, 0.0) + nu.get(s, 0.0):g} < 0; raise the forward order of {s}")
        total_order = sum(orders.values())
        k_ref = to_si(t.raw("k_ref", required=True), rate_units(basis, driving, total_order), source, t.key("k_ref"))
        if not k_ref > 0:
            raise CaseError(source, t.key("k_ref"), "must be greater than zero")
        ea = t.quantity("activation_energy", "molar_energy", positive=False, minimum=0.0, maximum=2e6)
        t_ref = t.quantity("t_ref", "temperature", minimum=100.0, maximum=5000.0)
        dh = t.quantity("heat_of_reaction", "molar_energy", default=None, required=False, positive=False,
                        minimum=-1e8, maximum=1e8)
        k_eq = None
        if t.has("equilibrium_constant"):
            if not reversible:
                raise CaseError(source, t.key("equilibrium_constant"), 'only for reversible reactions ("<=>")')
            dn = sum(nu.values())
            unit = ("mol/m^3" if driving == "concentration" else "Pa")
            k_eq = to_si(t.raw("equilibrium_constant"), f"({unit})**{dn!r}" if dn else "", source,
                         t.key("equilibrium_constant"))
        elif reversible:
            missing = [s for s in nu if smap[s].entropy is None]
            if missing or phase == "liquid":
                why = (f"species without entropy: {', '.join(missing)}" if missing
                       else "thermochemical K is for the gas phase")
                raise CaseError(source, t.key("equilibrium_constant"),
                                f"missing: a reversible reaction needs equilibrium_constant ({why})")
        ads = []
        for i, row in enumerate(t.raw("adsorption", default=[]) or []):
            a = Table(row, source, f"{t.key('adsorption')}[{i}]", {"species", "k_ref", "heat", "exponent"})
            s = a.text("species")
            if s not in smap:
                raise CaseError(source, a.key("species"), f'unknown species "{s}"{suggest(s, names)}')
            n = a.number("exponent", default=1.0, low=0.0, high=10.0)
            ads.append(Adsorption(s, to_si(a.raw("k_ref", required=True), adsorption_units(driving, n), source,
                                           a.key("k_ref")),
                                  a.quantity("heat", "molar_energy", default=0.0, positive=False, minimum=-1e8,
                                             maximum=1e8), n))
            a.finish()
        inhibition = t.number("inhibition_exponent", default=1.0, low=0.0, high=10.0)
        t.finish()
        out.append(Reaction(rname, eq, nu, reversible, k_ref, ea, t_ref, orders, driving, basis, tuple(ads),
                            inhibition, k_eq, dh))
    if not out:
        raise CaseError(source, "chemistry.reactions", "no reactions given")
    return out


def _feed(t: Table, species, phase, numerics, source):
    t.allowed = {"molar_flow", "mass_flow", "composition", "molar_flows", "temperature", "pressure",
                 "viscosity", "thermal_conductivity", "density", "diffusivity"}
    names = [s.name for s in species]
    flows = [0.0] * len(species)
    for one, other in (("composition", "molar_flows"), ("molar_flow", "mass_flow"), ("molar_flows", "molar_flow"),
                       ("molar_flows", "mass_flow")):
        if t.has(one) and t.has(other):
            raise CaseError(source, t.key(other), f"give {one} or {other}, not both")
    if t.has("molar_flows"):
        table = t.sub("molar_flows", set(names))
        for name in table.data:
            if name not in names:
                raise CaseError(source, table.key(name), f"not a species{suggest(name, names)}")
            flows[names.index(name)] = table.quantity(name, "molar_flow", positive=False, minimum=0.0, maximum=1e6)
    else:
        comp = t.sub("composition")
        fractions = [0.0] * len(species)
        for name, y in comp.data.items():
            if name not in names:
                raise CaseError(source, comp.key(name), f"not a species{suggest(name, names)}")
            if isinstance(y, bool) or not isinstance(y, (int, float)) or not 0 <= y <= 1:
                raise CaseError(source, comp.key(name), f"mole fraction must be a number from 0 to 1, got {y!r}")
            fractions[names.index(name)] = float(y)
        total = sum(fractions)
        if abs(total - 1.0) > 1e-3:
            raise CaseError(source, comp.key(""), f"mole fractions sum to {total:.6g}; allowed: 1 within 0.001")
        fractions = [y / total for y in fractions]
        if t.has("molar_flow"):
            ft = t.quantity("molar_flow", "molar_flow", maximum=1e6)
        else:
            mdot = t.quantity("mass_flow", "mass_flow", maximum=1e5)
            ft = mdot / sum(y * s.molar_mass for y, s in zip(fractions, species))
        flows = [y * ft for y in fractions]
    if not sum(flows) >= MIN_FEED:
        raise CaseError(source, "feed", f"total feed flow must be at least {MIN_FEED:g} mol/s (the numerical floor)")
    density = t.quantity("density", "density", default=None, required=phase == "liquid", minimum=1e-3, maximum=3e4)
    temperature = t.quantity("temperature", "temperature", minimum=150.0,
                             maximum=numerics.temperature_ceiling - 1.0)
    for sp in species:
        lo, hi = sp.cp_model.t_min, sp.cp_model.t_max
        if not lo <= temperature <= hi:
            raise CaseError(source, t.key("temperature"), f"{temperature:.6g} K lies outside the heat-capacity range "
                            f"of {sp.name} ({lo:g} to {hi:g} K)")
    feed = C.Feed(tuple(flows), temperature,
                  t.quantity("pressure", "pressure", minimum=numerics.min_pressure, maximum=1e9),
                  t.quantity("viscosity", "viscosity", minimum=1e-12, maximum=1e3),
                  t.quantity("thermal_conductivity", "thermal_conductivity", default=None, required=False,
                             minimum=1e-4, maximum=1e4),
                  density, t.quantity("diffusivity", "diffusivity", default=None, required=False, minimum=1e-14,
                                      maximum=1.0))
    t.finish()
    return feed


MIN_FEED = 1e-12  # mol/s: below this the balances are numerically meaningless


def _check_key_and_product(reactions, feed, names, key, product, source):
    """The key reactant is fed and consumed by a reaction; the product is another species that a reaction
    forms."""
    if not feed.molar_flows[names.index(key)] > 0:
        raise CaseError(source, "chemistry.key_reactant", f'"{key}" is not in the feed: conversion is undefined')
    if not any(rx.nu.get(key, 0.0) < 0 for rx in reactions):
        raise CaseError(source, "chemistry.key_reactant", f'no reaction consumes "{key}"')
    if product:
        if product == key:
            raise CaseError(source, "chemistry.product", "must differ from chemistry.key_reactant")
        if not any(rx.nu.get(product, 0.0) > 0 for rx in reactions):
            raise CaseError(source, "chemistry.product", f'no reaction forms "{product}"')


MUMPS_CHOICES = {  # IPOPT option: {value: meaning}, as far as this MUMPS build (no METIS or SCOTCH) offers them
    "mumps_pivot_order": {0: "AMD", 2: "AMF", 4: "PORD", 6: "QAMD", 7: "automatic"},
    "mumps_scaling": {0: "none", 8: "iterative row and column scaling", 77: "automatic"},
    "mumps_permuting_scaling": {0: "none", 7: "automatic"},
}


def _mumps_choice(t: Table, key: str, default: int) -> int:
    if not t.has(key):
        return default
    choices = MUMPS_CHOICES[key]
    value = t.number(key, low=min(choices), high=max(choices), integer=True)
    if value not in choices:
        allowed = ", ".join(f"{k} ({v})" for k, v in choices.items())
        raise CaseError(t.source, t.key(key), f"{value} is not available; allowed: {allowed}")
    return int(value)


def _coolant(t: Table, feed, source):
    """The [coolant] table, read by the row of its mode (models.coolant_modes): a key the mode does not read
    is refused, not ignored."""
    mode_name = t.raw("mode", required=True)
    if not isinstance(mode_name, str) or mode_name not in C.COOLANT_MODES:
        t.choice("mode", tuple(C.COOLANT_MODES))  # raises with the allowed modes
    mode = C.COOLANT_MODES[mode_name]
    t.allowed = set(mode.keys)
    for key in t.data:
        if key not in t.allowed and key in {k for row in C.COOLANT_MODES.values() for k in row.keys}:
            raise CaseError(source, t.key(key), f'does not apply to coolant mode "{mode.name}"; this mode reads: '
                            f"{', '.join(mode.keys)}")
    temperature = mass_flow = cp = pressure = None
    if mode.temperature_source == "given":
        temperature = t.quantity("temperature", "temperature", minimum=100.0, maximum=6000.0)
    elif mode.temperature_source == "feed":
        temperature = feed.temperature
    elif mode.temperature_source == "saturation":
        pressure = t.quantity("pressure", "pressure")
        try:
            temperature = water_saturation_temperature(pressure)
        except ValueError as err:
            raise CaseError(source, "coolant.pressure", str(err)) from err
    if mode.has_coolant_flow:
        mass_flow = t.quantity("mass_flow", "mass_flow", minimum=1e-9, maximum=1e6)
        cp = t.quantity("cp", "specific_heat_capacity", minimum=10.0, maximum=1e5)
    t.finish()
    return C.Coolant(mode.name, temperature, mass_flow, cp, pressure)


def _radial(t: Table | None, bed, feed, source):
    """The [radial] table: data of the two-dimensional model. For a packed bed, lambda_er is given or comes from
    the correlations with the pellet's solid_conductivity; an empty tube needs lambda_er and alpha_w given."""
    if t is None:
        return None
    t.allowed = {"points", "particle_shape", "solid_conductivity", "lambda_er", "alpha_w", "dispersion"}
    radial = C.Radial(
        points=t.number("points", default=C.Radial.points, low=1, high=40, integer=True),
        particle_shape=t.choice("particle_shape", ("sphere", "cylinder"), default=C.Radial.particle_shape),
        solid_conductivity=t.quantity("solid_conductivity", "thermal_conductivity", required=False, maximum=1e4),
        lambda_er=t.quantity("lambda_er", "thermal_conductivity", required=False, maximum=1e6),
        alpha_w=t.quantity("alpha_w", "heat_transfer_coefficient", required=False, maximum=1e6),
        dispersion=t.quantity("dispersion", "diffusivity", required=False, maximum=10.0),
    )
    t.finish()
    if bed is None:
        for key in ("lambda_er", "alpha_w"):
            if getattr(radial, key) is None:
                raise CaseError(source, f"radial.{key}", "missing: an empty tube has no radial correlation here; "
                                "give lambda_er and alpha_w")
        for key in ("solid_conductivity", "particle_shape"):
            if t.has(key):
                raise CaseError(source, f"radial.{key}", "applies to packed beds only (this case has no [bed])")
    else:
        if radial.lambda_er is None and radial.solid_conductivity is None:
            raise CaseError(source, "radial.solid_conductivity", "missing: a packed bed needs the pellet's "
                            "solid_conductivity (for the static conductivity) or lambda_er given")
        needs = [k for k, v in (("lambda_er", radial.lambda_er), ("alpha_w", radial.alpha_w)) if v is None]
        if needs and (feed.thermal_conductivity is None or feed.viscosity is None):
            missing = "thermal_conductivity" if feed.thermal_conductivity is None else "viscosity"
            raise CaseError(source, f"feed.{missing}", f"missing: needed by the radial correlations for "
                            f"{' and '.join(needs)}")
    return radial


def _heat_transfer(t: Table | None, coolant, bed, feed, radial, source):
    if not coolant.kind.exchanges_heat:
        if t is not None:
            t.allowed = {"overall", "inside", "outside", "multiplier"}
            t.finish()
        return C.HeatTransfer()
    if t is None:
        raise CaseError(source, "heat_transfer", f'missing: coolant mode "{coolant.mode}" needs heat_transfer.overall '
                        "or heat_transfer.outside (with the inside correlation)")
    t.allowed = {"overall", "inside", "outside", "multiplier"}
    multiplier = t.number("multiplier", default=1.0, low=0.0, high=100.0)
    if t.has("overall"):
        ht = C.HeatTransfer(overall=t.quantity("overall", "heat_transfer_coefficient", maximum=1e6),
                            multiplier=multiplier)
    else:
        default = "leva" if bed is not None else "gnielinski"
        inside = t.choice("inside", C.INSIDE_CORRELATIONS, default=default)
        if inside == "radial_lumped":
            if radial is None:
                raise CaseError(source, "heat_transfer.inside", '"radial_lumped" needs the [radial] table (its '
                                "lambda_er and alpha_w are lumped into the bed-side coefficient)")
        elif (inside == "leva") != (bed is not None):
            raise CaseError(source, "heat_transfer.inside", '"leva" is for packed beds only; empty tubes allow '
                            '"gnielinski", "dittus_boelter", "laminar", "radial_lumped"')
        if feed.thermal_conductivity is None and inside != "radial_lumped":
            raise CaseError(source, "feed.thermal_conductivity", "missing: needed by the inside heat-transfer "
                            "correlation")
        ht = C.HeatTransfer(inside=inside, outside=t.quantity("outside", "heat_transfer_coefficient", maximum=1e6),
                            multiplier=multiplier)
    t.finish()
    return ht


def _limits(t: Table | None, species, product, coolant, bed, source) -> dict:
    """[limits] by the rows of models.limits: each bound in SI; a limit that cannot apply (no product, a
    coolant mode without heat exchange or without a coolant flow, no packed bed) is refused. A switch row
    (``correlations_in_range = true``) is stored with its fixed bound 0; ``false`` leaves it out."""
    if t is None:
        return {}
    t.allowed = set(LIMITS)
    out = {}
    for key in t.data:
        row = LIMITS.get(key)
        if row is None:
            continue  # reported by finish()
        if row.needs_product and not product:
            raise CaseError(source, t.key(key), "needs chemistry.product")
        if row.needs_coolant and not coolant.kind.exchanges_heat:
            raise CaseError(source, t.key(key), f'does not apply to coolant mode "{coolant.mode}" (no heat exchange)')
        if row.needs_coolant_flow and not coolant.kind.has_coolant_flow:
            raise CaseError(source, t.key(key), f'does not apply to coolant mode "{coolant.mode}" (no coolant flow)')
        if row.needs_bed and bed is None:
            raise CaseError(source, t.key(key), "applies to packed tubes only (this case has no [bed])")
        if row.switch:
            value = t.raw(key)
            if not isinstance(value, bool):
                raise CaseError(source, t.key(key), f"must be true or false, got {value!r}")
            if value:
                out[key] = 0.0
            continue
        if row.dimension == "production":
            out[key] = _production_rate(t.raw(key), species, product, source, t.key(key))
        elif row.dimension == "dimensionless":
            out[key] = t.number(key)
        else:
            out[key] = t.quantity(key, row.dimension, positive=False, minimum=0.0)
    t.finish()
    for lo, hi in PAIRS:
        if lo in out and hi in out and out[lo] > out[hi]:
            raise CaseError(source, t.key(lo), f"is above limits.{hi}")
    return out


def _production_rate(value, species, product, source, key) -> float:
    """A molar rate, or a mass rate converted with the product's molar mass."""
    try:
        unit, rate = to_si_one_of(value, ("mol/s", "kg/s"), source, key)
    except CaseError as err:
        raise CaseError(source, key, f'"{value}" must be a molar rate ("mol/s") or a mass rate ("t/year", '
                        '"kg/h")') from err
    return rate if unit == "mol/s" else rate / next(s for s in species if s.name == product).molar_mass
