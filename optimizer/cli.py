"""The ``tubewright`` command line. Start-up stays light: each verb imports what it needs.

Exit codes: 0 success, 1 the computation ran but did not succeed (a stopped or failed simulation),
2 bad input (the message names the file, the key and what is allowed)."""

from __future__ import annotations

import argparse
import contextlib
import json
import math
import os
import sys
import warnings
from pathlib import Path

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

from tubewright.models.casefile import load_case
from tubewright.models.errors import CaseError, ComputationFailed, option_error
from tubewright.models.limits import LIMITS
from tubewright.models.outcomes import Status
from tubewright.optimizer import verbs
from tubewright.optimizer.design.goals import GOALS
from tubewright.optimizer.design.spec import read_design, values_by_key
from tubewright.optimizer.output import display
from tubewright.optimizer.output.caution import CAUTION
from tubewright.optimizer.output.jsonsafe import finite
from tubewright.optimizer.output.progress import Phases, ProgressBar
from tubewright.optimizer.output.text import write_columns_csv
from tubewright.optimizer.screening.analysis import DEFAULT_SAMPLES, POLICIES
from tubewright.optimizer.study.spec import MAX_TASKS

EXIT_OK, EXIT_NOT_OK, EXIT_BAD_INPUT, EXIT_BUG, EXIT_INTERRUPTED = 0, 1, 2, 3, 130


def _parse_sets(items) -> dict:
    """--set KEY=VALUE pairs. The value is read as a TOML value (a number, true or false, a quoted string,
    an array or an inline table), else kept as a string; it is never evaluated. The case reader then
    validates it like the file (unknown keys are refused there)."""
    out = {}
    for item in items or []:
        if "=" not in item:
            raise option_error("--set", f'"{item}": write KEY=VALUE, for example --set tube.length="6 m"')
        key, value = item.split("=", 1)
        value = value.strip()
        try:
            value = tomllib.loads(f"value = {value}")["value"]
        except (tomllib.TOMLDecodeError, RecursionError):
            pass  # a bare string such as 6 m
        out[key.strip()] = value
    return out


_JSON_STREAM = {"out": None}  # the real stdout while a verb runs with --json (everything else goes to stderr)


def _emit_json(value):
    """The one JSON document of a --json answer, on the real standard output."""
    print(json.dumps(value, indent=2), file=_JSON_STREAM["out"] or sys.stdout)


def _fmt(value) -> str:
    if value is None:
        return "-"
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        return f"{value:.6g}"
    return str(value)


SUMMARY_ROWS = (("production rate", "production_rate_mol_s"), ("outlet temperature", "outlet_temperature_K"),
                ("hot-spot temperature", "max_temperature_K"), ("hot-spot position", "max_temperature_position_m"),
                ("pressure drop", "pressure_drop_Pa"), ("heat removed", "heat_removed_W"),
                ("coolant outlet temperature", "coolant_outlet_temperature_K"),
                ("steam pressure", "coolant_pressure_Pa"), ("steam raised", "steam_raised_kg_s"),
                ("residence time", "residence_time_s"))


def summary_lines(case, result) -> list[str]:
    """The summary in display units (output.display: degC, bar, kW/MW, t/h, the duty's own unit); --json and
    the files stay SI."""
    s = result.summary
    duty = display.duty_unit(case)
    rows = [
        ("status", result.status),
        ("reason", result.reason),
        (f"conversion of {case.key_reactant}", _fmt(s.get("conversion"))),
    ]
    for name, y in s.get("yield", {}).items():
        rows.append((f"yield of {name}", _fmt(y)))
    for name, y in s.get("selectivity", {}).items():
        rows.append((f"selectivity to {name}", _fmt(y)))
    rows += [(label, display.field(key, s.get(key), duty)) for label, key in SUMMARY_ROWS if key in s]
    for name, beta in s.get("approach_to_equilibrium", {}).items():
        rows.append((f"approach to equilibrium of {name} (Q/K at the outlet; 1 = equilibrium)", _fmt(beta)))
    for name, f in s.get("outlet_molar_flow_mol_s", {}).items():
        rows.append((f"outlet flow of {name} [mol/s]", _fmt(f)))
    width = max(len(r[0]) for r in rows)
    return [f"  {label:<{width}}  {value}" for label, value in rows]


def cmd_simulate(args) -> int:
    from tubewright.optimizer.output.second_process import SecondProcess

    with SecondProcess(enabled=bool(args.out)) as helper:  # started first: it imports while the case loads
        case = load_case(args.case, _parse_sets(args.set))
        if args.radial_points is not None and not args.radial:
            raise option_error("--radial-points", "applies to --radial only")
        return _simulate_and_report(args, case, helper)


