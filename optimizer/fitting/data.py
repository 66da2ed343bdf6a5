"""Laboratory runs for a kinetics fit: a CSV (or Parquet) file, one row per run.

Columns are named ``KEY [UNIT]``: a run condition by its dotted case key (``feed.temperature [degC]``,
``feed.molar_flows.A [mol/s]``, ``tube.length [m]``, ``coolant.temperature [K]``), or a measured outlet
quantity under ``measured.``:

    measured.conversion                  (of the key reactant; unit "-" or none)
    measured.outlet_temperature [K]
    measured.outlet_flow.SPECIES [mol/s]
    measured.outlet_mole_fraction.SPECIES  (unit "-" or none)
    measured.rate.SPECIES [mol/kg/s]     (a differential run: the net formation rate at the feed conditions,
                                          per catalyst mass or per volume as the species' reactions are)
    measured.axial_temperature.NAME [K]  (the fluid temperature at thermocouple NAME, whose position from the
                                          tube inlet [fit.thermocouples] gives; within every run's tube)

A quantity with a dimension needs its unit in the header; temperatures in the header are absolute (a lone
degC means a temperature, not a difference). Every run is validated as a case (the base case with the
row's conditions) before anything is fitted; a bad value is refused with the file, the row (1 = first run)
and the column, and all bad rows are listed together."""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

from tubewright.models.errors import CaseError, suggest

MEASURED = {  # name -> (pint unit of its SI value, what follows the name: None, "species" or "thermocouple")
    "conversion": ("", None),
    "outlet_temperature": ("K", None),
    "outlet_flow": ("mol/s", "species"),
    "outlet_mole_fraction": ("", "species"),
    "rate": (None, "species"),  # mol/kg/s or mol/m^3/s: the basis of the species' reactions (balances.rate_basis)
    "axial_temperature": ("K", "thermocouple"),
}
RATE_UNITS = {"catalyst_mass": "mol/kg/s", "volume": "mol/m^3/s"}
_HEADER = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_.\-]*)\s*(?:\[([^\]]*)\])?\s*$")
DIMENSIONLESS = ("", "-", "1")


@dataclass(frozen=True)
class Run:
    row: int  # 1 = the first run of the file
    conditions: dict  # dotted case key -> override text ("600 K") as given
    case: object  # the validated case of this run
    measured: dict  # "conversion", "outlet_temperature", "outlet_flow.B", ... -> SI value


@dataclass(frozen=True)
class Column:
    key: str
    unit: str

    @property
    def is_measured(self) -> bool:
        return self.key.startswith("measured.")


def parse_header(name: str, source: str) -> Column:
    match = _HEADER.match(str(name))
    if not match:
        raise CaseError(source, str(name), 'a column is named "KEY [UNIT]", e.g. "feed.temperature [K]"')
    return Column(match.group(1), (match.group(2) or "").strip())


def _measured_si(column: Column, value: float, source: str, case, thermocouples: dict) -> tuple[str, float]:
    parts = column.key.split(".")
    kind = parts[1] if len(parts) > 1 else ""
    if kind not in MEASURED:
        raise CaseError(source, column.key, f'unknown measured quantity "{kind}"{suggest(kind, MEASURED)}; '
                        f"allowed: {', '.join('measured.' + k for k in MEASURED)}")
    unit, needs = MEASURED[kind]
    if needs:
        names = list(case.names) if needs == "species" else list(thermocouples)
        if len(parts) != 3 or parts[2] not in names:
            given = parts[2] if len(parts) > 2 else ""
            where = "of the case" if needs == "species" else "of [fit.thermocouples]"
            raise CaseError(source, column.key, f'"measured.{kind}" needs a {needs} {where} after it '
                            f"(measured.{kind}.{needs.upper()}){suggest(given, names)}; {needs}s: "
                            f"{', '.join(names) or 'none'}")
    elif len(parts) != 2:
        raise CaseError(source, column.key, f'"measured.{kind}" takes no species')
    name = ".".join(parts[1:])
    if unit is None:  # a formation rate: its unit follows the basis of the species' reactions
        from tubewright.models.balances import rate_basis

        try:
            unit = RATE_UNITS[rate_basis(case, parts[2])]
        except ValueError as err:
            raise CaseError(source, column.key, f"cannot be predicted: {err}") from None
    if unit == "":
        if column.unit not in DIMENSIONLESS:
            raise CaseError(source, column.key, f'is dimensionless: no unit, or "-"; got "{column.unit}"')
        return name, value
    if not column.unit:
        raise CaseError(source, column.key, f"needs its unit in the header, e.g. [{unit}]")
    from tubewright.models.units import to_si

    return name, to_si(f"{value} {column.unit}", unit, source, column.key)


