"""The kinetics fit for people and files: the terminal table, the parity and residual plot, and the fitted
case (the fitting case by include, the fitted kinetic parameters on top)."""

from __future__ import annotations

from pathlib import Path

from tubewright.optimizer.output.canvas import new_figure
from tubewright.optimizer.output.casewriter import toml_text, toml_value


def _shown(name: str, value: float) -> str:
    if name.endswith(("activation_energy", ".heat")):
        return f"{value / 1000:.5g} kJ/mol"
    return f"{value:.5g}"


def fit_lines(out) -> list[str]:
    """The estimates with intervals, the correlation matrix, the fit statistics, warnings and excluded runs."""
    lines = [f"Kinetics fit: {out.status} ({out.reason}): {out.message}"]
    if out.excluded:
        lines.append(f"  runs left out ({len(out.excluded)}):")
        lines += [f"    row {e['row']}: {e['reason']}" for e in out.excluded]
    st = out.statistics
    if st is None:
        return lines
    t_fit = out.reference_temperature
    lines.append(f"  reference temperature of the Arrhenius laws: {t_fit:.2f} K ({t_fit - 273.15:.2f} degC)")
    width = max(len(n) for n in st.names) + 14
    level = f"{100 * st.level:g} % interval"
    lines.append(f"  {'parameter':<{width}}{'estimate':>16}{'std. error':>16}   {level}")
    for name, est, se, (lo, hi) in zip(st.names, st.estimates, st.standard_errors, st.intervals):
        label = (f"{name} ({'K' if '.adsorption.' in name else 'k'} at {t_fit:.1f} K)" if name.endswith("k_ref")
                 else name)
        lines.append(f"  {label:<{width}}{_shown(name, est):>16}{_shown(name, se):>16}   "
                     f"[{_shown(name, lo)}, {_shown(name, hi)}]")
    lines.append("  correlation:")
    for name, row in zip(st.names, st.correlation):
        lines.append(f"    {name:<{width - 2}}" + "".join(f"{c:>9.3f}" for c in row))
    lines.append(f"  {st.observations} measurements, {st.dof} degrees of freedom, weighted sum of squares "
                 f"{st.sum_of_squares:.4g}, residual variance {st.residual_variance:.4g} ({st.error_model} errors"
                 f"{': 1 expected' if st.error_model == 'stated' else ''})")
    if st.variance_test is not None:
        vt = st.variance_test
        lines.append(f"  chi-square test of the stated errors: p = {vt['p_value_too_large']:.3g} (too large), "
                     f"{vt['p_value_too_small']:.3g} (too small)")
    if out.lack_of_fit is not None:
        lf = out.lack_of_fit
        lines.append(f"  lack of fit against the replicates: F = {lf['F']:.3g} with ({lf['dof_lack_of_fit']}, "
                     f"{lf['dof_pure_error']}) degrees of freedom, p = {lf['p_value']:.3g}")
    lines.append(f"  identifiability: condition number of the scaled sensitivities "
                 f"{st.identifiability['condition_number']:.3g}")
    source = out.solver.get("statistics_from")
    if source is not None:
        mesh = out.solver.get("mesh_check_sigma")
        lines.append(f"  statistics from the {source}" + ("" if mesh is None else
                     f"; collocation mesh against the adaptive integrator at the estimate: within {mesh:.2g} sigma"))
    lines.append("  in the case's own terms: " + "; ".join(
        f"{r}: k_ref = {v['k_ref']:.6g} at {v['t_ref']:.2f} K, E_a = {v['activation_energy'] / 1000:.6g} kJ/mol"
        + "".join(f", K_{s} = {a['k_ref']:.6g}, heat of adsorption {a['heat'] / 1000:.6g} kJ/mol"
                  for s, a in v.get("adsorption", {}).items())
        for r, v in out.case_values.items()))
    for w in out.warnings:
        lines.append(f"  WARNING: {w}")
    return lines


def plot_fit(out, path: Path) -> Path:
    """One parity panel (fitted against measured) per measured quantity, and the weighted residuals per run."""
    quantities = sorted({o["quantity"] for o in out.residuals})
    fig = new_figure((4.2 * (len(quantities) + 1), 4.2))
    resid = fig.add_subplot(1, len(quantities) + 1, len(quantities) + 1)
    for k, q in enumerate(quantities):
        rows = [o for o in out.residuals if o["quantity"] == q]
        measured = [o["measured"] for o in rows]
        fitted = [o["fitted"] for o in rows]
        parity = fig.add_subplot(1, len(quantities) + 1, k + 1)
        parity.plot(measured, fitted, "o", color=f"C{k}")
        lo, hi = min(measured + fitted), max(measured + fitted)
        parity.plot([lo, hi], [lo, hi], "-", color="0.5", linewidth=1)
        parity.set_xlabel(f"measured {q} (SI)")
        parity.set_ylabel(f"fitted {q} (SI)")
        parity.set_title(f"parity: {q}", fontsize=9)
        resid.plot([o["row"] for o in rows], [(f - m) / o["sigma"] for f, m, o in zip(fitted, measured, rows)], "o",
                   color=f"C{k}", label=q)
    for level in (-2, 0, 2):
        resid.axhline(level, color="0.6", linewidth=1, linestyle="-" if level == 0 else "--")
    resid.set_xlabel("run (row of the data file)")
    resid.set_ylabel("(fitted - measured) / sigma")
    resid.set_title("weighted residuals (dashed: +-2)", fontsize=9)
    resid.legend(fontsize=8)
    fig.suptitle("Kinetics fit - screening estimate only; verify before use", fontsize=9)
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    return Path(path)