def _simulate_and_report(args, case, helper) -> int:
    from tubewright.optimizer.output.plots import plot_profiles, plot_radial

    out = Path(args.out) if args.out else None
    if out is not None:
        out.mkdir(parents=True, exist_ok=True)
    drawings = {}

    def draw_profiles(result):  # drawn in the other process while the checks re-simulate
        if out is not None and result.columns:
            drawings["plot_png"] = helper.run(plot_profiles, case, result, out / "profiles.png")

    result = verbs.simulate(case, on_profiles=draw_profiles)
    radial = verbs.radial_check(case, args.radial_points, one_d=result) if args.radial else None
    files = {}
    if out is not None:
        if result.columns:
            files["profiles_csv"] = str(out / "profiles.csv")
            write_columns_csv(files["profiles_csv"], result.columns)
            files["plot_png"] = str(drawings["plot_png"].result())
        if radial is not None and radial.result.columns:
            figure = helper.run(plot_radial, case, radial, out)
            files.update(_radial_tables(radial, out))
            files.update(figure.result())
        files["summary_json"] = str(out / "summary.json")
        Path(files["summary_json"]).write_text(json.dumps(_json_answer(case, result, files, radial), indent=2)
                                               + "\n")
    if args.json:
        _emit_json(_json_answer(case, result, files, radial))
    else:
        print(f"{case.title}\n  case file: {case.source}")
        print("\n".join(summary_lines(case, result)))
        warned = [f for f in result.findings if f.level == "warning"]
        infos = [f for f in result.findings if f.level != "warning"]
        if warned:
            print("\nwarnings:")
            for f in warned:
                print(f"  ! {f.code}: {f.message}")
        if infos:
            print("\nchecks passed:")
            for f in infos:
                print(f"  - {f.code}: {f.message}")
        if radial is not None:
            print("\n" + "\n".join(radial_lines(case, radial)))
        for label, path in files.items():
            print(f"  wrote {label}: {path}")
        print(f"\nsimulated in {result.timings.get('simulate_s', 0):.2f} s, checks in "
              f"{result.timings.get('checks_s', 0):.2f} s"
              + (f", 2-D model in {radial.result.timings.get('simulate_s', 0):.2f} s" if radial else "")
              + f"\n\nCAUTION: {CAUTION}")
    return EXIT_OK if result.ok and (radial is None or radial.result.ok) else EXIT_NOT_OK


def radial_lines(case, check, limit=None) -> list[str]:
    """The 2-D model beside the 1-D one, in display units; ``limit`` the hot-spot limit [K] (default the
    case's max_temperature)."""
    f = check.figures()
    res = check.result
    t = check.transport
    limit = case.limits.get("max_temperature") if limit is None else limit
    lines = [f"two-dimensional model ({res.points} radial points; at the inlet lambda_er "
             f"{t['lambda_er_W_m_K']:.4g} W/(m K), alpha_w {t['alpha_w_W_m2_K']:.4g} W/(m2 K), wall-to-coolant "
             f"{t['wall_u_W_m2_K']:.4g} W/(m2 K), D_er {t['dispersion_m2_s']:.3g} m2/s):",
             f"  status {res.status}: {res.reason}"]
    rows = [("centre-line hot spot", display.field("centre_hot_spot_K", f["centre_hot_spot_K"])),
            ("  at z", display.field("centre_hot_spot_position_m", f["centre_hot_spot_position_m"])),
            ("1-D hot spot (this case's heat transfer)", display.field("one_d_hot_spot_K", f["one_d_hot_spot_K"])),
            ("  2-D minus 1-D", display.field("one_d_difference_K", f["one_d_difference_K"]))]
    if "lumped_hot_spot_K" in f:
        rows += [("1-D hot spot (U lumped from the radial data)",
                  display.field("lumped_hot_spot_K", f["lumped_hot_spot_K"])),
                 ("  2-D minus lumped 1-D", display.field("lumped_difference_K", f["lumped_difference_K"]))]
    rows.append(("centre-to-wall difference at the hot spot",
                 display.field("hot_spot_radial_difference_K", f["hot_spot_radial_difference_K"])))
    if "grid_difference_K" in f:
        rows.append((f"radial-grid check: hot spot change at {f['grid_points']} points",
                     display.field("grid_difference_K", f["grid_difference_K"])))
    if limit is not None and f["centre_hot_spot_K"] is not None:
        margin = limit - f["centre_hot_spot_K"]
        verdict = "kept" if res.ok and margin >= 0 else "VIOLATED"
        rows.append(("hot-spot limit (2-D centre line)", f"{display.temperature(limit)}: {verdict} "
                     f"(margin {margin:.4g} K)"))
    width = max(len(r[0]) for r in rows)
    lines += [f"  {label:<{width}}  {value}" for label, value in rows]
    prof = res.hot_spot_profile
    if prof:
        lines.append("  radial profile at the hot spot: "
                     + ", ".join(f"r {r * 1e3:.3g} mm {display.temperature(v)}"
                                 for r, v in zip(prof["radius_m"], prof["T_K"])))
    return lines


def _radial_tables(check, out: Path) -> dict:
    """The 2-D model's profiles and temperature map T(z, r) as CSV files."""
    res = check.result
    files = {"radial_profiles_csv": str(out / "radial-profiles.csv")}
    write_columns_csv(files["radial_profiles_csv"], res.columns)
    grid = {"z_m": res.columns["z_m"]}
    grid.update((f"T_K_at_r_{r:.6g}_m", res.temperature_map_K[:, j]) for j, r in enumerate(res.radius_m))
    files["temperature_map_csv"] = str(out / "temperature-map.csv")
    write_columns_csv(files["temperature_map_csv"], grid)
    return files


