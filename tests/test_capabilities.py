"""The capability tables (coolant modes, limits, goals) walked row by row: each row is documented in
docs/case-reference.md and handled by simulate, optimize and screen. A new row without its documentation
or without its handling fails here. The comparisons are between the project's own numpy and Pyomo paths
(regression of one definition against itself), except where a source is named."""

from __future__ import annotations

import numpy as np
import pytest
from builders import DEMO, ROOT, liquid_case, make
from tubewright.models import load_case, simulate
from tubewright.models.coolant_modes import COOLANT_MODES
from tubewright.models.limits import LIMITS
from tubewright.optimizer.screening.evaluation import evaluate
from tubewright.optimizer.screening.uncertain import Uncertain

pytest.importorskip("cyipopt")

from tubewright.optimizer.design.goals import GOALS  # noqa: E402
from tubewright.optimizer.design.optimise import optimise  # noqa: E402
from tubewright.optimizer.design.problem import DesignProblem, design_case  # noqa: E402

DOCS = (ROOT / "docs" / "case-reference.md").read_text()

# A generous bound for every limit (invented test values): wide enough to be kept by the demo coil.
EXAMPLE_BOUNDS = {
    "production_rate": "0.001 mol/s", "min_conversion": 0.1, "min_selectivity": 0.1, "max_temperature": "400 K",
    "max_temperature_difference": "80 K", "max_pressure_drop": "5 bar", "min_velocity": "0.01 m/s",
    "max_velocity": "10 m/s", "min_reynolds": 10.0, "max_reynolds": 1e6, "min_length_to_diameter": 10.0,
    "max_length_to_diameter": 1e5, "max_coolant_outlet_temperature": "360 K", "runaway_margin": 10.0,
    "min_tube_to_particle_ratio": 5.0, "correlations_in_range": True,
}


def test_every_row_is_documented():
    for name in COOLANT_MODES:
        assert f'`"{name}"`' in DOCS, f"coolant mode {name} is missing from docs/case-reference.md"
    for name in LIMITS:
        assert f"`{name}`" in DOCS, f"limit {name} is missing from docs/case-reference.md"
    for name in GOALS:
        assert f'`"{name}"`' in DOCS, f"goal {name} is missing from docs/case-reference.md"


def test_every_limit_has_an_example_bound_here():
    assert set(EXAMPLE_BOUNDS) == set(LIMITS), "give the new limit a bound in EXAMPLE_BOUNDS"


def _every_limit_of(name):
    """EXAMPLE_BOUNDS less the limits that cannot apply to an empty tube (the coil has no bed)."""
    return {k: v for k, v in EXAMPLE_BOUNDS.items() if not LIMITS[k].needs_bed}


def _coil_with_every_limit(name="coil.toml"):
    return load_case(DEMO / name, {"limits": _every_limit_of(name)})


def test_simulate_reports_every_limit_by_its_figure():
    case = _coil_with_every_limit()
    result = simulate(case)
    found = {f.code: f for f in result.findings}
    assert set(LIMITS) - set(case.limits) == {k for k, row in LIMITS.items() if row.needs_bed}
    for name in case.limits:
        row = LIMITS[name]
        finding = found[f"limit_{name}"]
        assert finding.value == pytest.approx(result.summary[row.figure], rel=1e-12)
        assert finding.limit == pytest.approx(case.limits[name])
        assert finding.level == "info", finding.message  # every example bound is kept by the demo coil


def test_optimize_builds_every_limit_with_the_simulated_figure():
    """At the start point the collocation model is initialised from the simulation of the same design, so
    each limit's Pyomo figure must equal the simulated figure (pointwise maxima within the grid
    difference: the collocation points are a subset of the simulation's points)."""
    case = load_case(DEMO / "coil-design.toml", {"limits": _every_limit_of("coil-design.toml")})
    problem = DesignProblem(case).build()
    assert set(problem.limit_components) == set(case.limits)
    sim = simulate(design_case(case, problem.start_values()), checks=False)
    for name in case.limits:
        row = LIMITS[name]
        value = problem.limit_value(name)
        assert value == pytest.approx(sim.summary[row.figure], rel=2e-3, abs=1e-9), name


def _relative_items(case, path="heat_transfer.multiplier"):
    return [Uncertain("U", path, "uniform", {"min": 0.9, "max": 1.1}, True, None, 1.0)]


@pytest.mark.parametrize("file", ["coil.toml", "oxidation.toml"])
def test_screen_evaluates_every_limit_batched_as_one_at_a_time(file):
    limits = {k: v for k, v in EXAMPLE_BOUNDS.items()
              if (file == "coil.toml" and not LIMITS[k].needs_bed) or (file != "coil.toml" and not
                                                                        LIMITS[k].needs_coolant_flow)}
    if file == "oxidation.toml":
        limits.update(max_temperature="700 K", min_reynolds=1.0, max_pressure_drop="1 bar",
                      max_temperature_difference="150 K", production_rate="1 mol/s",
                      correlations_in_range=False)  # the demo's Re_p (~100) is below Leva's range
    case = load_case(DEMO / file, {"limits": limits})
    items = _relative_items(case)
    ux = np.array([[0.1], [0.5], [0.9]])
    single = evaluate(case, items, ux, batched=False)
    batched = evaluate(case, items, ux, batched=True)
    for name in case.limits:
        figure = LIMITS[name].figure
        assert np.all(np.isfinite(single.outputs[figure])), name
        # the batch locates pointwise maxima on its own grid: agreement to the integrator tolerance
        assert np.allclose(batched.outputs[figure], single.outputs[figure], rtol=2e-4), name
    assert np.array_equal(single.outputs["passes_limits"], batched.outputs["passes_limits"])
    assert np.all(single.outputs["passes_limits"] == 1.0)