def write_fitted_case(path: Path, case, out) -> Path:
    """The fitting case by include with the fitted kinetic parameters on top (the case's own T_ref)."""
    reactions = {name: _reaction_table(case, name, v["k_ref"], v) for name, v in out.case_values.items()}
    st = out.statistics
    lines = ["# Kinetics fitted by tubewright fit: the fitting case by include, the fitted values on top.",
             "# Screening estimate only: verify with detailed models, hazard studies and licensed engineers.",
             "# To design with them: tubewright fit ... --design CASE writes that case with them and their spread.",
             f"# Fitted about {float(out.reference_temperature)!r} K; estimates, standard errors and correlation:"]
    for name, est, se in zip(st.names, st.estimates, st.standard_errors):
        lines.append(f"#   {name} = {float(est)!r} (standard error {float(se)!r})")
    for row in st.correlation:
        lines.append("#   " + " ".join(f"{c: .4f}" for c in row))
    lines += [f"include = {toml_value(str(Path(case.source).resolve()))}",
              f"title = {toml_value('Fitted: ' + (case.title or Path(case.source).stem))}", ""]
    text = "\n".join(lines) + "\n" + toml_text({"chemistry": {"reactions": reactions}})
    Path(path).write_text(text, encoding="utf-8")
    return Path(path)


def write_design_case(path: Path, design, out) -> Path:
    """A design case by include with the fitted kinetics on top and their uncertainty as a correlated
    [uncertain] set (multivariate normal of k(T_fit) and E_a, optimizer.screening.uncertain), so that
    ``screen`` and ``optimize`` use what the data say. The design case must have the fitted reactions."""
    from tubewright.models.backend import NUMPY
    from tubewright.models.errors import CaseError
    from tubewright.models.reactions import arrhenius

    names = {rx.name for rx in design.reactions}
    missing = sorted(set(out.case_values) - names)
    if missing:
        raise CaseError(design.source, "chemistry.reactions", f"has no reaction {', '.join(missing)} (fitted in the "
                        "laboratory case): the design case for --design needs the same reactions")
    st = out.statistics

    def at_design(value, energy, v, rx):  # a constant at the lab case's T_ref, carried to the design case's
        return arrhenius(NUMPY, value, energy, v["t_ref"], rx.t_ref)

    reactions = {}
    for name, v in out.case_values.items():
        rx = next(r for r in design.reactions if r.name == name)
        fitted_terms = v.get("adsorption", {})
        if fitted_terms and {a.species for a in rx.adsorption} != set(fitted_terms):
            raise CaseError(design.source, f"chemistry.reactions.{name}.adsorption", "must name the same adsorption "
                            f"species as the laboratory case ({', '.join(fitted_terms)}) to take its fitted kinetics")
        terms = {s: {**a, "k_ref": float(at_design(a["k_ref"], a["heat"], v, rx))} for s, a in fitted_terms.items()}
        k_ref = at_design(v["k_ref"], v["activation_energy"], v, rx)
        reactions[name] = _reaction_table(design, name, k_ref, {**v, "adsorption": terms})
    paths = [f"chemistry.reactions.{n}" for n in st.names]
    block = {"distribution": "multivariate_normal", "parameters": paths,
             "mean": [float(x) for x in st.estimates], "covariance": [[float(c) for c in row] for row in st.covariance]}
    if any(p.endswith(".k_ref") for p in paths):
        block["reference_temperature"] = f"{float(out.reference_temperature)!r} K"
    lines = ["# The design case by include with the kinetics fitted by tubewright fit on top, and their",
             "# uncertainty (multivariate normal of the fitted parameters, correlations included) in [uncertain].",
             "# Screening estimate only: verify with detailed models, hazard studies and licensed engineers.",
             f"include = {toml_value(str(Path(design.source).resolve()))}",
             f"title = {toml_value('Fitted kinetics: ' + (design.title or Path(design.source).stem))}", ""]
    text = "\n".join(lines) + "\n" + toml_text({"chemistry": {"reactions": reactions},
                                                 "uncertain": {"fitted_kinetics": block}})
    Path(path).write_text(text, encoding="utf-8")
    return Path(path)


def _reaction_table(case, name: str, k_ref: float, fitted: dict) -> dict:
    """k_ref (in the unit of the fitted orders), E_a, the orders and the adsorption terms of one fitted reaction,
    as case values."""
    from tubewright.models.reactions import adsorption_units, rate_units  # the units a case file reads

    rx = next(r for r in case.reactions if r.name == name)
    orders = {**rx.orders, **fitted.get("orders", {})}
    table = {"k_ref": f"{float(k_ref)!r} {rate_units(rx.basis, rx.driving, sum(orders.values()))}",
             "activation_energy": f"{float(fitted['activation_energy'])!r} J/mol"}
    if orders != dict(rx.orders):
        table["orders"] = {s: float(o) for s, o in orders.items()}
    fitted_terms = fitted.get("adsorption", {})
    if fitted_terms:  # the whole list, as the case reads it (an included list is replaced, not merged)
        table["adsorption"] = [{"species": a.species, "k_ref": f"{float(fitted_terms[a.species]['k_ref'])!r} "
                                                             f"{adsorption_units(rx.driving, a.exponent)}",
                                "heat": f"{float(fitted_terms[a.species]['heat'])!r} J/mol", "exponent": a.exponent}
                               for a in rx.adsorption]
    return table