def _json_answer(case, result, files, radial=None) -> dict:
    extra = {}
    if radial is not None:
        extra["radial"] = {"figures": radial.figures(), "summary_2d": radial.result.summary,
                           "hot_spot_profile": radial.result.hot_spot_profile}
    return finite({
        "case": case.source,
        "title": case.title,
        "status": result.status,
        "reason": result.reason,
        "summary": result.summary,
        "findings": [f.as_dict() for f in result.findings],
        "timings_s": result.timings,
        "files": files,
        **extra,
        "caution": CAUTION,
    })


def optimisation_lines(case, res) -> list[str]:
    lines = [f"  status: {res.status} - {res.reason}"]
    duty = display.duty_unit(res.case or case)
    currency = read_design(case).costs.currency
    unit = GOALS[res.goal].unit
    unit = "" if unit == "-" else f" {currency} {unit}" if res.goal == "min_cost" else f" {unit}"
    if res.objective is not None and res.goal_valid:
        lines.append(f"  goal: {res.goal} = {_fmt(res.objective)}{unit}")
    elif res.objective is not None:
        lines.append(f"  goal: {res.goal}: NOT VALID (no feasible converged design); at the best point found "
                     f"{_fmt(res.objective)}{unit}")
    else:
        lines.append(f"  goal: {res.goal}: NOT VALID (no design was computed)")
    base = res.extras.get("base")
    if res.design:
        title = "best point found (not a valid design)" if not res.goal_valid else "optimum"
        lines.append(f"\ndesign{'' if base is None else ' (base case as written beside it)'}:")
        width = max(len(k) for k in res.design)
        if base is not None:
            lines.append(f"  {'':<{width}}  {'base case':>16}  {title}")
        for k, v in res.design.items():
            was = "" if base is None else f"{display.field(k, base['design'].get(k)):>16}  "
            lines.append(f"  {k:<{width}}  {was}{display.field(k, v)}")
        if base is not None and res.simulation is not None and res.simulation.summary:
            for k, v in base["figures"].items():
                lines.append(f"  {k:<{width}}  {display.field(k, v, duty):>16}  "
                             f"{display.field(k, res.simulation.summary.get(k), duty)}")
    if res.limits:
        lines.append("\nlimits (multiplier = change of the goal per unit of the limit; only at a converged design):")
        lines.append(f"  {'limit':<30}{'value':>16}{'bound':>16}  {'state':<22}{'multiplier':>14}  per SI unit")
        for r in res.limits:
            row = LIMITS[r.name]
            state = (f"VIOLATED by {r.violation:.4g} {r.unit}".rstrip(" -") if r.violated else
                     "binds" if r.binding else "kept")
            per = f"{currency}/year per {r.unit}" if res.goal == "min_cost" and r.unit != "-" else r.unit
            lines.append(f"  {r.name:<30}{display.limit_value(row, r.value, duty):>16}"
                         f"{display.limit_value(row, r.bound, duty):>16}  {state:<22}{_fmt(r.multiplier):>14}  {per}")
    if res.costs:
        lines.append(f"\nannual cost parts [{currency} per year]:")
        lines += [f"  {k:<14}{display.money(v, currency):>18}" for k, v in res.costs.items()]
        sh = res.extras.get("shells")
        if sh:
            lines.append(f"  tube area {sh['area_m2']:.4g} m^2 in {sh['count']} equal shell(s) of "
                         f"{sh['area_per_shell_m2']:.4g} m^2")
    if res.verification:
        v = res.verification
        lines.append(f"\nverification against the adaptive integrator: largest relative deviation "
                     f"{_fmt(v.get('max_relative_deviation'))} (tolerance {_fmt(v.get('tolerance'))}); goal of the "
                     f"re-simulated design {_fmt(v.get('goal_simulated'))}")
    if res.simulation is not None and res.simulation.findings:
        lines.append("checks of the final design (as simulate reports them):")
        lines += [f"  {'!' if f.level == 'warning' else '-'} {f.code}: {f.message}" for f in res.simulation.findings]
    if res.solver:
        s = res.solver
        lines.append(f"solver: IPOPT {s.get('status_name')}, {s.get('iterations_total')} iterations in "
                     f"{s.get('solves')} solve(s); {s.get('variables')} variables, {s.get('constraints')} "
                     f"constraints, {s.get('forms')} forms; {s.get('finite_elements')} elements x "
                     f"{s.get('collocation_points')} points")
    if res.timings:
        t = res.timings
        lines.append(f"times: build {t.get('build_s', 0):.2f} s (compile {t.get('compile_s', 0):.2f} s), IPOPT "
                     f"{t.get('ipopt_s', 0):.2f} s, callbacks {t.get('callbacks_s', 0):.2f} s, total "
                     f"{t.get('total_s', 0):.2f} s")
    for note in res.notes:
        lines.append(f"note: {note}")
    if res.hint:
        lines.append(f"hint: {res.hint}")
    return lines


def _optimisation_answer(case, res, files) -> dict:
    return finite({"case": case.source, "title": case.title, **res.as_dict(), "files": files, "caution": CAUTION})


def cmd_optimize(args) -> int:
    from tubewright.optimizer.output.second_process import SecondProcess

    overrides = _parse_sets(args.set)
    case = load_case(args.case, overrides)
    # it imports while this process builds and solves; it draws the figures, or without them runs the 2-D check
    with SecondProcess(enabled=bool(args.out) or case.radial is not None, figures=bool(args.out)) as helper:
        return _optimize_and_report(args, case, overrides, helper)


