"""Design optimisation against analytic optima, multipliers against derivatives, failure reports."""

import math

import numpy as np
import pytest

pytest.importorskip("cyipopt")

from builders import liquid_case, logsdon_biegler_data, make, min_volume_case  # noqa: E402
from tubewright.models import CaseError  # noqa: E402
from tubewright.optimizer.design.optimise import optimise  # noqa: E402
from tubewright.optimizer.design.problem import DesignProblem  # noqa: E402
from tubewright.optimizer.design.spec import read_design  # noqa: E402

K1 = 0.01  # 1/s, the first-order rate constant of liquid_case at 350 K


def _vdot(case):
    return sum(f * s.molar_mass for f, s in zip(case.feed.molar_flows, case.species)) / case.feed.density


def test_min_volume_first_order_isothermal():
    # Analytic: V = (v0/k) ln(1/(1 - X)) is the smallest plug-flow volume for conversion X (Levenspiel 1999).
    case = min_volume_case()
    res = optimise(case)
    assert res.ok, res.reason
    v_analytic = _vdot(case) / K1 * math.log(10.0)
    assert res.objective == pytest.approx(v_analytic, rel=1e-5)
    assert res.design["length_m"] == pytest.approx(v_analytic / case.tube.area, rel=1e-5)
    (row,) = res.limits
    assert row.binding
    # Multiplier: dV*/dX = v0 / (k (1 - X)) (derivative of the analytic optimum).
    assert row.multiplier == pytest.approx(_vdot(case) / (K1 * 0.1), rel=1e-4)
    assert res.verification["max_relative_deviation"] < 1e-5


def test_the_optimum_profiles_are_handed_over_before_the_checks():
    # the command line draws the figure beside the checks: the same simulation and limits, findings to come
    seen = []
    res = optimise(min_volume_case(), on_profiles=lambda *a: seen.append((*a, len(a[1].findings))))
    assert res.ok, res.reason
    ((design, simulation, limits, findings_then),) = seen
    assert simulation is res.simulation and limits is res.limits
    assert findings_then == 0 and res.simulation.findings
    assert design.tube.length == pytest.approx(res.design["length_m"], rel=1e-12)


def test_consecutive_reactions_optimal_length():
    # Analytic, A -> B -> C first order at constant T: tau* = ln(k2/k1)/(k2 - k1) and the maximum yield
    # Y_B = (k1/k2)^(k2/(k2 - k1)) (Levenspiel 1999, Ch. 8).
    k2 = 0.004
    data = liquid_case(**{
        "chemistry.product": "D",
        "chemistry.species.E": {"molar_mass": "100 g/mol", "cp": "150 J/mol/K", "heat_of_formation": "-250 kJ/mol"},
        "chemistry.reactions.r2": {"equation": "D -> E", "orders": {"D": 1}, "k_ref": f"{k2} 1/s",
                                   "activation_energy": "50 kJ/mol", "t_ref": "350 K"},
        "design": {"length": {"min": "1 m", "max": "100 m"}},
        "goal": {"objective": "max_yield"},
        "numerics.finite_elements": 40,
    })
    case = make(data)
    res = optimise(case)
    assert res.ok, res.reason
    tau = math.log(k2 / K1) / (k2 - K1)
    assert res.design["length_m"] == pytest.approx(tau * _vdot(case) / case.tube.area, rel=1e-4)
    assert res.objective == pytest.approx((K1 / k2) ** (k2 / (k2 - K1)), rel=1e-6)


def test_resolve_after_parameter_change_needs_no_compilation():
    problem = DesignProblem(min_volume_case()).build()
    first = problem.solve_nlp()
    compile_time = problem.nlp.times["compile_s"]
    problem.model.limit_value["min_conversion"] = 0.95
    second = problem.solve_nlp(warm_start=True)
    assert problem.nlp.times["compile_s"] == compile_time
    assert second.objective / first.objective == pytest.approx(math.log(20) / math.log(10), rel=1e-5)


def test_demo_multiplier_against_finite_difference(demo_dir):
    # The production-rate multiplier is d(cost)/d(duty): compare with re-solving at duty + 1 %.
    from tubewright.models import load_case

    case = load_case(demo_dir / "oxidation-design.toml", {"design.round_tube_count": False})
    problem = DesignProblem(case).build()
    base = problem.solve_nlp()
    assert base.success
    (row,) = [r for r in problem.limit_rows(base) if r.name == "production_rate"]
    duty = problem.spec.limits["production_rate"]
    problem.model.limit_value["production_rate"] = duty * 1.01
    moved = problem.solve_nlp(warm_start=True)
    assert moved.success
    fd = (moved.objective - base.objective) / (0.01 * duty)
    assert row.binding and row.multiplier == pytest.approx(fd, rel=0.03)


