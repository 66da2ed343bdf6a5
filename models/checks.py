"""Validity and safety checks reported with every simulation.

Each check returns Findings; level "warning" means the ideal plug-flow screening model or the design is
questionable there, "info" reports a figure that passed. Criteria and thresholds are named in each function.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from . import correlations as corr
from .backend import NUMPY
from .figures import correlation_arguments, critical_reaction, layout_figures, runaway_group
from .limits import LIMITS
from .summary import reaction_heats
from .thermo import R_GAS

RUNAWAY_SENSITIVITY_LIMIT = 5.0  # our threshold on the normalised sensitivity (see runaway_sensitivity)


@dataclass(frozen=True)
class Finding:
    code: str
    level: str  # "info" | "warning"
    message: str
    value: float | None = None
    limit: float | None = None

    def as_dict(self) -> dict:
        return {"code": self.code, "level": self.level, "message": self.message, "value": self.value,
                "limit": self.limit}


def _flux(case):
    return sum(f * s.molar_mass for f, s in zip(case.feed.molar_flows, case.species)) / (
        case.tube.count * case.tube.area)


def reynolds(case) -> float:
    """Tube Reynolds number G d/mu (empty tube) or particle Reynolds number G d_p/mu (packed bed)."""
    d = case.bed.particle_diameter if case.bed is not None else case.tube.inner_diameter
    return _flux(case) * d / case.feed.viscosity


def flow_regime(case) -> list[Finding]:
    re = reynolds(case)
    if case.bed is not None:
        return [Finding("flow_regime", "info", f"particle Reynolds number {re:.4g}", re)]
    if re < 2300:
        return [Finding("flow_regime", "warning", f"laminar flow (Re = {re:.4g} < 2300): radial velocity and "
                        "temperature profiles are not flat, so plug flow overstates conversion control", re, 2300)]
    if re < 1.0e4:
        return [Finding("flow_regime", "warning", f"transitional flow (Re = {re:.4g}); correlations are "
                        "uncertain between 2300 and 10^4", re, 1.0e4)]
    return [Finding("flow_regime", "info", f"turbulent flow, Re = {re:.4g}", re)]


def tube_to_particle(case) -> list[Finding]:
    """d_t/d_p >= 10 keeps wall channelling and the voidage rise at the wall small (common practice)."""
    if case.bed is None:
        return []
    ratio = case.tube.inner_diameter / case.bed.particle_diameter
    level = "warning" if ratio < 10 else "info"
    return [Finding("tube_to_particle", level, f"tube-to-particle diameter ratio {ratio:.3g} (want >= 10)",
                    ratio, 10.0)]


def axial_dispersion(case, result) -> list[Finding]:
    """Mears-type criterion for neglecting axial dispersion (Mears, Chem. Eng. Sci. 26, 1971, 1361-1366,
    as commonly restated): L/d > (20 n / Pe) ln(1/(1 - X)), with d the particle (bed) or tube diameter,
    n the reaction order of the key reactant and Pe = u d / D_ax. Pe = 2 for gases in packed beds
    (Re_p > 10; from memory, common practice); for empty tubes D_ax from Wen and Fan (1975, from memory):
    D_ax/(u d) = 3e7/Re^2.1 + 1.35/Re^0.125 (turbulent) or Taylor-Aris D_m + u^2 d^2/(192 D_m) (laminar)."""
    x = result.summary["conversion"]
    if not 0.0 < x < 1.0:
        return []
    order = max([rx.orders.get(case.key_reactant, 0.0) for rx in case.reactions] + [1.0])
    length = result.summary["length_m"]
    if case.bed is not None:
        d, pe = case.bed.particle_diameter, 2.0
    else:
        d = case.tube.inner_diameter
        re = reynolds(case)
        if re >= 2300:
            pe = 1.0 / (3.0e7 / re**2.1 + 1.35 / re**0.125)
        elif case.feed.diffusivity is not None:
            u = length / max(result.summary["residence_time_s"], 1e-30)
            dm = case.feed.diffusivity
            pe = u * d / (dm + u**2 * d**2 / (192.0 * dm))
        else:
            return [Finding("axial_dispersion", "warning", "laminar flow and no feed.diffusivity: axial "
                            "dispersion not assessed")]
    need = 20.0 * order / pe * math.log(1.0 / (1.0 - x))
    have = length / d
    level = "warning" if have < need else "info"
    return [Finding("axial_dispersion", level, f"L/d = {have:.4g}, Mears-type minimum {need:.4g}", have, need)]


def radial_gradient(case, result) -> list[Finding]:
    """Radial temperature non-uniformity at the hot spot, for a uniformly heated cylinder (analytic):
    dT_r = q''' R^2 / (4 lambda_er). The one-dimensional model holds while the rate varies little over the
    radius, E dT_r / (R T^2) < 0.05 (linearised Arrhenius; in the spirit of Mears, Ind. Eng. Chem. Process
    Des. Dev. 10, 1971, 541). lambda_er = lambda_f (5 + 0.1 Re_p Pr) for packed beds (from memory, a
    common-practice estimate); empty tubes are checked by their flow regime instead."""
    mode = case.coolant.kind
    if case.bed is None or case.feed.thermal_conductivity is None or not (mode.exchanges_heat or
                                                                         mode.holds_temperature):
        return []
    if not result.ok:  # a runaway's heat release at the ceiling would give a meaningless number
        return [Finding("radial_gradient", "warning", f"not estimated: the simulation stopped ({result.reason})")]
    cols = result.columns
    q = reaction_heats(case, cols).sum(axis=0)
    i = int(np.argmax(q))
    T = float(cols["T_K"][i])
    lam_f = case.feed.thermal_conductivity
    cp_mass = _cp_mass(case, T)
    pr = cp_mass * case.feed.viscosity / lam_f
    lam_er = lam_f * (5.0 + 0.1 * reynolds(case) * pr)
    radius = case.tube.inner_diameter / 2.0
    dT = float(q[i]) * radius**2 / (4.0 * lam_er)
    e_a = max(rx.activation_energy for rx in case.reactions)
    group = e_a * dT / (R_GAS * T**2)
    level = "warning" if group > 0.05 else "info"
    return [Finding("radial_gradient", level, f"estimated centre-to-wall temperature difference {dT:.3g} K at "
                    f"z = {cols['z_m'][i]:.3g} m; E dT/(R T^2) = {group:.3g} (limit 0.05)", group, 0.05)]


def _cp_mass(case, T):
    f = np.array(case.feed.molar_flows)
    cp = sum(fi * s.cp(NUMPY, T) for fi, s in zip(f, case.species))
    return float(cp / sum(fi * s.molar_mass for fi, s in zip(f, case.species)))


def limit_findings(case, result) -> list[Finding]:
    """Every limit of [limits] (models.limits) against its figure in the summary: a warning when it is
    violated, or when a temperature limit is kept by less than 10 K (common practice for a screening
    margin); info otherwise."""
    out = []
    for name, bound in case.limits.items():
        row = LIMITS[name]
        value = result.summary.get(row.figure)
        if value is None:
            continue
        word = "at most" if row.kind == "max" else "at least"
        unit = "" if row.unit == "-" else f" {row.unit}"
        if not row.passes(value, bound):
            level, verdict = "warning", "violates"
        elif row.unit == "K" and abs(bound - value) < 10.0:
            level, verdict = "warning", "keeps, by less than 10 K,"
        else:
            level, verdict = "info", "keeps"
        out.append(Finding(f"limit_{name}", level, f"{row.description}: {value:.6g}{unit} {verdict} the limit "
                           f"({word} {bound:.6g}{unit})", float(value), float(bound)))
    return out


SENSITIVITY_STEP = 0.1  # K: small against the distance to the runaway boundary of any design worth judging
BRANCH_AGREEMENT = 0.5  # one-sided slopes within 50 % of each other: both steps stayed on one branch


def runaway_sensitivity(case, result, resimulate, step: float = SENSITIVITY_STEP) -> list[Finding]:
    """Normalised sensitivity of the hot-spot temperature T* to a parameter phi (Morbidelli and Varma,
    AIChE J. 28, 1982, 705-713): s(T*; phi) = (phi / T*) dT*/dphi, a local derivative by the central
    difference of two re-simulations at phi +- step (0.1 K, integrated to rtol 1e-8 so that the hot spot
    carries ~1e-5 K of error). Their runaway boundary is where s peaks as phi varies; as a single-point
    screen we flag s > 5 (our threshold: a reactor far from runaway has s near 1 or below, as T* follows
    the coolant).

    Branch check: the forward and backward slopes must agree within 50 %. When the raised run jumps (or
    stops at the temperature ceiling) the design lies within one step of the runaway boundary, and the
    figure is reported as "beyond the runaway boundary" instead of a secant across the jump; when the
    lowered run falls back, the design is already on the runaway branch. ``resimulate(case,
    coolant_guess=...)`` simulates a moved case without checks."""
    out = []
    tstar = result.summary["max_temperature_K"]
    targets = []
    if case.coolant.kind.exchanges_heat:
        targets.append(("coolant temperature", "coolant", case.coolant.temperature))
    if not case.coolant.kind.holds_temperature:
        targets.append(("feed temperature", "feed", case.feed.temperature))
    tight = replace(case.numerics, rtol=min(case.numerics.rtol, 1e-8))
    guess = float(result.columns["Tc_K"][0])
    centre = None  # the unmoved case at tight tolerances: one run serves every parameter
    for label, which, phi in targets:
        hot = {}
        for sign in (0, +1, -1):
            if sign == 0 and centre is not None:
                hot[0] = centre
                continue
            value = phi + sign * step
            moved = replace(case, numerics=tight)
            if which == "coolant":
                moved = replace(moved, coolant=replace(case.coolant, temperature=value))
            else:
                moved = replace(moved, feed=replace(case.feed, temperature=value))
            r = resimulate(moved, coolant_guess=guess)
            hot[sign] = r.summary["max_temperature_K"] if r.ok else math.inf
        centre = hot[0]
        code = f"runaway_sensitivity_{which}"
        if not math.isfinite(hot[0]):
            out.append(Finding(code, "warning", "the case does not reach the outlet at tight tolerances: "
                               "runaway-sensitive"))
            continue
        up, down = hot[+1] - hot[0], hot[0] - hot[-1]
        if not (math.isfinite(up) and math.isfinite(down)) or abs(up - down) > BRANCH_AGREEMENT * max(
                abs(up), abs(down)) + 1e-4:
            if not math.isfinite(up) or up > down:
                what = (f"raising the {label} by {step:g} K " + ("stops the simulation at the temperature ceiling"
                        if not math.isfinite(up) else f"makes the hot spot jump by {up:.3g} K (against "
                        f"{down:.3g} K for lowering it)") + ": the design is within "
                        f"{step:g} K of the runaway boundary, and the raised run lies beyond it")
            else:
                what = (f"lowering the {label} by {step:g} K drops the hot spot by {down:.3g} K (against "
                        f"{up:.3g} K for raising it): the design lies beyond the runaway boundary, on the runaway "
                        "branch")
            out.append(Finding(code, "warning", f"beyond the runaway boundary: {what}", math.inf,
                               RUNAWAY_SENSITIVITY_LIMIT))
            continue
        s = phi / tstar * (hot[+1] - hot[-1]) / (2.0 * step)
        level = "warning" if s > RUNAWAY_SENSITIVITY_LIMIT else "info"
        out.append(Finding(code, level, f"normalised hot-spot sensitivity to {label} s = {s:.3g} (local "
                           f"derivative, +-{step:g} K; flag above {RUNAWAY_SENSITIVITY_LIMIT:g})", s,
                           RUNAWAY_SENSITIVITY_LIMIT))
    return out


def runaway_criterion(case, result) -> list[Finding]:
    """The runaway criterion of models.figures.runaway_group (the one every verb uses): the largest local
    (T - Tc) E / (R Tc^2) along the tube against the Semenov-type bound 1 (van Welsenaere and Froment,
    1970), with E of the critical reaction."""
    if not case.coolant.kind.exchanges_heat:
        return []
    cols = result.columns
    j = critical_reaction(case)
    group = runaway_group(case, np.asarray(cols["T_K"]), np.asarray(cols["Tc_K"]), j)
    i = int(np.argmax(group))
    tc = float(cols["Tc_K"][i])
    rise = float(cols["T_K"][i] - tc)
    bound = R_GAS * tc**2 / case.reactions[j].activation_energy
    level = "warning" if group[i] > 1.0 else "info"
    return [Finding("runaway_criterion", level, f"fluid {rise:.1f} K above the local coolant at z = "
                    f"{cols['z_m'][i]:.3g} m; Semenov-type bound R Tc^2/E = {bound:.1f} K (E of reaction "
                    f'"{case.reactions[j].name}"): (T - Tc) E/(R Tc^2) = {group[i]:.3g} (limit 1)',
                    float(group[i]), 1.0)]


def correlation_ranges(case, result) -> list[Finding]:
    """Validity ranges of the correlations and cp polynomials at the visited states, as warnings. The
    design-dependent arguments come from models.figures.correlation_arguments, the same list that the
    limit ``correlations_in_range`` bounds."""
    msgs = []
    for fn, arg, x in correlation_arguments(case, layout_figures(case)):
        msgs += corr.out_of_range(fn, **{arg: (x, x)})
    if case.bed is not None:
        msgs += corr.out_of_range(corr.ergun_pressure_gradient, voidage=(case.bed.voidage,) * 2)
    t = result.columns["T_K"]
    for sp in case.species:
        lo, hi = sp.cp_model.t_min, sp.cp_model.t_max
        if t.min() < lo or t.max() > hi:
            msgs.append(f"cp of {sp.name}: temperatures {t.min():.1f}..{t.max():.1f} K leave its range "
                        f"{lo:.1f}..{hi:.1f} K")
    return [Finding("correlation_range", "warning", m) for m in msgs]


def run_checks(case, result, resimulate) -> list[Finding]:
    """Every check of a simulation result. ``resimulate(case, coolant_guess=None)`` simulates a moved case
    without checks (the runaway sensitivities need it; passed in so that the checks need not import the
    simulator that calls them)."""
    out = []
    for check in (flow_regime, tube_to_particle):
        out += check(case)
    for check in (axial_dispersion, radial_gradient, limit_findings, correlation_ranges):
        out += check(case, result)
    if result.ok:
        out += runaway_sensitivity(case, result, resimulate)
        out += runaway_criterion(case, result)
    return out