def _optimize_and_report(args, case, overrides, helper) -> int:
    from tubewright.optimizer.design.problem import design_case
    from tubewright.optimizer.output.plots import plot_front, plot_profiles, plot_robust

    progress = Phases(enabled=not args.json)
    out = Path(args.out) if args.out else None
    drawings = {}

    def draw_profiles(best, simulation, limits):  # drawn beside the checks and the 2-D check that follow
        out.mkdir(parents=True, exist_ok=True)
        drawings["plot_png"] = helper.run(plot_profiles, best, simulation, out / "optimal_profiles.png",
                                            limits=limits)

    def show_optimum(res):  # the main optimum as soon as it is known; alternatives follow
        if (out is not None and "plot_png" not in drawings and res.simulation is not None
                and res.simulation.columns):  # a design that did not converge: its best point
            draw_profiles(design_case(res.case, values_by_key(res.design)), res.simulation, res.limits)
        if args.json:
            return
        progress.close()
        print(f"{case.title}\n  case file: {case.source}")
        print("\n".join(optimisation_lines(case, res)))
        sys.stdout.flush()

    res = verbs.optimize(case, ideal=args.ideal, starts=args.starts, seed=args.seed, pareto=args.pareto,
                         progress=progress, on_optimum=show_optimum, scenarios=args.scenarios,
                         verify_samples=args.verify_samples, radial_tighten=args.radial_tighten,
                         on_profiles=draw_profiles if out is not None else None,
                         run_elsewhere=helper.run if out is None else None)
    progress.close()
    extras = res.extras
    files = {}
    if out is not None:  # written for a failed optimisation too: the report says why
        out.mkdir(parents=True, exist_ok=True)
        if "pareto" in extras:
            drawings["pareto_png"] = helper.run(plot_front, case, extras["pareto"], out / "pareto.png")
        if extras.get("robust", {}).get("verification"):
            drawings["robust_png"] = helper.run(plot_robust, case, extras["robust"], out / "robust.png")
        if "plot_png" in drawings:
            files["profiles_csv"] = str(out / "optimal_profiles.csv")
            write_columns_csv(files["profiles_csv"], res.simulation.columns)
            files["plot_png"] = str(drawings["plot_png"].result())
        if res.ok:
            from tubewright.optimizer.output.casewriter import write_optimum_case

            files["case_toml"] = str(write_optimum_case(out / "optimum.toml", res.case, res.design,
                                                        overrides, f"Optimum of: {case.title}"))
        tightened = extras.get("radial_check", {}).get("tightened", {})
        if "design" in tightened:  # the design that keeps the limit in 2-D, with the 1-D data it was found with
            from tubewright.optimizer.output.casewriter import write_optimum_case

            more = {"heat_transfer.inside": "radial_lumped"} if tightened["inside"] == "radial_lumped" else {}
            files["radial_case_toml"] = str(write_optimum_case(
                out / "optimum-2d-checked.toml", res.case, tightened["design"], {**overrides, **more},
                f"Optimum keeping its hot-spot limit in 2-D: {case.title}"))
        for label in ("pareto_png", "robust_png"):
            if label in drawings:
                files[label] = str(drawings[label].result())
        files["result_json"] = str(out / "optimum.json")
        Path(files["result_json"]).write_text(json.dumps(_optimisation_answer(case, res, files), indent=2) + "\n")
    if args.json:
        _emit_json(_optimisation_answer(case, res, files))
    else:
        print("\n".join(extra_lines(res, extras)))
        for label, path in files.items():
            print(f"  wrote {label}: {path}")
        print(f"\nCAUTION: {CAUTION}")
    return EXIT_OK if res.status in (Status.OPTIMAL, Status.NOT_OPTIMISED) else EXIT_NOT_OK


def extra_lines(res, extras) -> list[str]:
    lines = []
    if "standard_tubes" in extras:
        lines.append("\nstandard tube sizes (TEMA), best first:")
        for r in extras["standard_tubes"]:
            lines.append(f"  {r['label']:<20} inner {r['inner_diameter_m'] * 1e3:6.2f} mm  goal {_fmt(r['objective'])} "
                         f"({r['status']})")
    if "ideal_bound" in extras:
        b = extras["ideal_bound"]
        lo, hi = b["temperature_bounds_K"]
        lines.append(f"\nideal bound (fluid temperature free in {lo:.1f}..{hi:.1f} K along the tube): "
                     f"{_fmt(b['objective'])} ({b['status']}); this layout is {_fmt(b['gap'])} from it")
    if "multistart" in extras:
        ms = extras["multistart"]
        lines.append(f"\nmulti-start (seed {ms['seed']}): {len(ms['runs'])} of {ms['starts']} starts asked ran, "
                     f"{ms['converged']} converged, best {_fmt(ms['best'])}, spread {_fmt(ms['spread'])}; "
                     f"{len(ms['skipped'])} random designs skipped (their simulation did not reach the outlet)")
        if len(ms["runs"]) < ms["starts"]:
            lines.append(f"  only {len(ms['runs'])} starts: {ms['draws']} random designs drawn (at most "
                         f"{ms['max_draws']}), the others could not be simulated; narrow the design bounds")
    if "pareto" in extras:
        front = extras["pareto"]
        lines.append("\ncost-selectivity front (epsilon constraint; converged points only):")
        lines.append(f"  {'selectivity':>12}{'annual cost':>16}")
        for p in front["points"]:
            lines.append(f"  {p['selectivity']:>12.5f}{p['annual_cost_per_year']:>16.6g}")
        for p in front["not_converged"]:
            lines.append(f"  not on the front (IPOPT {p['status']}): selectivity asked >= {p['epsilon']:.5f}")
    if "robust" in extras:
        lines += robust_lines(extras["robust"])
    if "radial_check" in extras:
        lines += radial_check_lines(extras["radial_check"])
    return lines