def test_a_runaway_start_is_moved_to_the_cooler_bounds(demo_dir):
    # With the lumped wall data of the 2-D model the demo's default start runs away in simulation (hot spot at
    # the ceiling); IPOPT started there ended in "restoration failed". The optimiser starts instead from the
    # coolant at its lower bound and reaches the optimum found from that start given by hand.
    from tubewright.models import load_case
    from tubewright.models.outcomes import Reason
    from tubewright.models.simulator import simulate
    from tubewright.optimizer.design.problem import design_case

    overrides = {"heat_transfer.inside": "radial_lumped", "limits.max_temperature": "615 K"}
    case = load_case(demo_dir / "oxidation-design.toml", overrides)
    problem = DesignProblem(case)
    assert simulate(design_case(case, problem.start_values())).reason_code == Reason.TEMPERATURE_CEILING
    res = optimise(case)
    assert res.ok, res.reason
    assert any("runs away in simulation" in n and "design.coolant_temperature" in n for n in res.notes)
    by_hand = optimise(load_case(demo_dir / "oxidation-design.toml",
                                 {**overrides, "design.coolant_temperature.start": "570 K"}))
    assert by_hand.ok and not any("runs away" in n for n in by_hand.notes)
    assert res.objective == pytest.approx(by_hand.objective, rel=1e-6)


def test_demo_optimum_verified_and_collocation_matches_integrator(demo_dir):
    from tubewright.models import load_case

    res = optimise(load_case(demo_dir / "oxidation-design.toml"))
    assert res.ok and res.verification["max_relative_deviation"] < 1e-3
    assert res.design["tube_count"] == round(res.design["tube_count"])
    prod = next(r for r in res.limits if r.name == "production_rate")
    assert prod.value >= prod.bound * (1 - 1e-6)
    assert res.simulation.summary["max_temperature_K"] <= 650.0 + 1e-3


def test_infeasible_limits_are_reported_with_a_hint():
    res = optimise(min_volume_case(**{"limits.max_temperature": "300 K", "design.length.max": "5 m",
                                      "limits.min_conversion": 0.99}))
    assert res.status in ("infeasible", "failed")
    assert "relax limits." in res.hint


def test_case_without_free_variable_is_simulated():
    res = optimise(make(liquid_case()))
    assert res.status == "not_optimised" and "simulated" in res.reason and res.simulation.ok


@pytest.mark.parametrize("design, message", [
    ({"length": {"min": "5 m", "max": "2 m"}}, "must be below max"),
    ({"length": {"min": "2 m"}}, "needs both min and max"),
    ({"lenght": {"min": "2 m", "max": "5 m"}}, 'did you mean "length"'),
    ({"coolant_flow": {"min": "1 kg/s", "max": "2 kg/s"}}, "has no coolant flow"),
])
def test_bad_design_sections(design, message):
    with pytest.raises(CaseError, match=message):
        read_design(make(liquid_case(design=design)))


def test_ideal_bound_logsdon_biegler_temperature_profile():
    # Logsdon and Biegler (1989): A -> B (second order, k1 = 4000 exp(-2500/T)), B -> C (first order,
    # k2 = 6.2e5 exp(-5000/T)), c_A0 = 1, residence time 1, 298 <= T <= 398 K; the optimal temperature profile
    # gives the maximum yield of B 0.610775 (published optimum, value from memory). Here: a liquid tube with
    # tau = 1 s, c_A0 = 1 mol/m^3, T free along the tube. Independent lower bound: the best isothermal yield,
    # found here by scipy integration over a grid of temperatures.
    from tubewright.optimizer.design.ideal import ideal_bound

    data = logsdon_biegler_data()
    bound = ideal_bound(make(data))
    assert bound["success"]
    assert bound["objective"] == pytest.approx(0.610775, abs=1e-4)

    import numpy as np
    from scipy.integrate import solve_ivp

    def isothermal_yield(T):
        a, b = 4000 * np.exp(-2500 / T), 6.2e5 * np.exp(-5000 / T)
        sol = solve_ivp(lambda t, y: [-a * y[0] ** 2, a * y[0] ** 2 - b * y[1]], (0, 1), [1, 0], rtol=1e-10)
        return sol.y[1, -1]

    best_isothermal = max(isothermal_yield(T) for T in np.linspace(298, 398, 51))
    assert bound["objective"] > best_isothermal + 1e-3
    temps = [p["T_K"] for p in bound["profile"]]
    assert temps[1] > temps[-1]  # hot at the inlet, cooler downstream: the published profile's shape


