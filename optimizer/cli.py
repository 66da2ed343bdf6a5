"""The ``tubewright`` command line. Start-up stays light: each verb imports what it needs.

Exit codes: 0 success, 1 the computation ran but did not succeed (a stopped or failed simulation),
2 bad input (the message names the file, the key and what is allowed)."""

from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

from .caution import CAUTION

EXIT_OK, EXIT_NOT_OK, EXIT_BAD_INPUT = 0, 1, 2


def _parse_sets(items) -> dict:
    out = {}
    for item in items or []:
        if "=" not in item:
            raise ValueError(f'--set "{item}": write KEY=VALUE, for example --set tube.length="6 m"')
        key, value = item.split("=", 1)
        value = value.strip()
        try:  # numbers stay numbers; everything else is a string (never evaluated)
            value = float(value) if any(c in value for c in ".eE") else int(value)
        except ValueError:
            pass
        out[key.strip()] = value
    return out


def _fmt(value) -> str:
    if value is None:
        return "-"
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        return f"{value:.6g}"
    return str(value)


def summary_lines(case, result) -> list[str]:
    s = result.summary
    rows = [
        ("status", result.status),
        ("reason", result.reason),
        (f"conversion of {case.key_reactant}", s.get("conversion")),
    ]
    for name, y in s.get("yield", {}).items():
        rows.append((f"yield of {name}", y))
    for name, y in s.get("selectivity", {}).items():
        rows.append((f"selectivity to {name}", y))
    rows += [
        ("production rate [mol/s]", s.get("production_rate_mol_s")),
        ("outlet temperature [K]", s.get("outlet_temperature_K")),
        ("hot-spot temperature [K]", s.get("max_temperature_K")),
        ("hot-spot position [m]", s.get("max_temperature_position_m")),
        ("pressure drop [Pa]", s.get("pressure_drop_Pa")),
        ("heat removed [W]", s.get("heat_removed_W")),
        ("coolant outlet temperature [K]", s.get("coolant_outlet_temperature_K")),
        ("residence time [s]", s.get("residence_time_s")),
    ]
    for name, f in s.get("outlet_molar_flow_mol_s", {}).items():
        rows.append((f"outlet flow of {name} [mol/s]", f))
    width = max(len(r[0]) for r in rows)
    return [f"  {label:<{width}}  {_fmt(value)}" for label, value in rows]


def cmd_simulate(args) -> int:
    from models import load_case, simulate

    case = load_case(args.case, _parse_sets(args.set))
    result = simulate(case)
    files = {}
    if args.out:
        out = Path(args.out)
        out.mkdir(parents=True, exist_ok=True)
        if result.columns:
            files["profiles_csv"] = str(out / "profiles.csv")
            result.profiles.to_csv(files["profiles_csv"], index=False)
            from .plots import plot_profiles

            files["plot_png"] = str(plot_profiles(case, result, out / "profiles.png"))
        files["summary_json"] = str(out / "summary.json")
        Path(files["summary_json"]).write_text(json.dumps(_json_answer(case, result, files), indent=2) + "\n")
    if args.json:
        print(json.dumps(_json_answer(case, result, files), indent=2))
    else:
        print(f"{case.title}\n  case file: {case.source}")
        print("\n".join(summary_lines(case, result)))
        warnings = [f for f in result.findings if f.level == "warning"]
        infos = [f for f in result.findings if f.level != "warning"]
        if warnings:
            print("\nwarnings:")
            for f in warnings:
                print(f"  ! {f.code}: {f.message}")
        if infos:
            print("\nchecks passed:")
            for f in infos:
                print(f"  - {f.code}: {f.message}")
        for label, path in files.items():
            print(f"  wrote {label}: {path}")
        print(f"\nsimulated in {result.timings.get('simulate_s', 0):.2f} s, checks in "
              f"{result.timings.get('checks_s', 0):.2f} s\n\nCAUTION: {CAUTION}")
    return EXIT_OK if result.ok else EXIT_NOT_OK


def _finite(value):
    """NaN and infinity are not JSON: they become null."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite(v) for v in value]
    return value


def _json_answer(case, result, files) -> dict:
    return _finite({
        "case": case.source,
        "title": case.title,
        "status": result.status,
        "reason": result.reason,
        "summary": result.summary,
        "findings": [f.as_dict() for f in result.findings],
        "timings_s": result.timings,
        "files": files,
        "caution": CAUTION,
    })


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="tubewright", description="Screening design of cooled tubular reactors. "
                                + CAUTION)
    sub = p.add_subparsers(dest="verb", required=True)
    sim = sub.add_parser("simulate", help="simulate one case file")
    sim.add_argument("case", help="case file (TOML)")
    sim.add_argument("--json", action="store_true", help="print the summary as one JSON object")
    sim.add_argument("--out", metavar="DIR", help="write profiles.csv, profiles.png and summary.json here")
    sim.add_argument("--set", action="append", metavar="KEY=VALUE",
                     help='override a case key, for example --set tube.length="6 m" (repeatable)')
    sim.set_defaults(func=cmd_simulate)
    return p


def main(argv=None) -> int:
    args = build_parser().parse_args(argv)
    from models.errors import CaseError

    try:
        return args.func(args)
    except CaseError as err:
        print(f"error: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except ValueError as err:  # malformed command-line values
        print(f"error: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT


if __name__ == "__main__":
    sys.exit(main())