def radial_check_lines(r: dict) -> list[str]:
    """The 2-D check of the optimum (optimizer.design.radial_check) and its tightening passes."""
    if not r["run"]:
        return [f"\ntwo-dimensional check of the optimum: not run: {r['reason']}"]
    f, limit = r["figures"], r["limit_K"]
    hot = f["centre_hot_spot_K"]
    lines = [f"\ntwo-dimensional check of the optimum ({f['radial_points']} radial points; the radial criterion "
             "warned):", f"  2-D status {f['status_2d']}: {f['reason_2d']}",
             f"  hot spot: 1-D {display.field('max_temperature_K', f['one_d_hot_spot_K'])}, 2-D centre line "
             f"{display.field('max_temperature_K', hot)}"
             + ("" if limit is None else f", limit {display.temperature(limit)}")]
    if r["violated"]:
        lines.append("  THE 1-D OPTIMUM VIOLATES THE HOT-SPOT LIMIT IN 2-D"
                     + ("" if "passes" in r else " (optimize --radial-tighten re-solves with a tightened limit)"))
    elif limit is not None:
        lines.append("  the 2-D hot spot keeps the limit")
    for p in r.get("passes", []):
        lines.append(f"  pass {p['pass']} ({p['change']}): 1-D limit {display.temperature(p['limit_1d_K'])}, "
                     f"IPOPT {p['status']}"
                     + (f", objective {_fmt(p['objective'])}, hot spot 1-D "
                        f"{display.field('max_temperature_K', p['hot_spot_1d_K'])}, 2-D "
                        f"{display.field('max_temperature_K', p['hot_spot_2d_K'])} ({p['status_2d']})"
                        if "hot_spot_2d_K" in p else f": {p.get('reason', '')}"))
    t = r.get("tightened")
    if t and "design" in t:
        lines.append(f"  tightened design (2-D hot spot within the limit after {t['passes']} pass(es)):")
        for k, v in t["design"].items():
            lines.append(f"    {k}: {display.field(k, v)}")
        lines.append(f"    objective {_fmt(t['objective'])} (the 1-D optimum: {_fmt(r['objective_1d'])})")
    elif t:
        lines.append(f"  tightening did not meet the limit: {t['reason']}")
    return lines


def robust_lines(r: dict) -> list[str]:
    """The robust design beside the nominal one, the scenarios that bind, the verification and the
    scenario guarantee."""
    goal = {"nominal": "the nominal one", "expected": "its mean over the nominal case and the scenarios",
            "mix": f"{r.get('nominal_weight', 0.5):g} x nominal + the rest x the mean"}[r["goal"]]
    lines = [f"\nrobust design over {r['scenarios']} scenarios of [uncertain] (seed {r['seed']}; goal: {goal}; "
             f"every limit in the nominal case and in each scenario): {r['status']} ({r['reason']})"]
    if r.get("objective") is not None:
        price = (f", price of robustness {_fmt(r['price'])} ({r['price_percent']:.2f} %) at the nominal values"
                 if r.get("price_percent") is not None else "")
        lines.append(f"  goal {_fmt(r['objective'])}{price}")
        lines.append("  design: " + ", ".join(f"{k} {_fmt(v)}" for k, v in r["design"].items()))
    for s in r["scenario_limits"]:
        binding = [f"{row['limit']} (multiplier {_fmt(row['multiplier'])})" for row in s["limits"] if row["binding"]]
        if binding:
            inputs = ", ".join(f"{p.split('.', 1)[1] if p.startswith('chemistry.') else p} = {v:.6g}"
                               for p, v in s["parameters"].items())
            lines.append(f"  scenario {s['scenario']} binds {', '.join(binding)}: {inputs}")
    for label, v in r["verification"].items():
        low, high = v["interval_95"]
        line = (f"  {label} design on {v['samples']} fresh samples: passes every limit in "
                f"{100 * v['probability']:.1f} % (95 % interval {100 * low:.1f}-{100 * high:.1f} %)")
        if "max_temperature_K" in v:
            q = v["max_temperature_K"]
            line += f"; hot spot P5/P50/P95 {q['P5']:.1f}/{q['P50']:.1f}/{q['P95']:.1f} K"
        if v["failed_samples"]:
            line += f"; {v['failed_samples']} samples failed (counted as not passing)"
        lines.append(line)
    g = r["guarantee"]
    if g.get("epsilon") is not None:
        lines.append(f"  scenario guarantee: passes with probability at least {g['pass_probability_at_least']:.3f} "
                     f"({g['scenarios']} scenarios, {g['decision_variables']} design variables, {g['note']})")
    else:
        lines.append(f"  scenario guarantee: {g['note']}")
    return lines