def test_output_only_states_are_solved_after_ipopt():
    # The heat removed and the residence time feed no figure of a design: the tube is built without them
    # (collocation.OUTPUT_STATES). The pressure (no rate reads it here) feeds nothing: IPOPT solves without it
    # (nlp.dangling) and Newton's method fills it in; the coolant temperature (held constant here) and the
    # flow of the inert solvent S follow from their own linear rows alone, determined blocks (nlp.presolve).
    # The reference is the same model with them inside.
    from tubewright.optimizer.design.ideal import free_temperature_profile

    p = DesignProblem(make(logsdon_biegler_data(10)))
    p.build(modify=free_temperature_profile(p))
    assert not hasattr(p.model, "Q") and not hasattr(p.model, "tau")
    nlp = p.nlp
    cut = nlp.compact.dangling
    names = {nlp.variables[nlp.compact.kept[j]].name.split("[")[0] for j in cut.cols}
    assert names == {"P"}
    # all 31 points of the pressure: in the block, or eliminated by its inlet row
    in_ipopt = {nlp.variables[j].name for j in nlp.compact.kept[np.setdiff1d(np.arange(len(nlp.compact.kept)),
                                                                             cut.cols)]}
    assert not any(name.startswith("P[") for name in in_ipopt)
    assert len(cut.cols) >= 30
    blocks = [nlp.variables[j].name for j in nlp.compact.block_cols]
    assert len(blocks) == 2 * (31 + 30) and {b.split("[")[0] for b in blocks} == {"Tc", "dTc", "F", "dF"}
    assert all(b.startswith(("Tc[", "dTc[", "F[S,", "dF[S,")) for b in blocks)
    x0 = [v.value for v in nlp.variables]
    outs = []
    for dangling in (False, True):
        for v, value in zip(nlp.variables, x0):
            v.set_value(value, skip_validation=True)
        outs.append(nlp.solve(options={**p.linear_solver_options(), "tol": 1e-9}, scaling=p.scaling(),
                              dangling=dangling))
    assert all(o.success for o in outs)
    assert outs[1].objective == pytest.approx(outs[0].objective, rel=1e-10)
    assert outs[1].x == pytest.approx(outs[0].x, rel=1e-8, abs=1e-9)
    assert outs[1].multipliers == pytest.approx(outs[0].multipliers, rel=1e-6, abs=1e-9)
    assert outs[1].constraint_violation < 1e-7


def test_cli_optimize_json_and_infeasible_report(demo_dir, capsys):
    import json

    from tubewright.optimizer.cli import main

    assert main(["optimize", str(demo_dir / "oxidation-design.toml"), "--json"]) == 0
    answer = json.loads(capsys.readouterr().out)
    assert answer["status"] == "optimal" and answer["goal"] == "min_cost"
    assert {"length_m", "inner_diameter_m", "tube_count", "coolant_temperature_K"} <= set(answer["design"])
    limits = {r["limit"]: r for r in answer["limits"]}
    assert limits["production_rate"]["binding"] and limits["production_rate"]["multiplier_per_unit"] > 0
    assert answer["verification"]["max_relative_deviation"] < answer["verification"]["tolerance"]
    assert "Screening estimate" in answer["caution"]
    # 6 mol/s is above the feed's stoichiometric maximum (5.6 mol/s): refused before IPOPT, with the bound
    code = main(["optimize", str(demo_dir / "oxidation-design.toml"), "--set", "limits.production_rate=6 mol/s"])
    text = capsys.readouterr().out
    assert code == 1 and "infeasible" in text and "lower limits.production_rate below 5.6 mol/s" in text


def test_cli_optimize_bad_design_exit_2(tmp_path, demo_dir, capsys):
    from tubewright.optimizer.cli import main

    bad = tmp_path / "bad.toml"
    base = demo_dir / "oxidation-design.toml"
    bad.write_text(f'include = "{base}"\n[design]\nlength = {{ min = "9 m", max = "2 m" }}\n')
    assert main(["optimize", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "design.length" in err and "below max" in err


def test_countercurrent_liquid_optimum_is_verified(demo_dir):
    # Counter-current coolant: a boundary condition at the outlet in the collocation model; the optimum must
    # agree with the shooting solution of the adaptive integrator.
    from tubewright.models import load_case

    res = optimise(load_case(demo_dir / "coil-design.toml"))
    assert res.ok, res.reason
    assert res.verification["max_relative_deviation"] < 0.01
    assert res.simulation.summary["max_temperature_K"] <= 323.0 + 0.05
    assert any("coolant_flow sits at its upper bound" in n for n in res.notes)


def test_verification_above_tolerance_refines_the_mesh():
    # A tolerance below what 5 elements can reach forces one refinement (5 -> 10 elements) and a note.
    res = optimise(min_volume_case(**{"numerics.finite_elements": 5, "numerics.verify_tolerance": 1e-12}))
    assert res.ok
    assert any("mesh refined from 5 to 10 elements" in n for n in res.notes)
    assert res.solver["finite_elements"] == 10