def _mode_case(mode: str, **more):
    keys = {"adiabatic": {}, "isothermal": {}, "constant": {"temperature": "340 K"},
            "boiling_water": {"pressure": "0.3 bar"},
            "cocurrent": {"temperature": "330 K", "mass_flow": "0.2 kg/s", "cp": "4180 J/kg/K"},
            "countercurrent": {"temperature": "330 K", "mass_flow": "0.2 kg/s", "cp": "4180 J/kg/K"}}[mode]
    data = liquid_case(**{"coolant": {"mode": mode, **keys}, **more})
    if COOLANT_MODES[mode].exchanges_heat:
        data["heat_transfer"] = {"overall": "300 W/m^2/K"}
    return make(data)


def test_every_coolant_mode_has_its_parameters_listed():
    assert set(COOLANT_MODES) == {"adiabatic", "isothermal", "constant", "boiling_water", "cocurrent",
                                  "countercurrent"}, "add the new mode to _mode_case"


@pytest.mark.parametrize("mode", list(COOLANT_MODES))
def test_every_coolant_mode_simulates_screens_and_optimises(mode):
    case = _mode_case(mode)
    result = simulate(case)
    assert result.ok, result.reason
    row = COOLANT_MODES[mode]
    if row.holds_temperature:
        assert np.ptp(result.columns["T_K"]) < 1e-9
    if row.has_coolant_flow:
        inlet_end = -1 if row.enters_at == "outlet" else 0
        assert result.columns["Tc_K"][inlet_end] == pytest.approx(case.coolant.temperature, abs=1e-4)
    # screening: batched where the table says so, and the same answer one at a time
    items = _relative_items(case, "chemistry.reactions.r1.k_ref")
    ux = np.array([[0.2], [0.8]])
    single = evaluate(case, items, ux, batched=False)
    batched = evaluate(case, items, ux, batched=True)
    assert np.allclose(batched.outputs["conversion"], single.outputs["conversion"], rtol=1e-5)
    # optimisation: the smallest tube for 50 % conversion, verified by the integrator
    design = _mode_case(mode, **{"design": {"length": {"min": "0.5 m", "max": "100 m"}},
                                 "limits": {"min_conversion": 0.5}, "goal": {"objective": "min_volume"},
                                 "numerics.finite_elements": 20})
    res = optimise(design)
    assert res.ok, res.reason
    assert res.verification["max_relative_deviation"] < res.verification["tolerance"]


@pytest.mark.parametrize("goal", list(GOALS))
def test_every_goal_is_the_same_function_in_the_model_and_on_a_simulation(goal):
    import pyomo.environ as pyo

    case = load_case(DEMO / "oxidation-design.toml")
    problem = DesignProblem(case, goal=goal).build()
    start = design_case(case, problem.start_values())
    sim = simulate(start, checks=False)
    assert GOALS[goal].sense == ("min" if problem.model.goal.sense == pyo.minimize else "max")
    assert pyo.value(problem.model.goal) == pytest.approx(problem.goal_of(start, sim.summary), rel=1e-3)


def test_figures_mean_what_the_reference_says():
    """Each figure recomputed by hand from the profile columns and the case, as docs/case-reference.md
    defines it (definitions of this project; R from CODATA 2018)."""
    case = _coil_with_every_limit()
    s = simulate(case, checks=False).summary
    cols = simulate(case, checks=False).columns
    T, Tc = np.asarray(cols["T_K"]), np.asarray(cols["Tc_K"])
    assert s["max_temperature_K"] == pytest.approx(T.max(), rel=1e-9)
    assert s["max_temperature_difference_K"] == pytest.approx((T - Tc).max(), rel=1e-3)
    h_f = {sp.name: sp.heat_of_formation for sp in case.species}  # Hess's law at 298.15 K for the sign
    exothermic = [rx for rx in case.reactions if sum(n * h_f[s] for s, n in rx.nu.items()) < 0]
    assert exothermic
    e_a = max(rx.activation_energy for rx in exothermic)
    assert s["max_runaway_group"] == pytest.approx(((T - Tc) * e_a / (8.314462618 * Tc**2)).max(), rel=1e-3)
    assert s["coolant_outlet_temperature_K"] == pytest.approx(Tc[0], rel=1e-9)  # counter-current: leaves at z = 0
    mass_flow = sum(f * sp.molar_mass for f, sp in zip(case.feed.molar_flows, case.species))
    area = np.pi * case.tube.inner_diameter**2 / 4
    assert s["inlet_velocity_m_s"] == pytest.approx(mass_flow / case.feed.density / area, rel=1e-12)
    assert s["reynolds"] == pytest.approx(mass_flow / area * case.tube.inner_diameter / case.feed.viscosity)
    assert s["length_to_diameter"] == pytest.approx(case.tube.length / case.tube.inner_diameter)
    assert s["pressure_drop_Pa"] == pytest.approx(cols["P_Pa"][0] - cols["P_Pa"][-1], rel=1e-9)