def read_table(path):
    """The rows of a CSV or Parquet file as (header names, list of row lists)."""
    import pandas as pd

    path = Path(path)
    try:
        if path.suffix.lower() in (".parquet", ".pq"):
            frame = pd.read_parquet(path)
            return [str(c) for c in frame.columns], frame.values.tolist()
        # the header as written (pandas would rename a repeated column), the values as text
        frame = pd.read_csv(path, header=None, dtype=str, keep_default_na=False)
    except FileNotFoundError as err:
        raise CaseError(str(path), "", "the data file does not exist") from err
    except (ValueError, OSError, pd.errors.ParserError) as err:
        raise CaseError(str(path), "", f"cannot be read as a table of runs: {err}") from err
    rows = frame.values.tolist()
    return [str(c) for c in rows[0]], rows[1:]


def read_runs(data_path, case_path, thermocouples: dict | None = None) -> list[Run]:
    """Read and validate every run of ``data_path`` against the base case ``case_path``; ``thermocouples``
    (name -> position from the tube inlet [m]) are the positions measured.axial_temperature.NAME may name."""
    from tubewright.models.casefile import case_loader

    source = str(data_path)
    names, rows = read_table(data_path)
    if not rows:
        raise CaseError(source, "", "has no runs (no rows under the header)")
    columns = [parse_header(n, source) for n in names]
    seen = set()
    for c in columns:
        if c.key in seen:
            raise CaseError(source, c.key, "appears twice in the header")
        seen.add(c.key)
    if not any(c.is_measured for c in columns):
        raise CaseError(source, "", "has no measured column (measured.conversion, measured.outlet_temperature, "
                        "measured.outlet_flow.SPECIES or measured.outlet_mole_fraction.SPECIES)")
    load = case_loader(case_path)
    base = load()
    runs, problems = [], []
    for number, values in enumerate(rows, start=1):
        where = f"{source}, row {number}"
        try:
            runs.append(_run(number, values, columns, where, load, base, thermocouples or {}))
        except CaseError as err:
            problems.append(err)
    if problems:
        if len(problems) == 1:
            raise problems[0]
        listed = "\n  ".join(str(p) for p in problems)
        raise CaseError(source, "", f"{len(problems)} rows are not acceptable:\n  {listed}")
    return runs


def _run(number, values, columns, where, load, base, thermocouples) -> Run:
    """One row as a Run; ``load``: the base case file's loader (casefile.case_loader)."""
    overrides, measured = {}, {}
    for column, value in zip(columns, values):
        if isinstance(value, str) and not value.strip():
            raise CaseError(where, column.key, "is empty: every run needs every column")
        try:
            number_value = float(value)
        except (TypeError, ValueError):
            raise CaseError(where, column.key, f'"{value}" is not a number') from None
        if not math.isfinite(number_value):
            raise CaseError(where, column.key, f"{value} is not a finite number")
        if column.is_measured:
            name, si = _measured_si(column, number_value, where, base, thermocouples)
            measured[name] = si
        else:
            overrides[column.key] = f"{number_value!r} {column.unit}" if column.unit else number_value
    try:
        case = load(overrides)
    except CaseError as err:
        column = err.key if err.key in overrides else ""
        raise CaseError(where, column, err.detail if column else str(err)) from None
    for name in measured:
        kind, _, tc = name.partition(".")
        if kind == "axial_temperature" and not 0.0 < thermocouples[tc] <= case.tube.length:
            raise CaseError(where, f"measured.{name}", f"thermocouple {tc} at {thermocouples[tc]:g} m lies outside "
                            f"this run's tube (length {case.tube.length:g} m)")
    return Run(number, overrides, case, measured)