def cmd_screen(args) -> int:
    from tubewright.optimizer.screening.report import as_json, ranking_lines, write_files

    if args.workers < 1:
        raise option_error("--workers", f"must be at least 1, got {args.workers}")
    case = load_case(args.case, _parse_sets(args.set))
    progress = ProgressBar("samples", enabled=not args.json, delay=2.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # SALib's power-of-two warning: such counts are refused
        res = verbs.screen(case, args.method, args.samples, args.seed, args.policy, reoptimise=args.reoptimise,
                           batched=not args.no_batch, workers=args.workers, progress=progress,
                           max_hours=None if args.yes else args.max_hours, radial=args.radial)
    progress.close()
    answer = as_json(res)
    answer.update(case=case.source, title=case.title, caution=CAUTION)
    model = (f"two-dimensional ({case.radial.points} radial points; max_temperature_K is the largest 2-D "
             "temperature)" if args.radial else "one-dimensional")
    answer["model"] = model
    if args.out:
        answer["files"] = write_files(res, Path(args.out))
        if not res.interrupted and not args.reoptimise:
            from tubewright.optimizer.screening.envelope import plot_envelope, temperature_envelope
            from tubewright.optimizer.screening.uncertain import read_uncertain

            envelope = temperature_envelope(case, read_uncertain(case), res)
            if envelope is not None:
                answer["files"]["envelope_png"] = str(plot_envelope(case, envelope, Path(args.out) / "envelope.png"))
    if res.interrupted:  # the samples evaluated so far are kept (under --out), nothing is analysed
        done = int((res.outputs["status"] != "interrupted").sum())
        kept = f"kept in {answer['files']['outputs_csv']}" if args.out else "give --out DIR to keep them"
        print(f"interrupted: {done} of {len(res.outputs)} samples evaluated ({kept}); nothing analysed",
              file=sys.stderr)
        if args.json:
            _emit_json(finite(answer))
        return EXIT_INTERRUPTED
    if args.json:
        _emit_json(finite(answer))
        return EXIT_OK
    t = res.timings
    print(f"{case.title}\n  case file: {case.source}")
    print(f"  {res.method} screening of {len(res.factors)} factors, N = {res.n}, {t['evaluations']} evaluations "
          f"in {t['evaluate_s']:.1f} s ({t['evaluations_per_s']:.0f}/s), seed {res.seed}, failure policy "
          f"{res.policy}; {t['stopped_samples']} samples stopped"
          + (f", {t['handed_over']} simulated on their own" if t.get("handed_over") else ""))
    print(f"  model: {model}")
    for name, label in (("passes_hot_spot_limit", "the hot-spot limit"), ("passes_limits", "every limit")):
        if name not in res.probability_of_passing:
            continue
        prob = res.probability_of_passing[name]
        if prob is None:
            print(f"  probability of passing {label}: not estimated (Morris trajectories are not a random sample of "
                  "the inputs; use --method sobol)")
        else:
            print(f"  probability of passing {label}: {prob['estimate']:.3f} (95 % interval {prob['low_95']:.3f} "
                  f"to {prob['high_95']:.3f}, {prob['samples']} quasi-random samples)")
    print("\n".join(ranking_lines(res)))
    for name, fail in res.failures.items():
        print(f"\nfailed samples for {name}: {fail['count']} (first: {fail['samples'][0]['reason']})")
    for label, path in answer.get("files", {}).items():
        print(f"  wrote {label}: {path}")
    print(f"\nCAUTION: {CAUTION}")
    return EXIT_OK


def cmd_run(args) -> int:
    from tubewright.optimizer.study.runner import run_study
    from tubewright.optimizer.study.spec import load_study

    if args.dry_run:
        study = load_study(args.study, max_tasks=args.max_tasks)
        listing = {"study": str(study.path), "entries": len(study.tasks),
                   "tasks": len({t.task_id for t in study.tasks}),
                   "list": [{"position": t.position, "task_id": t.task_id, "name": t.name, "kind": t.kind}
                            for t in study.tasks]}
        if args.json:
            _emit_json(listing)
        else:
            for row in listing["list"]:
                print(f"  {row['position'] + 1:>5}  {row['task_id']}  {row['kind']:<9} {row['name']}")
            print(f"{listing['entries']} entries, {listing['tasks']} distinct tasks (dry run: nothing was run)")
        return EXIT_OK
    if args.workers < 1:
        raise option_error("--workers", f"must be at least 1, got {args.workers}")
    summary = run_study(args.study, args.out, args.workers, args.scheduler, args.retry_failed,
                        progress=not args.json, max_tasks=args.max_tasks)
    if args.json:
        _emit_json(summary)
    else:
        print(f"study {summary['study']}\n  results in {summary['folder']}\n  {summary['tasks']} tasks: "
              f"{summary['ran']} run now ({summary['done']} done, {summary['not_done']} not done), "
              f"{summary['tasks'] - summary['ran']} already recorded"
              + (f" ({summary['skipped_failed']} failed earlier: --retry-failed re-runs them)"
                 if summary["skipped_failed"] else "") + f"; {summary['seconds']:.1f} s")
        if summary["interrupted"]:
            print("  interrupted: the unfinished tasks are recorded as interrupted; run again to resume")
        print(f"\nCAUTION: {CAUTION}")
    if summary["interrupted"]:
        return EXIT_INTERRUPTED
    return EXIT_OK if summary["not_done"] == 0 else EXIT_NOT_OK


def _fit_answer(args, res, files) -> dict:
    return finite({"case": str(args.case), "data": str(args.data), **res.as_dict(), "files": files,
                   "caution": CAUTION})


def cmd_fit(args) -> int:
    from tubewright.optimizer.output.fitreport import fit_lines

    if args.design and not args.out:
        raise option_error("--design", "needs --out DIR (the design case is written there)")
    design = load_case(args.design) if args.design else None  # refused before the fit, not after it
    res = verbs.fit(args.case, args.data)
    files = {}
    if args.out:
        from tubewright.optimizer.output.fitreport import plot_fit, write_design_case, write_fitted_case

        out = Path(args.out)
        out.mkdir(parents=True, exist_ok=True)
        files["fit_json"] = str(out / "fit.json")
        if res.statistics is not None:
            files["fitted_case_toml"] = str(write_fitted_case(out / "fitted.toml", load_case(args.case), res))
            files["fit_png"] = str(plot_fit(res, out / "fit.png"))
        Path(files["fit_json"]).write_text(json.dumps(_fit_answer(args, res, files), indent=2) + "\n")
        if design is not None and res.statistics is not None:  # after fit.json: a refusal here loses nothing
            written = write_design_case(out / "design-fitted.toml", design, res)
            load_case(written)  # what was written must read back as a case
            files["design_case_toml"] = str(written)
            Path(files["fit_json"]).write_text(json.dumps(_fit_answer(args, res, files), indent=2) + "\n")
    if args.json:
        _emit_json(_fit_answer(args, res, files))
    else:
        print("\n".join(fit_lines(res)))
        for label, path in files.items():
            print(f"  wrote {label}: {path}")
        print(f"\nCAUTION: {CAUTION}")
    return EXIT_OK if res.status == Status.OK else EXIT_NOT_OK


def cmd_status(args) -> int:
    from tubewright.optimizer.study.report import status

    st = status(args.folder)
    if args.json:
        _emit_json(st)
        return EXIT_OK
    print(f"{st['title']}\n  study file: {st['study']}")
    print("  " + ", ".join(f"{k}: {v}" for k, v in sorted(st["counts"].items())))
    for t in st["tasks"]:
        if t["status"] != "done":
            print(f"  {t['status']:<8} {t['name']}: {t['reason'] or ''}")
    return EXIT_OK


def cmd_report(args) -> int:
    from tubewright.optimizer.study.report import report

    files = report(args.folder, args.out)
    if args.json:
        _emit_json(files)
    else:
        print(f"wrote {files['report_html']} and {files['tasks_csv']} ({files['tasks']} tasks)")
    return EXIT_OK


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
    sim.add_argument("--radial", action="store_true", help="also run the two-dimensional model ([radial] table) "
                     "and compare its centre-line hot spot with the 1-D one")
    sim.add_argument("--radial-points", type=int, metavar="N", help="interior radial points of the 2-D model "
                     "(default [radial] points)")
    sim.set_defaults(func=cmd_simulate)
    opt = sub.add_parser("optimize", help="optimise the free design quantities of a case ([design], [limits], [goal])")
    opt.add_argument("case", help="case file (TOML)")
    opt.add_argument("--json", action="store_true", help="print the result as one JSON object")
    opt.add_argument("--out", metavar="DIR", help="write optimal_profiles.csv/.png and optimum.json here")
    opt.add_argument("--set", action="append", metavar="KEY=VALUE", help="override a case key (repeatable)")
    opt.add_argument("--ideal", action="store_true", help="also solve the ideal bound (free temperature profile)")
    opt.add_argument("--starts", type=int, metavar="N", help="also solve from N random starting designs")
    opt.add_argument("--seed", type=int, default=0, help="seed of the random starts (default 0)")
    opt.add_argument("--pareto", type=int, metavar="N", help="also trace a cost-selectivity front of N points")
    opt.add_argument("--radial-tighten", action="store_true", help="when the 2-D model puts the optimum's hot spot "
                     "above the limit, re-solve with the 1-D limit tightened by the excess until it holds in 2-D")
    opt.add_argument("--scenarios", type=int, metavar="K", help="also a robust design: every limit in K scenarios "
                     "drawn from [uncertain] (seeded by --seed), verified on fresh samples")
    opt.add_argument("--verify-samples", type=int, metavar="M", help="fresh samples that verify the nominal and "
                     "the robust design (default 1000)")
    opt.set_defaults(func=cmd_optimize)
    scr = sub.add_parser("screen", help="rank the [uncertain] quantities of a case (Morris or Sobol)")
    scr.add_argument("case", help="case file (TOML) with an [uncertain] section")
    scr.add_argument("--method", choices=("morris", "sobol"), default="morris")
    scr.add_argument("--samples", type=int, default=None,
                     help="Morris trajectories or Sobol base samples (default "
                     + ", ".join(f"{n} for {m}" for m, n in DEFAULT_SAMPLES.items()) + ")")
    scr.add_argument("--seed", type=int, default=0, help="seed of the samples and bootstrap (default 0)")
    scr.add_argument("--policy", choices=POLICIES, default=POLICIES[0],
                     help="stopped samples: censor them at the values where they stopped, so that every output "
                     "is analysed (default), or strict: leave an output with any failed sample unanalysed; both "
                     "count and list the failed samples")
    scr.add_argument("--reoptimise", action="store_true", help="re-optimise the design for each sample")
    scr.add_argument("--no-batch", action="store_true", help="simulate one sample at a time")
    scr.add_argument("--radial", action="store_true", help="evaluate every sample with the two-dimensional model "
                     "([radial]): its hot spot is the 2-D one; batched like the 1-D model, about three times slower")
    scr.add_argument("--workers", type=int, default=min(2, os.cpu_count() or 1),
                     help="processes for the batches (default: up to 2, the cores of the reference machine)")
    scr.add_argument("--max-hours", type=float, default=verbs.DEFAULT_MAX_HOURS, metavar="H",
                     help=f"refuse a screening estimated to take longer (default {verbs.DEFAULT_MAX_HOURS:g} h)")
    scr.add_argument("--yes", action="store_true", help="run however long the screening is estimated to take")
    scr.add_argument("--json", action="store_true", help="print the result as one JSON object")
    scr.add_argument("--out", metavar="DIR", help="write samples, outputs, indices (CSV, Parquet) and plots here")
    scr.add_argument("--set", action="append", metavar="KEY=VALUE", help="override a case key (repeatable)")
    scr.set_defaults(func=cmd_screen)
    fit = sub.add_parser("fit", help="fit the [fit] kinetic parameters of a case to laboratory runs")
    fit.add_argument("case", help="case file (TOML) of the laboratory reactor, with a [fit] section")
    fit.add_argument("--data", required=True, metavar="FILE",
                     help='runs (CSV or Parquet): columns "KEY [UNIT]" of conditions and measured.* quantities')
    fit.add_argument("--json", action="store_true", help="print the result as one JSON object")
    fit.add_argument("--out", metavar="DIR", help="write fit.json, fit.png and fitted.toml here")
    fit.add_argument("--design", metavar="CASE", help="with --out: also write design-fitted.toml, this design case "
                     "with the fitted kinetics and their correlated uncertainty as [uncertain] (for screen)")
    fit.set_defaults(func=cmd_fit)
    run = sub.add_parser("run", help="run a study file unattended (resumes where it stopped)")
    run.add_argument("study", help="study file (TOML)")
    run.add_argument("--out", metavar="DIR", help="study folder (default: the study file's name + .results)")
    run.add_argument("--workers", type=int, default=min(2, os.cpu_count() or 1), help="local worker processes")
    run.add_argument("--scheduler", metavar="ADDRESS", help="run on a Dask scheduler, e.g. tcp://host:8786")
    run.add_argument("--retry-failed", action="store_true", help="run failed and timed-out tasks again")
    run.add_argument("--dry-run", action="store_true", help="list the tasks the study expands to; run nothing")
    run.add_argument("--max-tasks", type=int, default=MAX_TASKS, metavar="N",
                     help=f"refuse a study that expands to more tasks (default {MAX_TASKS})")
    run.add_argument("--json", action="store_true", help="print the run summary as JSON")
    run.set_defaults(func=cmd_run)
    stat = sub.add_parser("status", help="done, failed and pending tasks of a study folder")
    stat.add_argument("folder")
    stat.add_argument("--json", action="store_true")
    stat.set_defaults(func=cmd_status)
    rep = sub.add_parser("report", help="write a self-contained HTML report of a study folder")
    rep.add_argument("folder")
    rep.add_argument("--out", metavar="FILE", help="HTML file (default FOLDER/report.html)")
    rep.add_argument("--json", action="store_true")
    rep.set_defaults(func=cmd_report)
    return p


def main(argv=None) -> int:
    args = build_parser().parse_args(argv)
    try:
        if getattr(args, "json", False):  # stdout carries exactly one JSON document: stray output to stderr
            _JSON_STREAM["out"] = sys.stdout
            try:
                with contextlib.redirect_stdout(sys.stderr):
                    return args.func(args)
            finally:
                _JSON_STREAM["out"] = None
        return args.func(args)
    except CaseError as err:  # the one type of bad input
        print(f"error: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except ComputationFailed as err:
        print(f"failed ({err.code}): {err}", file=sys.stderr)
        return EXIT_NOT_OK
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except BrokenPipeError:  # the reader of stdout went away (e.g. `| head`): nothing more to say to it
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return EXIT_NOT_OK
    except Exception as err:  # a bug: one line and the saved traceback, never a wall of Python
        import tempfile
        import traceback

        path = Path(tempfile.gettempdir()) / f"tubewright-traceback-{os.getpid()}.txt"
        path.write_text(traceback.format_exc(), encoding="utf-8")
        print(f"internal error: {type(err).__name__}: {err} (traceback saved in {path}; please report it)",
              file=sys.stderr)
        return EXIT_BUG


if __name__ == "__main__":  # the installed command is optimizer.command.console (thread defaults, gc.freeze)
    sys.exit(main())
